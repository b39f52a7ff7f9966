"""What processes of one library spec share (fixed beams and decays at rest): the spec in the
card's order, resolved parameters and masses, the cuts, the record layout and run-record sections."""

from __future__ import annotations

import numpy as np

from ..card import RunConfig
from ..physics.matrix import MODELS
from ..physics.matrix.registry import flow_tags
from ..physics.particles import species
from .cuts import Cuts
from .interface import ParticleLayout, Process

__all__ = ["SpecProcess", "particle_widths"]


def particle_widths(cfg: RunConfig, names) -> dict[str, float]:
    """Widths (GeV) of particles as the run uses them: set by the model's parameters, else by the
    card's [parameters.widths], else PDG."""
    model = MODELS[cfg.model]
    governed = {abs(species(n).pdg): w for n, w in model.widths(cfg.resolved.parameters).items()}
    out = {}
    for name in names:
        pdg = abs(species(name).pdg)
        out[name] = float(governed.get(pdg, cfg.widths.get(pdg, species(name).width)))
    return out


class SpecProcess(Process):
    """A process given by one spec of the library (not a sum over subprocesses)."""

    def __init__(self, cfg: RunConfig):
        res = cfg.resolved
        self.cfg = cfg
        self.ordering = res.ordering
        self.spec = self.ordering.spec
        self.params = dict(res.parameters)
        self.species = tuple(cfg.incoming) + tuple(cfg.outgoing)
        self.masses = tuple(res.masses[:len(self.species)])
        #: the card's particle index of each canonical particle
        self.canonical = self.ordering.canonical
        self.me_params = dict(self.params, **{f"m{k + 1}": self.masses[i] for k, i in enumerate(self.canonical)})
        self.cuts = Cuts(cfg)
        # colour tags of each flow in card order; one flow is fixed, several are chosen per event
        self.flow_tags = flow_tags(self.spec.colour_flows, self.canonical, len(self.species))

    def claimed_me_params(self, claimed) -> dict:
        """The |M|^2 parameters (model parameters and canonical masses m1, m2, ...) that a run
        record's parameters section states; the process's own when claimed is None."""
        if claimed is None:
            return dict(self.me_params)
        masses = [claimed["masses_GeV"][p.name] for p in self.species]
        return dict(claimed["model"], **{f"m{k + 1}": masses[i] for k, i in enumerate(self.canonical)})

    def _scale(self) -> float:
        """The scale the fixed couplings stand at: the energy of the hard process."""
        raise NotImplementedError

    def particle_layout(self) -> ParticleLayout:
        n = len(self.species)
        n_in = len(self.cfg.incoming)
        tags = self.flow_tags[0]
        return ParticleLayout(
            pdg=np.array([p.pdg for p in self.species], np.int32),
            roles=("incoming",) * n_in + ("outgoing",) * (n - n_in),
            parent_first=np.array([-1] * n_in + [0] * (n - n_in), np.int16),
            parent_last=np.array([-1] * n_in + [n_in - 1] * (n - n_in), np.int16),
            colour=tags[:, 0].copy(), anticolour=tags[:, 1].copy(), mass=np.array(self.masses, np.float64),
            subprocesses=(self.cfg.label,), scale=self._scale(), alpha_em=float(self.params.get("alpha", 0.0)),
            alpha_s=self.params.get("alpha_s"))

    def process_section(self) -> dict:
        cfg = self.cfg
        return {"model": cfg.model, "incoming": [p.name for p in cfg.incoming], "outgoing": [p.name for p in cfg.outgoing],
                "label": cfg.label, "symmetry_factor": self.spec.symmetry, "source": " ".join(self.spec.source.split())}

    def parameter_section(self) -> dict:
        names = [p.name for p in self.species]
        return {"model": dict(self.params), "masses_GeV": dict(zip(names, self.masses)),
                "widths_GeV": particle_widths(self.cfg, names)}
