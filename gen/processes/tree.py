"""Processes of the automatic amplitudes at fixed beam energies: any 2 -> n (n = 2 ... 6) that a
model file allows, with phase space along the amplitude's propagators.

The phase space is a multi-channel combination (`gen.physics.channels`) of decay trees, one per
s-channel structure of the amplitude: every massive unstable line (W, Z, H, t) whose particles
come out gets a Breit-Wigner map of its invariant mass, every massless line between two
outgoing particles (a photon or gluon splitting, a quark emitting) a 1/s map from the card's pair
mass cut, and channels are made of compatible structures, the resonances first. Colour flows of
events are drawn from the leading-colour flow amplitudes (`FlowChooser`).
"""

from __future__ import annotations

import numpy as np

from ..card import RunConfig
from ..errors import CardError
from ..physics import tree
from ..physics.channels import MultiChannel, Node, Topology
from ..physics.constants import HBARC2_PB
from ..physics.kinematics import BreitWignerMap, FlatMap, PowerMap, boost_z
from ..physics.particles import antiparticle, species
from ..physics.tree.amplitudes import flow_chooser
from .fixed_beams import FixedBeams
from .interface import CannotValidate, Channel, EventData

__all__ = ["TreeProcess", "propagator_structures", "topologies"]

#: at most this many phase-space channels
MAX_CHANNELS = 12


def propagator_structures(rec, n_in: int):
    """The s-channel lines of an amplitude: (outgoing particle indices, line label) for every
    current of the recursion whose legs on one side are outgoing particles only (two or more)."""
    n = rec.n
    every = (1 << n) - 1
    seen = set()
    for mask, label in rec.joins:
        for side, lab in ((mask, label), (every ^ mask, antiparticle(label))):
            legs = [i for i in range(n) if side >> i & 1]
            if len(legs) >= 2 and min(legs) >= n_in and len(legs) < n - n_in:
                key = (tuple(i - n_in for i in legs), lab)
                if key not in seen:
                    seen.add(key)
                    yield key


def _laminar(a: tuple[int, ...], b: tuple[int, ...]) -> bool:
    sa, sb = set(a), set(b)
    return not (sa & sb) or sa <= sb or sb <= sa


def _tree(members: tuple[int, ...], family: list[tuple[tuple[int, ...], object, float]], smap=None,
          s_min: float = 0.0) -> Node:
    """A decay tree over `members` in which every set of `family` (set, map, s_min) is a node."""
    inner = [f for f in family if set(f[0]) < set(members)]
    tops = [f for f in inner if not any(set(f[0]) < set(g[0]) for g in inner)]
    units: list = []
    covered: set[int] = set()
    for f in tops:
        units.append(_tree(f[0], inner, f[1], f[2]))
        covered |= set(f[0])
    units += [i for i in members if i not in covered]
    while len(units) > 2:  # join the last two units until two are left
        a, b = units[-2], units[-1]
        la = (a,) if isinstance(a, int) else a.leaves
        lb = (b,) if isinstance(b, int) else b.leaves
        units = units[:-2] + [Node(tuple(sorted(la + lb)), (a, b))]
    return Node(tuple(sorted(members)), tuple(units), smap or FlatMap(), s_min)


def topologies(structures, n_out: int, masses, sqrt_s: float, widths, pair_s_min, out_masses) -> list[Topology]:
    """Decay trees for the propagator structures of an amplitude (see the module docstring);
    pair_s_min(legs) is the cuts' lower bound on the invariant mass squared of those outgoing slots."""
    cands = []
    for legs, label in structures:
        m, w = masses.get(label, 0.0), widths.get(label, 0.0)
        s_min = pair_s_min(legs)
        if m > 0.0 and w > 0.0 and m < sqrt_s:
            cands.append((legs, BreitWignerMap(m, w), s_min, 0))
        elif m == 0.0 and len(legs) == 2 and s_min > 0.0 and species(label).spin2 in (1, 2):
            cands.append((legs, PowerMap(1.0), s_min, 1))
    best: dict[tuple, tuple] = {}
    for c in sorted(cands, key=lambda c: c[3]):  # per set of particles one resonance and one massless line
        best.setdefault((c[0], c[3]), c)
    cands = sorted(best.values(), key=lambda c: (c[3], -len(c[0])))
    families: dict[tuple, list] = {}
    for c in cands or [None]:
        fam = [] if c is None else [c]
        for other in cands:
            if other is not c and all(other[0] != f[0] and _laminar(other[0], f[0]) for f in fam):
                fam.append(other)
        families.setdefault(tuple(sorted((f[0], f[3]) for f in fam)), fam)
        if len(families) >= MAX_CHANNELS:
            break
    return [Topology(_tree(tuple(range(n_out)), [(f[0], f[1], f[2]) for f in fam]), out_masses)
            for fam in families.values()]


class TreeProcess(FixedBeams):
    """A 2 -> n process of a model file at fixed beam energies (see the module docstring)."""

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.n_out = len(cfg.outgoing)
        names = [p.name for p in self.species]
        self.amplitude = tree.build(cfg.model, [p.name for p in cfg.incoming], [p.name for p in cfg.outgoing],
                                    params=self.params, **amplitude_inputs(cfg, dict(zip(names, cfg.resolved.masses))))
        rec = self.amplitude.recursion
        structures = list(propagator_structures(rec, 2))
        self.phase = MultiChannel(topologies(structures, self.n_out, rec.masses, self.sqrt_s, rec.widths,
                                             self.cuts.pair_s_min, list(self.masses[2:])))
        names_ch = ", ".join(t.name for t in self.phase.topologies)
        self.channels = (Channel(f"{self.phase.k} decay tree{'s' if self.phase.k > 1 else ''}: {names_ch}",
                                 self.phase.ndim),)
        self.flows = flow_chooser(self.amplitude)
        self.flow_tags_tree = self.flows.tags
        self.norm = HBARC2_PB * self.spec.symmetry * self.flux
        e1 = (self.s + self.masses[0] ** 2 - self.masses[1] ** 2) / (2.0 * self.sqrt_s)
        self._p1_cm = np.array([e1, 0.0, 0.0, self.p_in])
        self._p2_cm = np.array([self.sqrt_s - e1, 0.0, 0.0, -self.p_in])
        probe = self.phase.generate(np.random.default_rng(0).random((20000, self.ndim)), self.sqrt_s)
        if self.cuts.active and not np.any(self.cuts.mask(boost_z(probe[0], self.y_cm)) & (probe[1] > 0)):
            raise CardError(cfg.source, "cuts", "the cuts reject every event of this process at this energy")

    def _points(self, x):
        cm, w_ps, _ = self.phase.generate(x, self.sqrt_s)
        full = np.empty((x.shape[0], 2 + self.n_out, 4))
        full[:, 0], full[:, 1], full[:, 2:] = self._p1_cm, self._p2_cm, cm
        return full, w_ps

    def weights(self, x):
        full, w_ps = self._points(x)
        live = w_ps > 0
        if self.cuts.active:
            live &= self.cuts.mask(boost_z(self._cut_momenta(full), self.y_cm))
        w = np.zeros(x.shape[0])
        if live.any():
            # sampled helicities or colours draw from a stream fixed by the points, so that a point's
            # weight is the same each time it is asked for
            rng = np.random.default_rng(np.frombuffer(np.ascontiguousarray(x[:1]).tobytes(), np.uint32))
            w[live] = self.norm * self.amplitude.squared(full[live], rng) * w_ps[live]
        return w

    def channel_report(self, nodes) -> list[dict]:
        return channel_report(self, self.phase, nodes, 0, lambda x: self.sqrt_s)

    def _cut_momenta(self, full):
        """The centre-of-mass momenta (N, n, 4) the cuts see: the outgoing particles."""
        return full[:, 2:]

    def events(self, x, rng: np.random.Generator) -> EventData:
        full, _ = self._points(x)
        lab = full.copy()
        lab[:, 2:] = boost_z(full[:, 2:], self.y_cm)
        self._beams_into(lab)
        hel = self.amplitude.draw_helicities(full, rng) if self.amplitude.helicity_mode == "sample" else None
        if len(self.flows.flows) < 2:
            tags = self.flow_tags_tree[0]
            return EventData(lab, colour=np.broadcast_to(tags[:, 0], (x.shape[0], tags.shape[0])).copy(),
                             anticolour=np.broadcast_to(tags[:, 1], (x.shape[0], tags.shape[0])).copy(), helicity=hel)
        choice = self.flows.choose(full, rng)
        return EventData(lab, colour=self.flow_tags_tree[choice, :, 0], anticolour=self.flow_tags_tree[choice, :, 1],
                         helicity=hel)

    def particle_layout(self):
        layout = super().particle_layout()
        from dataclasses import replace

        tags = self.flow_tags_tree[0]
        return replace(layout, colour=tags[:, 0].copy(), anticolour=tags[:, 1].copy())

    def validation(self, claimed=None):
        raise CannotValidate("samples of the automatic amplitudes have no analytic reference in gen validate; the "
                             "amplitudes are checked against the hand-coded library and published values by the "
                             "tests (tests/test_tree.py)")


#: points drawn from the adapted map to estimate what share of sigma each channel covers
CHANNEL_REPORT_POINTS = 4000


def channel_report(proc, phase: MultiChannel, nodes, offset: int, sqrt_s_of) -> list[dict]:
    """The channels of `phase` (the process's variables from `offset` on; `sqrt_s_of(x)` their
    energies) with their adapted weights, read from the map of the channel-picking variable, and
    the share of the cross-section each channel's density accounts for, estimated from points of
    the adapted map with a fixed seed."""
    import vegas

    if phase.k < 2:
        return []
    frac = phase.sampled_fractions(nodes[offset])
    amap = vegas.AdaptiveMap([list(n) for n in nodes])
    y = np.random.default_rng(20261203).random((CHANNEL_REPORT_POINTS, len(nodes)))
    x, jac = np.empty_like(y), np.empty(y.shape[0])
    amap.map(y, x, jac)
    w = proc.weights(x) * jac
    covers = np.zeros(phase.k)
    if w.sum() > 0:
        live = w > 0
        sqrt_s = np.broadcast_to(sqrt_s_of(x), (x.shape[0],))[live]
        cm = phase.generate(x[live, offset:], sqrt_s)[0]
        covers = (w[live, None] * phase.shares(cm, sqrt_s)).sum(axis=0) / w.sum()
    return [{"name": t.name, "weight": float(f), "covers": float(c)}
            for t, f, c in zip(phase.topologies, frac, covers)]


def amplitude_inputs(cfg: RunConfig, masses: dict[str, float]) -> dict:
    """What `tree.build` takes from a card besides the process and parameters: the masses (the
    run's `masses` by particle name, then [parameters.masses]), the widths of [parameters.widths]
    and the options helicities and colours."""
    from ..physics.particles import lookup

    out_masses = {species(n).name: m for n, m in masses.items()}
    out_masses.update({lookup(int(pdg)).name: m for pdg, m in cfg.masses.items()})
    return {"masses": out_masses, "widths": {lookup(int(pdg)).name: w for pdg, w in cfg.widths.items()},
            "helicities": cfg.process_options.get("helicities", "sum"),
            "colours": cfg.process_options.get("colours", "auto")}
