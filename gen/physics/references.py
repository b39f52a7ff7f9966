"""Analytic differential cross-sections for validating samples, written apart from the library.

Each reference gives dsigma/dcos(theta*) in pb as a function of the canonical cos(theta*) (the
angle of canonical p3 to canonical p1 in the centre-of-mass frame, see `gen.physics.matrix.registry`),
from a textbook formula written here independently of `gen/matrix/`, so that a wrong |M|^2 in
the library shows up as a disagreement. Each states its source and its own relative accuracy
(for example terms of order m_e^2/s that the formula neglects). Identical final-state particles
carry their factor 1/2 here, not taken from the library.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from .constants import HBARC2_PB

__all__ = ["Reference", "REFERENCES"]


@dataclass(frozen=True)
class Reference:
    name: str
    source: str
    #: (c, s, par) -> dsigma/dcos in pb; par has m1..m4 (canonical masses, GeV) and model parameters
    density: Callable[[np.ndarray, float, Mapping[str, float]], np.ndarray]
    #: (s, par) -> relative accuracy of the formula itself
    accuracy: Callable[[float, Mapping[str, float]], float]


def _p(s, ma, mb):
    lam = (s - (ma + mb) ** 2) * (s - (ma - mb) ** 2)
    return math.sqrt(max(lam, 0.0)) / (2.0 * math.sqrt(s))


def _invariants(c, s, par):
    m1, m2, m3, m4 = (par[k] for k in ("m1", "m2", "m3", "m4"))
    rs = math.sqrt(s)
    pi, pf = _p(s, m1, m2), _p(s, m3, m4)
    e1 = (s + m1 * m1 - m2 * m2) / (2 * rs)
    e3 = (s + m3 * m3 - m4 * m4) / (2 * rs)
    t = m1 * m1 + m3 * m3 - 2 * (e1 * e3 - pi * pf * c)
    u = m1 * m1 + m4 * m4 - 2 * (e1 * (rs - e3) + pi * pf * c)
    return t, u, pi, pf


def _from_m2(m2, s, pi, pf):
    """dsigma/dcos = |M|^2 p_f / (32 pi s p_i), in pb."""
    return HBARC2_PB * m2 * pf / (32.0 * math.pi * s * pi)


def _me2_s(s, par):
    return (par["m1"] ** 2) / s


def lepton_pair(c, s, par):
    """dsigma/dOmega = alpha^2/(4s) beta [1 + m^2/E^2 + (1 - m^2/E^2) cos^2]: Peskin & Schroeder eq. 5.13."""
    m = par["m3"]
    beta = math.sqrt(1.0 - 4.0 * m * m / s)
    return HBARC2_PB * 2 * math.pi * par["alpha"] ** 2 / (4 * s) * beta * (2 - beta**2 + beta**2 * c * c)


def bhabha(c, s, par):
    """alpha^2/(2s) [(1 + cos^4(th/2))/sin^4(th/2) - 2 cos^4(th/2)/sin^2(th/2) + (1 + cos^2 th)/2]:
    Peskin & Schroeder problem 5.2 (massless)."""
    s2, c2 = (1 - c) / 2, (1 + c) / 2
    return HBARC2_PB * 2 * math.pi * par["alpha"] ** 2 / (2 * s) * ((1 + c2**2) / s2**2 - 2 * c2**2 / s2 + (1 + c * c) / 2)


def moller(c, s, par):
    """alpha^2 (3 + cos^2)^2 / (s sin^4), times 1/2 for the identical electrons: Moller (1932), massless."""
    return 0.5 * HBARC2_PB * 2 * math.pi * par["alpha"] ** 2 * (3 + c * c) ** 2 / (s * (1 - c * c) ** 2)


def electron_muon(c, s, par):
    """(1/4) sum |M|^2 = 2 e^4 [(s - m^2 - M^2)^2 + (u - m^2 - M^2)^2 + 2 (m^2 + M^2) t] / t^2:
    Halzen & Martin eq. 6.30 with the masses of Peskin & Schroeder eq. 5.10 crossed."""
    t, u, pi, pf = _invariants(c, s, par)
    mm = par["m1"] ** 2 + par["m2"] ** 2
    e4 = (4 * math.pi * par["alpha"]) ** 2
    return _from_m2(2 * e4 * ((s - mm) ** 2 + (u - mm) ** 2 + 2 * mm * t) / t**2, s, pi, pf)


def klein_nishina(c, s, par):
    """dsigma/dOmega = (r_e^2/2)(w'/w)^2 (w'/w + w/w' - sin^2 theta) in the electron rest frame
    (Klein & Nishina, Z. Phys. 52 (1929) 853), turned into dsigma/dt = pi r_e^2 X / (2 w^2) with
    w = (s - m^2)/2m, w' = (m^2 - u)/2m, cos theta = 1 + t / (2 w w')."""
    t, u, pi, pf = _invariants(c, s, par)
    m = par["m1"]
    w = (s - m * m) / (2 * m)
    wp = (m * m - u) / (2 * m)
    cos_lab = 1 + t / (2 * w * wp)
    r = wp / w
    re2 = (par["alpha"] / m) ** 2  # r_e = alpha / m in natural units
    dsdt = math.pi * re2 * (r + 1 / r - (1 - cos_lab**2)) / (2 * w * w)
    return HBARC2_PB * dsdt * 2 * pi * pf


def _pair_annihilation_form(t, u, m, alpha):
    """The e+e- <-> gamma gamma spin sum, Jauch & Rohrlich, The Theory of Photons and Electrons
    (1976), sec. 12-6 (recalled; checked against Dirac traces in tests/test_references.py): 2 e^4 [(u-m^2)/(t-m^2) + (t-m^2)/(u-m^2) - 4m^2 (1/(t-m^2) + 1/(u-m^2))
    - 4 m^4 (1/(t-m^2) + 1/(u-m^2))^2]."""
    a, b = t - m * m, u - m * m
    r = 1 / a + 1 / b
    return 2 * (4 * math.pi * alpha) ** 2 * (b / a + a / b - 4 * m * m * r - 4 * m**4 * r * r)


def two_photon_annihilation(c, s, par):
    """e+e- -> gamma gamma, massive electron, times 1/2 for the identical photons."""
    t, u, pi, pf = _invariants(c, s, par)
    return 0.5 * _from_m2(_pair_annihilation_form(t, u, par["m1"], par["alpha"]), s, pi, pf)


def photon_fusion(c, s, par):
    """gamma gamma -> e+e-, massive electron (the same spin sum, averaged over photon polarizations)."""
    t, u, pi, pf = _invariants(c, s, par)
    return _from_m2(_pair_annihilation_form(t, u, par["m3"], par["alpha"]), s, pi, pf)


def make_gamma_z(q_f: float, t3_f: float, nc: float):
    def density(c, s, par):
        """dsigma/dcos = (pi alpha^2 N_c beta / 2s) [(2 - beta^2 + beta^2 c^2) V + beta^2 (1 + c^2) A + 2 beta c I],
        V = Q^2 - 2 Q v_e v_f chi1 + (v_e^2 + a_e^2) v_f^2 chi2, A = (v_e^2 + a_e^2) a_f^2 chi2,
        I = -2 Q a_e a_f chi1 + 4 v_e a_e v_f a_f chi2 (Ellis, Stirling & Webber (1996) sec. 3.1 with
        the threshold factors of vector and axial currents; from memory)."""
        sw2 = par["sw2"]
        mz, gz = par["m_Z"], par["width_Z"]
        kappa = 1 / (4 * sw2 * (1 - sw2))
        den = (s - mz * mz) ** 2 + (gz * mz) ** 2
        chi1 = kappa * s * (s - mz * mz) / den
        chi2 = kappa**2 * s * s / den
        ve, ae = -0.5 + 2 * sw2, -0.5
        vf, af = t3_f - 2 * q_f * sw2, t3_f
        beta = math.sqrt(max(1 - 4 * par["m3"] ** 2 / s, 0.0))
        vec = q_f**2 - 2 * q_f * ve * vf * chi1 + (ve * ve + ae * ae) * vf * vf * chi2
        axi = (ve * ve + ae * ae) * af * af * chi2
        inter = -2 * q_f * ae * af * chi1 + 4 * ve * ae * vf * af * chi2
        return HBARC2_PB * math.pi * par["alpha"] ** 2 * nc * beta / (2 * s) * (
            (2 - beta**2 + beta**2 * c * c) * vec + beta**2 * (1 + c * c) * axi + 2 * beta * c * inter)

    return density


def higgs_strahlung(c, s, par):
    """dsigma/dcos = sigma (3/4) (lambda sin^2 + 8 m_Z^2/s) / (lambda + 12 m_Z^2/s), sigma = G_F^2 m_Z^4/(96 pi s)
    (v'^2 + a'^2) lambda^(1/2) (lambda + 12 m_Z^2/s)/(1 - m_Z^2/s)^2 (Djouadi, Phys. Rept. 457 (2008) 1,
    sec. 3.1; from memory), with G_F^2 m_Z^4 = (pi alpha / (sqrt2 s_W^2 c_W^2))^2, the tree-level relation."""
    mz, mh, sw2 = par["m_Z"], par["m_H"], par["sw2"]
    lam = (1 - (mh + mz) ** 2 / s) * (1 - (mh - mz) ** 2 / s)
    gf_mz2 = math.pi * par["alpha"] / (math.sqrt(2) * sw2 * (1 - sw2))
    ve, ae = -1 + 4 * sw2, -1.0
    sig = gf_mz2**2 / (96 * math.pi * s) * (ve * ve + ae * ae) * math.sqrt(lam) * (lam + 12 * mz * mz / s) / (1 - mz * mz / s) ** 2
    return HBARC2_PB * sig * 0.75 * (lam * (1 - c * c) + 8 * mz * mz / s) / (lam + 12 * mz * mz / s)


def scalar(c, s, par):
    """M = -lambda - g^2 [1/(s - m^2) + 1/(t - m^2) + 1/(u - m^2)] (Srednicki (2007) ch. 10, from memory),
    times 1/2 for the identical final particles."""
    m = par["mass"]
    p2 = s / 4 - m * m
    t = -2 * p2 * (1 - c)
    u = -2 * p2 * (1 + c)
    amp = -par["quartic"] - par["cubic"] ** 2 * (1 / (s - m * m) + 1 / (t - m * m) + 1 / (u - m * m))
    return 0.5 * HBARC2_PB * amp * amp / (32 * math.pi * s)


def three_jet(x1, x2, s, par):
    """dsigma/dx1 dx2 = sigma_pt (2 alpha_s / 3 pi)(x1^2 + x2^2)/((1 - x1)(1 - x2)), sigma_pt = 4 pi alpha^2
    e_q^2 / s with the colours summed (DeGrand, Ng & Tye, Phys. Rev. D 16 (1977) 3251, eqs. 2.8-2.9;
    Halzen & Martin eq. 11.35); x1, x2 the quark and antiquark energy fractions 2E/sqrt(s)."""
    sigma_pt = 4 * math.pi * par["alpha"] ** 2 * par["charge"] ** 2 / s
    return HBARC2_PB * sigma_pt * 2 * par["alpha_s"] / (3 * math.pi) * (x1 * x1 + x2 * x2) / ((1 - x1) * (1 - x2))


def _zh_accuracy(s, par):
    mz, gz = par["m_Z"], par["width_Z"]
    return 2 * (mz * gz) ** 2 / (s - mz * mz) ** 2


_EXACT = lambda s, par: 1e-12  # noqa: E731
_ME_NEGLECTED = lambda s, par: 10 * _me2_s(s, par)  # noqa: E731  (terms of order m_e^2/s)

REFERENCES: dict[str, Reference] = {
    "qed.lepton_pair": Reference("qed.lepton_pair", lepton_pair.__doc__, lepton_pair, _ME_NEGLECTED),
    "qed.bhabha": Reference("qed.bhabha", bhabha.__doc__, bhabha, _ME_NEGLECTED),
    "qed.moller": Reference("qed.moller", moller.__doc__, moller, _ME_NEGLECTED),
    "qed.electron_muon": Reference("qed.electron_muon", electron_muon.__doc__, electron_muon, _EXACT),
    "qed.compton": Reference("qed.compton", klein_nishina.__doc__, klein_nishina, _EXACT),
    "qed.two_photon_annihilation": Reference("qed.two_photon_annihilation", two_photon_annihilation.__doc__,
                                             two_photon_annihilation, _EXACT),
    "qed.photon_fusion": Reference("qed.photon_fusion", photon_fusion.__doc__, photon_fusion, _EXACT),
    "electroweak.higgs_strahlung": Reference("electroweak.higgs_strahlung", higgs_strahlung.__doc__, higgs_strahlung,
                                             lambda s, par: _zh_accuracy(s, par) + 10 * _me2_s(s, par)),
    "scalar.scattering": Reference("scalar.scattering", scalar.__doc__, scalar, _EXACT),
    # a density in the quark and antiquark energy fractions (x1, x2), not in cos theta*
    "qcd.three_jet": Reference("qcd.three_jet", three_jet.__doc__, three_jet,
                               lambda s, par: 10 * (par["m3"] ** 2 + par["m1"] ** 2) / s),
}
for _name, _q, _t3, _nc in (("mu-", -1, -0.5, 1), ("tau-", -1, -0.5, 1), ("d", -1 / 3, -0.5, 3), ("u", 2 / 3, 0.5, 3),
                            ("s", -1 / 3, -0.5, 3), ("c", 2 / 3, 0.5, 3), ("b", -1 / 3, -0.5, 3)):
    _f = make_gamma_z(_q, _t3, _nc)
    REFERENCES[f"electroweak.gamma_z.{_name}"] = Reference(f"electroweak.gamma_z.{_name}", _f.__doc__, _f, _ME_NEGLECTED)
