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

__all__ = ["Param", "ProcessSpec", "Model", "ColourFlow"]

#: |M|^2(s, t, u, params) -> array; s, t, u are float64 arrays of equal shape (GeV^2).
MatrixElement = Callable[[np.ndarray, np.ndarray, np.ndarray, Mapping[str, float]], np.ndarray]


@dataclass(frozen=True)
class Param:
    """A tunable model parameter: default, allowed closed range, unit and meaning."""

    default: float | str | None
    lo: float | None = None
    hi: float | None = None
    unit: str = ""
    doc: str = ""
    choices: tuple[str, ...] = ()


@dataclass(frozen=True)
class ColourFlow:
    """Colour tags of the four particles in canonical order: (colour, anticolour) pairs, tags >= 1.

    Only processes with a single colour flow are in the 2->2 lepton library (a quark-antiquark pair
    from a colour singlet); zero means no colour.
    """

    tags: tuple[tuple[int, int], ...]


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
    #: key of the independent analytic reference in `gen.references` used by `gen validate`
    reference: str | None = None
    #: for more than two outgoing particles: |M|^2(p, params) of canonical momenta p (N, n, 4)
    momentum_matrix: Callable[[np.ndarray, Mapping[str, float]], np.ndarray] | None = None

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
class Model:
    name: str
    doc: str
    params: Mapping[str, Param]
    resolve: Callable[[Mapping[str, object]], dict[str, float | str]]
    #: masses (GeV) the model sets for particles, from its resolved parameters; by name
    masses: Callable[[Mapping[str, float]], dict[str, float]] = lambda par: {}
    processes: tuple[ProcessSpec, ...] = field(default_factory=tuple)
