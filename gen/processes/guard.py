"""One guard where the integrand is built: a card whose integrand vanishes everywhere, or is
negative or not finite somewhere, ends in one clear error naming the card key most likely
responsible, before vegas or the unweighting see it.

`probe` evaluates a new process at uniform points of the hypercube (`build_process` calls it, with
a random stream of its own: spawn key (2,) of the card's seed); `guarded` wraps the integrand so
that every later evaluation (adaptation, calibration, sampling) is checked the same way.
"""

from __future__ import annotations

import numpy as np

from ..card import CUT_DEFAULTS
from ..errors import CardError
from ..physics.matrix import MODELS

__all__ = ["IntegrandError", "probe", "guarded", "check_effects"]

#: points of the probe before adaptation
PROBE_POINTS = 4096
#: the probe's first look: most integrands are non-zero somewhere among these, and a slow one
#: (p p -> 3 jets, some ms per point) is not kept waiting a minute for the rest
PROBE_FIRST = 256
#: negative weights this small against the largest of their batch are rounding, set to zero
ROUNDING = 1e-12
#: points on which a model parameter's effect is looked for
EFFECT_POINTS = 512


class IntegrandError(CardError):
    """An integrand that cannot be sampled (zero everywhere, negative or not finite somewhere)."""


def _diagnose(proc, what: str) -> IntegrandError:
    cfg = proc.cfg
    model = MODELS[cfg.model]
    given = cfg.parameters
    if what == "zero":
        zero = [k for k in model.couplings if k in given and given[k] == 0]
        if zero:
            key, why = f"parameters.{zero[0]}", "a coupling of 0 switches the process off"
        elif _cuts_given(cfg):
            key, why = "cuts", "the cuts leave no part of the phase space where the process is non-zero"
        else:
            key, why = "process", "the process has no phase space where its |M|^2 is non-zero at this energy"
        return IntegrandError(cfg.source, key, f"the integrand is zero at every one of {PROBE_POINTS} trial points: {why}")
    if what == "negative" and cfg.hadron_beams:
        fixed = [k for k in ("factorization", "renormalization") if not isinstance(cfg.scales[k], str)]
        key = f"scales.{fixed[0]}" if fixed else "partons.set"
        return IntegrandError(cfg.source, key, "the integrand is negative at some points: the parton densities of "
                              f"{cfg.partons['set']!r} are negative there (at small x and low scales); choose a "
                              "larger or a dynamic scale, or another set")
    widths = [k for k, v in given.items() if k.startswith("width") and v == 0]
    if widths:
        return IntegrandError(cfg.source, f"parameters.{widths[0]}", f"the integrand is {what} at some points: a width "
                              "of 0 leaves the resonance's propagator infinite where the phase space crosses its mass; "
                              "give the physical width")
    return IntegrandError(cfg.source, "process", f"the integrand is {what} at some points (an unregularized pole inside "
                          "the phase space?); narrow the cuts or the energy, and report it if the card looks right")


def _cuts_given(cfg) -> bool:
    return any(v != CUT_DEFAULTS[k] for k, v in cfg.cuts.items() if k != "particles") or "particles" in cfg.cuts


def _check(proc, w: np.ndarray) -> np.ndarray:
    finite = np.isfinite(w)
    if not finite.all():
        raise _diagnose(proc, "not finite")
    negative = w < 0
    if negative.any():
        # interpolated densities that vanish at x -> 1 can come out a rounding error below zero
        # (-1e-30 against weights of order 1): zero, not a negative density
        if np.all(-w[negative] <= ROUNDING * np.max(np.abs(w))):
            return np.where(negative, 0.0, w)
        raise _diagnose(proc, "negative")
    return w


def probe(proc) -> None:
    """Raise IntegrandError when the process's integrand is zero at every one of PROBE_POINTS
    uniform points, or negative or not finite at any of those it evaluates (the first
    PROBE_FIRST, and the rest only when those are all zero)."""
    rng = np.random.default_rng(np.random.SeedSequence(proc.cfg.sampling["seed"], spawn_key=(2,)))
    x = rng.random((PROBE_POINTS, proc.ndim))
    with np.errstate(all="ignore"):
        # the adaptation checks every batch for negative and non-finite weights (`guarded`); the
        # rest of the probe is needed only when the first look finds nothing
        if (_check(proc, proc.weights(x[:PROBE_FIRST])) > 0).any():
            return
        w = _check(proc, proc.weights(x[PROBE_FIRST:]))
    if not (w > 0).any():
        raise _diagnose(proc, "zero")


def _perturbed(value, key):
    """A nearby value of the same kind, to see whether a parameter changes anything."""
    if isinstance(value, bool):
        return not value
    if isinstance(value, (int, float)):
        return value * 1.01 if value != 0 else 0.01
    if isinstance(value, str) and getattr(key, "choices", ()):
        others = [c for c in key.choices if c != value]
        return others[0] if others else None
    return None


def _given_parameters(doc: dict):
    """(card key path, path in the TOML document) of every model parameter, mass and width the card sets."""
    table = doc.get("parameters", {})
    for k, v in table.items():
        if k in ("masses", "widths") and isinstance(v, dict):
            for name in v:
                yield f"parameters.{k}.{name}", ("parameters", k, name)
        else:
            yield f"parameters.{k}", ("parameters", k)


def _parent(doc: dict, path: tuple[str, ...]) -> dict:
    for k in path[:-1]:
        doc = doc[k]
    return doc


def _fingerprint(proc, x: np.ndarray) -> tuple:
    with np.errstate(all="ignore"):
        w = proc.weights(x)
        ev = proc.events(x, np.random.default_rng(0))
    return w, ev.momenta


def check_effects(proc, build) -> None:
    """Refuse a model parameter, mass or width the card sets that changes neither the integrand
    nor the events of this process: moved slightly, it leaves both identical on EFFECT_POINTS
    points (a W width in e+e- -> mu+mu-, a Cabibbo angle in a neutral-current process).
    `build(cfg)` builds a process without the checks."""
    import copy
    import tomllib

    from ..card import parse_doc

    cfg = proc.cfg
    if not cfg.parameters and not cfg.masses and not cfg.widths:
        return
    doc = tomllib.loads(cfg.text)
    params = MODELS[cfg.model].params
    rng = np.random.default_rng(np.random.SeedSequence(cfg.sampling["seed"], spawn_key=(3,)))
    x = rng.random((EFFECT_POINTS, proc.ndim))
    reference = None
    for card_key, path in _given_parameters(doc):
        moved = _perturbed(_parent(doc, path)[path[-1]], params.get(path[-1]) if len(path) == 2 else None)
        if moved is None:
            continue
        variant = copy.deepcopy(doc)
        _parent(variant, path)[path[-1]] = moved
        try:
            other = build(parse_doc(variant, cfg.source, cfg.text))
            if other.ndim != proc.ndim:
                continue
            reference = reference or _fingerprint(proc, x)
            changed = _fingerprint(other, x)
        except Exception:  # the moved value is not a valid card or process: it has an effect
            continue
        if all(np.array_equal(a, b, equal_nan=True) for a, b in zip(reference, changed)):
            raise CardError(cfg.source, card_key, f"has no effect on {cfg.label} (the integrand and the events are "
                            "the same whatever its value); leave it out")


def guarded(proc):
    """proc.weights, checked at every call: finite and non-negative, else IntegrandError."""
    def weights(x):
        with np.errstate(all="ignore"):
            return _check(proc, proc.weights(x))

    return weights
