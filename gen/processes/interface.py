"""The declared process interface: what every process offers the sampler, the writer, the
validator and the batch code, and the plain-data types that cross it.

A process is an integrand on the unit hypercube together with the means to turn its points into
event records. `Process` (an abstract base) lists exactly what callers may use; nothing else of a
process is read from outside, and no caller asks a process what it is. The kinds that exist
(`TwoToTwo`, `ManyBody`, `DecayAtRest`, `HadronCollision` and the `WithDecays` wrapper) implement
it, and a new kind (automatic amplitudes, beams with radiation) implements it too and needs no
special case elsewhere.

Members:

- `cfg`, `species`, `masses`, `params`: the validated card, the production's particles in card
  order (incoming, then outgoing), their masses (GeV) and the model's resolved parameters.
- `measure`: what the integral is (a cross-section in pb, or a partial width in GeV).
- `channels`: the phase-space parametrizations, each with its number of variables. Every process
  offers one today; the sampler and the grid files carry the list, so that multi-channel sampling
  adds channels without a new interface.
- `weights(x)`: the integrand (measure per unit volume) at points x of shape (N, ndim).
- `events(x, rng)`: an `EventData` for the points x: momenta (N, n, 4) in the laboratory and
  whatever else varies per event.
- `particle_layout()`: a `ParticleLayout`, what is the same for every event of the run.
- `record_sections()`: the process, collider and parameter sections of the run record.
- `couplings()`: the couplings in use, with their meaning, for the run summary.
- `validation(claimed)`: a `ValidationPlan` for `gen validate`, built with the parameters a file's
  run record claims (so that a record that misstates them fails), or `CannotValidate` saying why not.
"""

from __future__ import annotations

import abc
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from ..card import RunConfig
from ..errors import UserError
from ..physics.matrix import MODELS
from ..physics.particles import Species

__all__ = ["Process", "Channel", "Measure", "CROSS_SECTION", "PARTIAL_WIDTH", "EventData", "ParticleLayout",
           "ValidationPlan", "CannotValidate"]


@dataclass(frozen=True)
class Channel:
    """One parametrization of a process's phase space by the unit hypercube."""

    name: str
    ndim: int


@dataclass(frozen=True)
class Measure:
    """What the integral of a process is, its unit and its symbol in summaries."""

    quantity: str
    unit: str
    symbol: str


CROSS_SECTION = Measure("cross-section", "pb", "σ")
PARTIAL_WIDTH = Measure("partial width", "GeV", "Γ")


@dataclass
class EventData:
    """What varies from event to event; None where the layout's fixed value holds."""

    momenta: np.ndarray  # (N, n, 4) laboratory (E, px, py, pz), GeV
    pdg: np.ndarray | None = None  # (N, n) int32
    colour: np.ndarray | None = None  # (N, n) int32
    anticolour: np.ndarray | None = None
    subprocess: np.ndarray | None = None  # (N,) int16 index into the layout's labels
    scale: np.ndarray | None = None  # renormalization scale (GeV)
    factorization_scale: np.ndarray | None = None
    alpha_s: np.ndarray | None = None
    x1: np.ndarray | None = None
    x2: np.ndarray | None = None
    mass: np.ndarray | None = None  # (N, n): resonance masses drawn per event
    helicity: np.ndarray | None = None  # (N, n) float32 in units of hbar, NaN where not known

    @classmethod
    def concatenate(cls, parts: list["EventData"]) -> "EventData":
        """One EventData of several, in order."""
        if len(parts) == 1:
            return parts[0]
        return cls(**{f: None if getattr(parts[0], f) is None else np.concatenate([getattr(p, f) for p in parts])
                      for f in cls.__dataclass_fields__})


@dataclass(frozen=True)
class ParticleLayout:
    """What is the same for every event of a run, with defaults for what may vary per event."""

    pdg: np.ndarray  # (n,) int32
    roles: tuple[str, ...]  # incoming, outgoing, intermediate
    parent_first: np.ndarray  # (n,) int16, -1 for none
    parent_last: np.ndarray
    colour: np.ndarray  # (n,) int32
    anticolour: np.ndarray
    mass: np.ndarray  # (n,) float64, GeV
    subprocesses: tuple[str, ...]
    scale: float  # GeV
    alpha_em: float
    alpha_s: float | None = None

    @property
    def n(self) -> int:
        return len(self.pdg)


class CannotValidate(UserError):
    """`gen validate` has no analytic reference for this sample; the message says why and what is
    checked elsewhere."""


@dataclass(frozen=True)
class ValidationPlan:
    """What `gen validate` compares a sample with.

    `reference(level)` returns the reference on a quadrature grid: weights (pb, or GeV for a
    width; zero where the card's cuts reject the point) and the observables at the grid's points;
    level 2 is the same grid made twice as fine, whose difference estimates the quadrature's own
    error. `observe(momenta)` gives the same observables from a file's momenta (N, n, 4).
    `accuracy` is the reference formula's own relative accuracy (neglected terms), `scale` a factor
    the reference is multiplied by (the branching ratios of decays), `note` what is not checked.
    """

    name: str
    source: str
    observables: Mapping[str, tuple[str, str]]  # name -> (axis label, unit)
    reference: Callable[[int], tuple[np.ndarray, dict[str, np.ndarray]]]
    observe: Callable[[np.ndarray], dict[str, np.ndarray]]
    accuracy: float = 0.0
    scale: float = 1.0
    note: str = ""


class Process(abc.ABC):
    """The interface every process implements (see the module docstring)."""

    cfg: RunConfig
    species: tuple[Species, ...]
    masses: tuple[float, ...]
    params: dict
    measure: Measure = CROSS_SECTION
    channels: tuple[Channel, ...]

    @property
    def ndim(self) -> int:
        """Variables of the (single) channel; multi-channel sampling will ask each channel instead."""
        if len(self.channels) != 1:
            raise NotImplementedError("this sampler handles processes with one phase-space channel")
        return self.channels[0].ndim

    @abc.abstractmethod
    def weights(self, x: np.ndarray) -> np.ndarray:
        """The integrand (measure per unit volume of the hypercube) at points x (N, ndim)."""

    @abc.abstractmethod
    def events(self, x: np.ndarray, rng: np.random.Generator) -> EventData:
        """The event records of points x."""

    @abc.abstractmethod
    def particle_layout(self) -> ParticleLayout:
        """What is the same for every event of the run."""

    @abc.abstractmethod
    def record_sections(self) -> dict:
        """The process, collider and parameter sections of the run record."""

    @abc.abstractmethod
    def validation(self, claimed: Mapping | None = None) -> ValidationPlan:
        """What `gen validate` compares the sample with, built with `claimed`, the parameters section
        of the file's run record (None: the process's own); raises CannotValidate when there is nothing."""

    def channel_report(self, nodes) -> list[dict]:
        """For a multi-channel phase space, one entry per channel given the adapted grid's nodes:
        its name, its adapted weight (share of points) and the share of the cross-section its map
        covers; empty for a single channel."""
        return []

    def couplings(self) -> dict[str, float]:
        """The couplings the process uses, as its model names them (alpha, alpha_s, sin^2 theta_W ...)."""
        return {k: float(self.params[k]) for k in MODELS[self.cfg.model].couplings if k in self.params}
