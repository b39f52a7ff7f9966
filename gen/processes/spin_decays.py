"""Decays with spin correlations: a production and its card's decays as one tree amplitude in the
narrow-width approximation.

The amplitude is that of the whole final state (the decay products that do not decay again),
restricted to the diagrams in which each decaying particle is one line carrying exactly its
products (`Recursion` resonances). Its propagator numerator sums the particle's helicities
coherently, so production and decays are joined per helicity and every decay angle follows the
production's spin state. Each resonance is on its mass shell: in the narrow-width limit

    int ds/(2 pi) |N(s)|^2 / |s - m^2 + i m Gamma|^2  ->  |A(m^2)|^2 m Gamma / 2,

with A(m^2) the amplitude with the propagator 1/(i m Gamma) at s = m^2. Each decay is then scaled
from the partial width Gamma_tree(parent -> products) that the same couplings give to the card's
branching ratio: a factor BR Gamma / Gamma_tree per resonance. Summed over the decay angles the
interference between the parent's helicities vanishes, so the cross-section is sigma(production)
x BR exactly as for isotropic decays; only the decay angles change.

The phase space is one decay tree whose nodes are the resonances, each at s = m^2. The resonances
have their pole masses in every event (isotropic decays draw Breit-Wigner masses instead); cuts
apply to the production's particles, as for isotropic decays.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..card import RunConfig
from ..errors import CardError
from ..physics import tree
from ..physics.channels import MultiChannel, Topology
from ..physics.constants import HBARC2_PB
from ..physics.kinematics import boost_z, two_body_momentum
from ..physics.particles import species
from ..physics.tree.amplitudes import flow_chooser
from .base import particle_widths
from .decays import DecayChain
from .fixed_beams import FixedBeams
from .interface import CannotValidate, Channel, EventData
from .tree import TreeProcess, _tree, amplitude_inputs

__all__ = ["CorrelatedDecays", "OnShellMap"]


@dataclass(frozen=True)
class OnShellMap:
    """s fixed at m^2: a resonance on its mass shell. Its Jacobian 2 pi cancels the 1/(2 pi) of the
    node's ds/(2 pi), so the node contributes the factor 1 that the narrow-width formula supposes."""

    m: float

    def __call__(self, x, lo, hi):
        return np.full(np.shape(x), self.m * self.m), np.full(np.shape(x), 2.0 * math.pi)

    def jacobian(self, s, lo, hi):
        return np.full(np.shape(s), 2.0 * math.pi)


class CorrelatedDecays(TreeProcess):
    """A fixed-beam production of an automatic model followed by its card's decays, as one
    amplitude (see the module docstring)."""

    def __init__(self, cfg: RunConfig):
        FixedBeams.__init__(self, cfg)
        res = cfg.resolved
        self.steps = res.decays
        self.names = res.names
        n_prod = 2 + len(cfg.outgoing)
        decayed = {st.parent for st in self.steps}
        #: record indices of the particles that come out (the amplitude's outgoing legs, in order)
        self.leaves = [i for i in range(2, len(self.names)) if i not in decayed]
        below = {i: [i] for i in self.leaves}
        for st in reversed(self.steps):  # innermost decays last in the list
            below[st.parent] = below[st.children[0]] + below[st.children[1]]
        self.below = below
        inputs = amplitude_inputs(cfg, dict(zip(self.names, res.masses)))
        inputs["widths"].update({st.particle: st.width for st in self.steps})
        masses, widths = inputs["masses"], inputs["widths"]
        position = {i: k for k, i in enumerate(self.leaves)}
        resonances = [(tuple(sorted(position[i] for i in below[st.parent])), st.particle) for st in self.steps]
        leaf_names = [self.names[i] for i in self.leaves]
        try:
            self.amplitude = tree.build(cfg.model, [p.name for p in cfg.incoming], leaf_names, params=self.params,
                                        resonances=resonances, **inputs)
        except tree.ProcessRefused as exc:
            raise CardError(cfg.source, "decays", f"the decays cannot be joined to the production in one amplitude: "
                            f"{exc}") from None
        self.factor = 1.0
        self.partial_widths = {}
        for st in self.steps:
            if st.width <= 0.0:
                raise CardError(cfg.source, f"decays.{st.particle}", "a particle with spin-correlated decays needs a "
                                "width (set [parameters.widths] or use process.decay_spins = \"isotropic\")")
            gamma = self._partial_width(cfg, st, masses, widths)
            self.partial_widths[st.particle] = gamma
            self.factor *= st.mass * st.width / 2.0 * st.branching_ratio * st.width / gamma
        # the decay tree: each resonance a node on its mass shell
        family = [(tuple(sorted(position[i] for i in below[st.parent])), OnShellMap(st.mass), 0.0) for st in self.steps]
        out_masses = [res.masses[i] for i in self.leaves]
        self.phase = MultiChannel([Topology(_tree(tuple(range(len(self.leaves))), family), out_masses)])
        self.n_out = len(self.leaves)
        self.channels = (Channel(f"decay tree {self.phase.topologies[0].name} with on-shell resonances",
                                 self.phase.ndim),)
        self.flows = flow_chooser(self.amplitude)
        self.flow_tags_tree = self.flows.tags
        self.norm = HBARC2_PB * self.spec.symmetry * self.flux * self.factor
        e1 = (self.s + self.masses[0] ** 2 - self.masses[1] ** 2) / (2.0 * self.sqrt_s)
        self._p1_cm = np.array([e1, 0.0, 0.0, self.p_in])
        self._p2_cm = np.array([self.sqrt_s - e1, 0.0, 0.0, -self.p_in])
        self.chain = DecayChain(self.steps, self.names, res.masses, 2)
        self._base = FixedBeams.particle_layout(self)
        self._layout = self.chain.layout(self._base)
        self._n_prod = n_prod

    def _partial_width(self, cfg, st, masses, widths) -> float:
        """Gamma(parent -> products) at tree level from the model file's couplings (GeV): the
        spin-averaged |M|^2 of the two-body decay times p* / (8 pi m^2), halved for identical products."""
        amp = tree.build(cfg.model, [st.particle], list(st.products), params=self.params, masses=masses, widths=widths)
        m1, m2 = (amp.legs[1].mass, amp.legs[2].mass)
        me = float(amp.squared(amp.probe_momenta(1, 1))[0])
        gamma = me * two_body_momentum(st.mass, m1, m2) / (8.0 * math.pi * st.mass**2)
        return gamma / 2.0 if st.products[0] == st.products[1] else gamma

    def _cut_momenta(self, full):
        """The production's outgoing momenta (N, n_prod - 2, 4), which the cuts see: decayed particles
        as the sums of their products, from the amplitude's momenta `full` (N, 2 + leaves, 4)."""
        pos = {i: 2 + k for k, i in enumerate(self.leaves)}
        return np.stack([full[:, [pos[j] for j in self.below[i]]].sum(axis=1) for i in range(2, self._n_prod)], axis=1)

    def events(self, x, rng: np.random.Generator) -> EventData:
        full, _ = self._points(x)
        n = x.shape[0]
        cm = np.zeros((n, len(self.names), 4))
        cm[:, 0], cm[:, 1] = self._p1_cm, self._p2_cm
        for k, i in enumerate(self.leaves):
            cm[:, i] = full[:, 2 + k]
        for i, legs in self.below.items():
            if len(legs) > 1:
                cm[:, i] = cm[:, legs].sum(axis=1)
        lab = cm.copy()
        lab[:, 2:] = boost_z(cm[:, 2:], self.y_cm)
        self._beams_into(lab)
        choice = self.flows.choose(full, rng)
        tags = self.flow_tags_tree[choice]  # (N, amplitude legs, 2)
        colour = np.zeros((n, len(self.names)), np.int32)
        anti = np.zeros_like(colour)
        colour[:, :2], anti[:, :2] = tags[:, :2, 0], tags[:, :2, 1]
        for k, i in enumerate(self.leaves):
            colour[:, i], anti[:, i] = tags[:, 2 + k, 0], tags[:, 2 + k, 1]
        for st in reversed(self.steps):  # a coloured parent carries the line of its coloured product
            if species(st.particle).colour != 1:
                kid = next(k for k, p in zip(st.children, st.products) if species(p).colour == species(st.particle).colour)
                colour[:, st.parent], anti[:, st.parent] = colour[:, kid], anti[:, kid]
        hel = None
        if self.amplitude.helicity_mode == "sample":  # the intermediate particles' helicities are summed over
            hel = np.full((n, len(self.names)), np.nan, np.float32)
            h = self.amplitude.draw_helicities(full, rng)
            hel[:, :2] = h[:, :2]
            hel[:, self.leaves] = h[:, 2:]
        return EventData(lab, colour=colour, anticolour=anti, helicity=hel)

    def particle_layout(self):
        return self._layout

    def record_sections(self) -> dict:
        rec = super().record_sections()
        rec["decays"] = {"chain": self.chain.describe(), "total_branching_ratio": self.chain.branching_ratio,
                         "treatment": "narrow width with spin correlations: one tree amplitude of production and "
                                      "decays through on-shell resonances, each decay scaled from its tree-level "
                                      "partial width to its branching ratio",
                         "tree_partial_widths_GeV": dict(self.partial_widths)}
        rec["parameters"]["widths_GeV"] = particle_widths(self.cfg, [n for n in self.names if not species(n).is_group])
        return rec

    def validation(self, claimed=None):
        raise CannotValidate("samples with spin-correlated decays have no analytic reference in gen validate; the "
                             "decay angles are checked against their published distributions by the tests "
                             "(tests/test_spin_decays.py)")
