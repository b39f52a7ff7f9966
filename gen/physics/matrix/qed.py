"""Quantum electrodynamics at tree level: lepton pair production, Bhabha, Moller, lepton-muon
scattering, Compton scattering and the two-photon processes.

All |M|^2 are averaged over initial and summed over final spins and polarizations, in terms of
the Mandelstam variables of the canonical order (see `registry`). e^2 = 4 pi alpha.
"""

from __future__ import annotations

import math

from ...keys import NUMBER, Key
from ..constants import alpha_0
from .registry import Model, ProcessSpec


def _e4(par) -> float:
    return (4.0 * math.pi * par["alpha"]) ** 2


def pair_production(s, t, u, par):
    """e-(p1) e+(p2) -> l-(p3) l+(p4) by one photon, massive final leptons, massless electrons.

    (1/4) sum |M|^2 = 2 e^4 [(t - m^2)^2 + (u - m^2)^2 + 2 m^2 s] / s^2, m the final-lepton mass;
    the massless limit is Halzen & Martin, Quarks and Leptons (1984), eq. 6.31; the mass terms are
    Peskin & Schroeder, An Introduction to QFT (1995), eq. 5.10 written in invariants.
    """
    m2 = par["m3"] ** 2
    return 2.0 * _e4(par) * ((t - m2) ** 2 + (u - m2) ** 2 + 2.0 * m2 * s) / s**2


def lepton_scattering(s, t, u, par):
    """e-(p1) mu-(p2) -> e-(p3) mu-(p4) by one photon in the t channel, both masses kept.

    (1/4) sum |M|^2 = 2 e^4 [(s - m^2 - M^2)^2 + (u - m^2 - M^2)^2 + 2 (m^2 + M^2) t] / t^2;
    massless limit Halzen & Martin (1984), eq. 6.30; masses by crossing Peskin & Schroeder eq. 5.10.
    """
    mm = par["m1"] ** 2 + par["m2"] ** 2
    return 2.0 * _e4(par) * ((s - mm) ** 2 + (u - mm) ** 2 + 2.0 * mm * t) / t**2


def bhabha(s, t, u, par):
    """e-(p1) e+(p2) -> e-(p3) e+(p4), s- and t-channel photons, electron mass neglected in |M|^2.

    (1/4) sum |M|^2 = 2 e^4 [(s^2 + u^2)/t^2 + 2 u^2/(s t) + (t^2 + u^2)/s^2];
    Peskin & Schroeder (1995), problem 5.2 (reference from memory); checked in the tests against the
    textbook dsigma/dOmega in angles.
    """
    return 2.0 * _e4(par) * ((s * s + u * u) / (t * t) + 2.0 * u * u / (s * t) + (t * t + u * u) / (s * s))


def moller(s, t, u, par):
    """e-(p1) e-(p2) -> e-(p3) e-(p4), t- and u-channel photons, electron mass neglected in |M|^2.

    (1/4) sum |M|^2 = 2 e^4 [(s^2 + u^2)/t^2 + 2 s^2/(t u) + (s^2 + t^2)/u^2];
    the crossing s <-> u of Bhabha scattering (reference: Berestetskii, Lifshitz & Pitaevskii,
    Quantum Electrodynamics, sec. 81, from memory). Symmetry factor 1/2.
    """
    return 2.0 * _e4(par) * ((s * s + u * u) / (t * t) + 2.0 * s * s / (t * u) + (s * s + t * t) / (u * u))


def _compton_like(a, b, m2, e4):
    """2 e^4 [-b/a - a/b + 4 m^2 (1/a + 1/b) + 4 m^4 (1/a + 1/b)^2] with a = s - m^2, b = u - m^2."""
    r = 1.0 / a + 1.0 / b
    return 2.0 * e4 * (-b / a - a / b + 4.0 * m2 * r + 4.0 * m2 * m2 * r * r)


def compton(s, t, u, par):
    """e-(p1) gamma(p2) -> e-(p3) gamma(p4), massive electron (Klein-Nishina).

    (1/4) sum |M|^2 = 2 e^4 [p.k'/p.k + p.k/p.k' + 2 m^2 (1/p.k - 1/p.k') + m^4 (1/p.k - 1/p.k')^2],
    Peskin & Schroeder (1995), eq. 5.87, with p.k = (s - m^2)/2, p.k' = (m^2 - u)/2; massless limit
    Halzen & Martin (1984), eq. 6.113.
    """
    m2 = par["m1"] ** 2
    return _compton_like(s - m2, u - m2, m2, _e4(par))


def annihilation_to_photons(s, t, u, par):
    """e-(p1) e+(p2) -> gamma(p3) gamma(p4), massive electron; crossing of Compton scattering.

    (1/4) sum |M|^2 = -[Compton form](s -> t, u -> u), Peskin & Schroeder (1995), eq. 5.105 and its
    massive form by crossing (sec. 5.5). Symmetry factor 1/2.
    """
    m2 = par["m1"] ** 2
    return -_compton_like(t - m2, u - m2, m2, _e4(par))


def photon_fusion(s, t, u, par):
    """gamma(p1) gamma(p2) -> e-(p3) e+(p4), massive electron (Breit-Wheeler).

    Same spin sum as e+e- -> gamma gamma with t and u taken against the outgoing electron; the
    average over 2 x 2 photon polarizations equals that over 2 x 2 electron spins.
    """
    m2 = par["m3"] ** 2
    return -_compton_like(t - m2, u - m2, m2, _e4(par))


def _gap_initial(s, masses):
    """Distance of the 1/(t - m^2) pole from cos = 1 set by the incoming electron's speed."""
    m = masses[0]
    beta = math.sqrt(max(0.0, 1.0 - 4.0 * m * m / s))
    return 1.0 / beta - 1.0 if beta > 0 else 1.0


def _gap_final(s, masses):
    m = masses[2]
    beta = math.sqrt(max(0.0, 1.0 - 4.0 * m * m / s))
    return 1.0 / beta - 1.0 if beta > 0 else 1.0


def _gap_compton(s, masses):
    """u - m^2 = -2 p1.p4 vanishes at cos = -1/beta_e of the incoming electron in the CM frame."""
    m = masses[0]
    e = (s + m * m) / (2.0 * math.sqrt(s))
    beta = math.sqrt(max(0.0, 1.0 - (m / e) ** 2))
    return 1.0 / beta - 1.0 if beta > 0 else 1.0


def _resolve(over):
    alpha = float(over.get("alpha", alpha_0()))
    return {"alpha": alpha}


_PROC = [
    ProcessSpec("qed", ("e-", "e+"), ("mu-", "mu+"), pair_production, pair_production.__doc__,
                reference="qed.lepton_pair"),
    ProcessSpec("qed", ("e-", "e+"), ("tau-", "tau+"), pair_production, pair_production.__doc__,
                reference="qed.lepton_pair"),
    ProcessSpec("qed", ("e-", "e+"), ("e-", "e+"), bhabha, bhabha.__doc__, poles="forward",
                pole_power=2, needs_angular_cut=True, reference="qed.bhabha"),
    ProcessSpec("qed", ("e-", "e-"), ("e-", "e-"), moller, moller.__doc__, poles="both",
                pole_power=2, needs_angular_cut=True, reference="qed.moller"),
    ProcessSpec("qed", ("e-", "mu-"), ("e-", "mu-"), lepton_scattering, lepton_scattering.__doc__,
                poles="forward", pole_power=2, needs_angular_cut=True, reference="qed.electron_muon"),
    ProcessSpec("qed", ("e-", "gamma"), ("e-", "gamma"), compton, compton.__doc__, poles="backward",
                pole_power=1, pole_gap=_gap_compton, reference="qed.compton"),
    ProcessSpec("qed", ("e-", "e+"), ("gamma", "gamma"), annihilation_to_photons,
                annihilation_to_photons.__doc__, poles="both", pole_power=1, pole_gap=_gap_initial,
                reference="qed.two_photon_annihilation"),
    ProcessSpec("qed", ("gamma", "gamma"), ("e-", "e+"), photon_fusion, photon_fusion.__doc__,
                poles="both", pole_power=1, pole_gap=_gap_final, reference="qed.photon_fusion"),
]

MODEL = Model(
    name="qed",
    doc="Quantum electrodynamics at tree level; alpha(0) = 1/137.036 (zero momentum transfer) by default.",
    params={"alpha": Key(NUMBER, None, 1e-6, 1.0, "", "fine-structure constant", default_doc="CODATA alpha(0)")},
    couplings=("alpha",),
    resolve=_resolve,
    processes=tuple(_PROC),
)
