"""The process library: models, their parameters, and their 2->2 processes.

A model bundles a set of tunable parameters (with defaults and allowed ranges) and its processes.
Each process gives a vectorized, spin- and colour-averaged |M|^2 as a function of the Mandelstam
variables of its canonical particle order, its symmetry factor for identical final-state
particles, the poles of its angular distribution (for the phase-space mapping), and its source.

Canonical order: incoming (p1, p2), outgoing (p3, p4); s = (p1 + p2)^2, t = (p1 - p3)^2,
u = (p1 - p4)^2. The cosine of the scattering angle is that of p3 against p1 in the centre-of-mass
frame.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np

from ...keys import Key

__all__ = ["ProcessSpec", "Model", "ColourFlow", "Ordering", "flow_from_orderings", "choose_flows", "draw_index",
           "flow_tags"]

#: |M|^2(s, t, u, params) -> array; s, t, u are float64 arrays of equal shape (GeV^2).
MatrixElement = Callable[[np.ndarray, np.ndarray, np.ndarray, Mapping[str, float]], np.ndarray]


@dataclass(frozen=True)
class ColourFlow:
    """Colour tags of the particles in canonical order: (colour, anticolour) pairs, tags >= 1, zero
    for none. A process with several flows gives each a `weight(s, t, u, par)`: its leading-colour
    partial weight, to which the probability of choosing the flow at a phase-space point is
    proportional."""

    tags: tuple[tuple[int, int], ...]
    weight: Callable[[np.ndarray, np.ndarray, np.ndarray, Mapping[str, float]], np.ndarray] | None = None


def flow_from_orderings(n: int, orderings, weight=None, n_in: int = 2) -> ColourFlow:
    """A colour flow from colour orderings, in the picture where every particle is outgoing.

    Each ordering is a tuple of canonical indices (0-based). An open ordering runs from a
    colour-triplet end (an outgoing quark, or an incoming antiquark) through gluons to an
    antitriplet end (an outgoing antiquark, or an incoming quark); an ordering whose first entry is
    "ring" is a closed ring of gluons. Along an ordering each particle's colour line is the next
    one's anticolour line. An incoming particle is an outgoing one crossed: its colour and
    anticolour swap. Colour is conserved by construction.
    """
    col = [0] * n
    anti = [0] * n
    tag = 0
    for ordering in orderings:
        ring = ordering[0] == "ring"
        idx = list(ordering[1:] if ring else ordering)
        tag += 1
        col[idx[0]] = tag
        for j in idx[1:]:
            anti[j] = tag
            if j != idx[-1] or ring:
                tag += 1
                col[j] = tag
        if ring:
            anti[idx[0]] = tag
    tags = tuple((anti[i], col[i]) if i < n_in else (col[i], anti[i]) for i in range(n))
    return ColourFlow(tags, weight)


def draw_index(weights: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Per point (column), the row drawn with probability proportional to weights (k, N) >= 0;
    r holds one uniform number per point."""
    cum = np.cumsum(weights, axis=0)
    return np.minimum((cum < (r * cum[-1])[None, :]).sum(axis=0), weights.shape[0] - 1)


def choose_flows(flows, s, t, u, par, r) -> np.ndarray:
    """Index of the flow chosen at each point, with probability proportional to the flows'
    leading-colour weights at (s, t, u) (canonical order)."""
    if len(flows) < 2:
        return np.zeros(np.shape(s), np.int64)
    return draw_index(np.stack([fl.weight(s, t, u, par) for fl in flows]), r)


def flow_tags(flows, canonical, n: int) -> np.ndarray:
    """Tags (len(flows) or 1, n, 2) of each flow in the card's particle order; canonical particle k
    is the card's particle canonical[k] (see `Ordering.canonical`)."""
    tags = np.zeros((max(len(flows), 1), n, 2), np.int32)
    for f, flow in enumerate(flows):
        for k, user in enumerate(canonical):
            tags[f, user] = flow.tags[k]
    return tags


@dataclass(frozen=True)
class ProcessSpec:
    """One process of a model, in canonical particle order."""

    model: str
    incoming: tuple[str, str]
    outgoing: tuple[str, ...]
    matrix: MatrixElement | None
    source: str
    poles: str = "none"  # none | forward | backward | both (in cos theta of p3 against p1)
    pole_power: int = 2  # 2 for a 1/t^2 pole (massless exchange), 1 for 1/(t - m^2)
    pole_gap: Callable[[float, tuple[float, float, float, float]], float] | None = None
    needs_angular_cut: bool = False
    colour: ColourFlow | None = None
    #: key of the independent analytic reference in `gen.physics.references` used by `gen validate`
    reference: str | None = None
    #: for more than two outgoing particles: |M|^2(p, params) of canonical momenta p (N, n, 4)
    momentum_matrix: Callable[[np.ndarray, Mapping[str, float]], np.ndarray] | None = None
    #: several colour flows, each with its leading-colour weight (instead of the single `colour`)
    flows: tuple[ColourFlow, ...] = ()
    #: power of alpha_s in |M|^2 (alpha_s then comes per event from par["alpha_s"])
    strong_order: int = 0
    #: s-channel resonance of the process: the model parameters of its mass and width
    resonance: tuple[str, str] | None = None
    #: a massless particle in the s channel (a photon, a gluon): |M|^2 grows like 1/s at small s, so a
    #: hadron collision needs a lower bound on the pair mass
    massless_s_pole: bool = False

    @property
    def colour_flows(self) -> tuple[ColourFlow, ...]:
        return self.flows or ((self.colour,) if self.colour is not None else ())

    @property
    def symmetry(self) -> float:
        """Symmetry factor 1/prod(k!) for k identical final-state particles of each kind (1/2 for a
        pair), else 1 (stated once, here)."""
        f = 1.0
        for k in Counter(self.outgoing).values():
            f /= math.factorial(k)
        return f

    @property
    def label(self) -> str:
        return f"{' '.join(self.incoming)} -> {' '.join(self.outgoing)}"


@dataclass(frozen=True)
class Ordering:
    """How the particles of a card (or of a subprocess, in the card's slot order) map onto a spec's
    canonical order: canonical incoming i is the card's incoming in_perm[i], canonical outgoing j
    the card's outgoing out_perm[j]. The one place where this bookkeeping is derived."""

    spec: ProcessSpec
    in_perm: tuple[int, ...]
    out_perm: tuple[int, ...]

    @property
    def canonical(self) -> tuple[int, ...]:
        """The card's particle index (incoming then outgoing) of each canonical particle."""
        n_in = len(self.in_perm)
        return tuple(self.in_perm) + tuple(n_in + j for j in self.out_perm)

    @property
    def t_u_swapped(self) -> bool:
        """True when t of the card's order, (first incoming - first outgoing)^2, is the spec's u
        (exactly one of the two first particles is not canonical p1 or p3). For a 2 -> 2 process the
        cosine of the card's first outgoing particle against its first incoming one is then minus
        the canonical cos(theta*)."""
        return (self.in_perm[0] != 0) != (self.out_perm[0] != 0)


@dataclass(frozen=True)
class Model:
    name: str
    doc: str
    #: the model's card parameters, described like every card key
    params: Mapping[str, Key]
    resolve: Callable[[Mapping[str, object]], dict[str, float | str]]
    #: the particles whose masses the model's parameters set: {particle name: parameter name}
    mass_params: Mapping[str, str] = field(default_factory=dict)
    #: the particles whose widths the model's parameters set: {particle name: parameter name}
    width_params: Mapping[str, str] = field(default_factory=dict)
    processes: tuple[ProcessSpec, ...] = field(default_factory=tuple)
    #: the card's parameters that its other choices leave without effect: {name: reason}
    inapplicable: Callable[[Mapping[str, object]], dict[str, str]] = lambda given: {}
    #: the resolved parameters that are couplings, shown in every run's summary
    couplings: tuple[str, ...] = ()
    #: the model file of the automatic amplitudes (`gen.physics.tree`), None for a hand-coded library
    automatic: str | None = None
    #: particles the model treats as massless (in amplitudes and kinematics alike)
    massless: tuple[str, ...] = ()

    def masses(self, par: Mapping[str, float]) -> dict[str, float]:
        """Masses (GeV) the model sets, from its resolved parameters or as massless; by particle name."""
        out = {name: 0.0 for name in self.massless}
        out.update({name: float(par[p]) for name, p in self.mass_params.items()})
        return out

    def widths(self, par: Mapping[str, float]) -> dict[str, float]:
        """Widths (GeV) the model sets, from its resolved parameters; by particle name."""
        return {name: float(par[p]) for name, p in self.width_params.items()}
