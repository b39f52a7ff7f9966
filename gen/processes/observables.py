"""The observables `gen validate` histograms, computed from event momenta, with their labels."""

from __future__ import annotations

import numpy as np

from ..physics.kinematics import boost_z, mass, pt, rapidity

__all__ = ["LABELS", "first_particle", "pair", "energy_fractions"]

#: name -> (axis label with unit, unit)
LABELS = {
    "cos_theta_cm": ("cos θ* of the first outgoing particle (centre-of-mass frame)", ""),
    "pt": ("transverse momentum p_T of the first outgoing particle [GeV]", "GeV"),
    "rapidity": ("rapidity y of the first outgoing particle (laboratory)", ""),
    "energy": ("energy E of the first outgoing particle (laboratory) [GeV]", "GeV"),
    "x_quark": ("quark energy fraction 2E/√s (centre-of-mass frame)", ""),
    "x_antiquark": ("antiquark energy fraction 2E/√s (centre-of-mass frame)", ""),
    "x_gluon": ("gluon energy fraction 2E/√s (centre-of-mass frame)", ""),
    "pair_mass": ("invariant mass of the outgoing pair [GeV]", "GeV"),
    "pair_rapidity": ("rapidity of the outgoing pair (laboratory)", ""),
}


def first_particle(p: np.ndarray, y_cm: float) -> dict[str, np.ndarray]:
    """Observables of laboratory momenta p (N, 4); y_cm is the rapidity of the centre-of-mass frame."""
    cm = boost_z(p, -y_cm)
    pabs = np.sqrt(pt(cm) ** 2 + cm[:, 3] ** 2)
    cos_cm = np.divide(cm[:, 3], pabs, out=np.ones_like(pabs), where=pabs > 0)
    return {"cos_theta_cm": cos_cm, "pt": pt(p), "rapidity": rapidity(p), "energy": p[:, 0]}


def pair(p: np.ndarray, first: int) -> dict[str, np.ndarray]:
    """Mass and laboratory rapidity of the sum of particles first and first + 1 of p (N, n, 4)."""
    q = p[:, first] + p[:, first + 1]
    return {"pair_mass": mass(q), "pair_rapidity": rapidity(q)}


def energy_fractions(p: np.ndarray, y_cm: float, sqrt_s: float, idx) -> dict[str, np.ndarray]:
    """2E/sqrt(s) in the centre-of-mass frame of the quark, antiquark and gluon at indices idx of p (N, n, 4)."""
    cm = boost_z(p, -y_cm)
    return {name: 2.0 * cm[:, i, 0] / sqrt_s for name, i in zip(("x_quark", "x_antiquark", "x_gluon"), idx)}
