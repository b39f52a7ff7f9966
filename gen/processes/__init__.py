"""Processes: a validated card turned into an integrand on the unit hypercube and the means to
make its events, behind one declared interface (`gen.processes.interface.Process`)."""

from __future__ import annotations

from ..card import RunConfig
from .guard import IntegrandError, check_effects, guarded, probe
from .interface import CannotValidate, Channel, EventData, Measure, ParticleLayout, Process, ValidationPlan

__all__ = ["build_process", "Process", "Channel", "Measure", "EventData", "ParticleLayout", "ValidationPlan",
           "CannotValidate", "IntegrandError", "guarded"]


def build_process(cfg: RunConfig, checks: bool = True) -> Process:
    """The process of a validated card (raises CardError where the phase space cannot be built, and
    IntegrandError where the integrand cannot be sampled): a `TwoToTwo` or `ManyBody` at fixed beam
    energies, a `DecayAtRest`, a `HadronCollision`, or the automatic amplitudes' `TreeProcess`,
    `TreeHadronProcess` or `CorrelatedDecays` (spin-correlated decays); the others wrapped in
    `WithDecays` when the card decays particles (isotropically). `checks=False` leaves out the probe
    of the integrand and the check that every model parameter the card sets has an effect
    (`gen.processes.guard`)."""
    from ..physics.matrix import MODELS

    if MODELS[cfg.model].automatic and cfg.hadron_beams:
        from .tree_hadron import TreeHadronProcess

        proc: Process = TreeHadronProcess(cfg)
    elif MODELS[cfg.model].automatic and cfg.process_options.get("decay_spins") == "correlated":
        from .spin_decays import CorrelatedDecays

        proc = CorrelatedDecays(cfg)
    elif MODELS[cfg.model].automatic:
        from .tree import TreeProcess

        proc = TreeProcess(cfg)
    elif cfg.hadron_beams:
        from .hadron import HadronCollision

        proc = HadronCollision(cfg)
    elif cfg.at_rest:
        from .at_rest import DecayAtRest

        proc = DecayAtRest(cfg)
    else:
        from .fixed_beams import ManyBody, TwoToTwo

        proc = ManyBody(cfg) if len(cfg.outgoing) > 2 else TwoToTwo(cfg)
    if cfg.resolved.decays and cfg.process_options.get("decay_spins") != "correlated":
        from .decays import WithDecays

        proc = WithDecays(proc)
    if checks:
        probe(proc)
        check_effects(proc, lambda c: build_process(c, checks=False))
    return proc
