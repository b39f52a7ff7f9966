"""Reference values and formulas from outside the project, each with its source.

Status words follow the shared convention: "confirmed" (checked against the source), "from
memory" (recalled), "computed" (evaluated here from the stated formula).
"""

from __future__ import annotations

import math

import scipy.constants as sc

#: (hbar c)^2 in pb GeV^2 -- PDG RPP Table 1.1 (exact since the 2019 SI); confirmed.
HBARC2_PB = 0.3893793721e9

#: 1 barn in pb (definition).
BARN_PB = 1e12

#: Thomson cross-section in barn -- CODATA via scipy.constants; confirmed.
THOMSON_BARN = sc.physical_constants["Thomson cross section"][0] / 1e-28

#: Classical electron radius in fm -- CODATA via scipy.constants.
R_E_FM = sc.physical_constants["classical electron radius"][0] * 1e15

#: Fine-structure constant -- CODATA via scipy.constants.
ALPHA = sc.physical_constants["fine-structure constant"][0]

#: PDG "Cross-section formulae for specific processes": sigma(e+e- -> mu+mu-) = 86.8 nb / s[GeV^2]
#: (point-like QED, massless muons); the rounded number is from the review, confirmed.
PDG_MUMU_NB_GEV2 = 86.8

#: Z-pole values, PDG / LEP-SLC, Phys. Rept. 427 (2006) 257: Gamma_ll in GeV (from memory),
#: Gamma_Z in GeV (confirmed).
GAMMA_LL_PDG = 0.083984
GAMMA_Z_PDG = 2.4952
M_Z_PDG = 91.1876

#: LEP hadronic pole cross-section (nb) and R_l = Gamma_had / Gamma_ll, PDG / LEP-SLC, Phys. Rept.
#: 427 (2006) 257 (from memory): sigma0_mumu = SIGMA0_HAD_NB / R_L_PDG
SIGMA0_HAD_NB = 41.480
R_L_PDG = 20.767


def klein_nishina_by_quadrature(k: float, r_e_fm: float = R_E_FM) -> float:
    """The total Compton cross-section (fm^2) as scipy.integrate's integral of the Klein-Nishina
    dsigma/dOmega = (r_e^2/2) P^2 (P + 1/P - sin^2 theta), P = 1/(1 + k (1 - cos theta))
    (Klein & Nishina, Z. Phys. 52 (1929) 853): a computation of its own beside the closed form."""
    import scipy.integrate as si

    def density(c):
        p = 1.0 / (1.0 + k * (1.0 - c))
        return 0.5 * r_e_fm**2 * p * p * (p + 1.0 / p - (1.0 - c * c)) * 2.0 * math.pi

    return si.quad(density, -1.0, 1.0, epsabs=0, epsrel=1e-12)[0]


def klein_nishina(k: float, r_e_fm: float = R_E_FM) -> float:
    """Total Compton cross-section (fm^2) on a free electron at rest, k = photon energy / m_e c^2.

    Klein & Nishina, Z. Phys. 52 (1929) 853; the integrated form as in Heitler, The Quantum Theory
    of Radiation (1954), sec. 22 (recalled; checked against a quadrature of the differential
    Klein-Nishina form in test_cross_sections.py).
    """
    l = math.log(1.0 + 2.0 * k)
    return 2.0 * math.pi * r_e_fm**2 * ((1.0 + k) / k**2 * (2.0 * (1.0 + k) / (1.0 + 2.0 * k) - l / k)
                                         + l / (2.0 * k) - (1.0 + 3.0 * k) / (1.0 + 2.0 * k) ** 2)


def breit_wheeler(beta: float, r_e_fm: float = R_E_FM) -> float:
    """sigma(gamma gamma -> e+ e-) in fm^2, beta the electron speed in the CM frame.

    Breit & Wheeler, Phys. Rev. 46 (1934) 1087 (formula recalled; the library |M|^2 that the test
    integrates against it is checked against Dirac traces in test_references.py):
    sigma = (pi r_e^2 / 2) (1 - beta^2) [(3 - beta^4) ln((1 + beta)/(1 - beta)) - 2 beta (2 - beta^2)].
    """
    return 0.5 * math.pi * r_e_fm**2 * (1.0 - beta**2) * (
        (3.0 - beta**4) * math.log((1.0 + beta) / (1.0 - beta)) - 2.0 * beta * (2.0 - beta**2))


def dirac_annihilation(gamma: float, r_e_fm: float = R_E_FM) -> float:
    """sigma(e+ e- -> gamma gamma) in fm^2 for a positron of Lorentz factor gamma on an electron at rest.

    Dirac, Proc. Camb. Phil. Soc. 26 (1930) 361; as in Heitler (1954), sec. 29 (recalled; the
    library |M|^2 integrated against it is checked against Dirac traces in test_references.py):
    sigma = pi r_e^2 / (gamma + 1) [(gamma^2 + 4 gamma + 1)/(gamma^2 - 1) ln(gamma + sqrt(gamma^2 - 1))
    - (gamma + 3)/sqrt(gamma^2 - 1)].
    """
    r = math.sqrt(gamma * gamma - 1.0)
    return math.pi * r_e_fm**2 / (gamma + 1.0) * (
        (gamma * gamma + 4.0 * gamma + 1.0) / (gamma * gamma - 1.0) * math.log(gamma + r) - (gamma + 3.0) / r)


def bhabha_dsigma_domega(s: float, c: float, alpha: float) -> float:
    """Massless Bhabha dsigma/dOmega (GeV^-2) in the CM frame.

    alpha^2/(2s) [(1 + cos^4(theta/2))/sin^4(theta/2) - 2 cos^4(theta/2)/sin^2(theta/2) + (1 + cos^2 theta)/2];
    Peskin & Schroeder, An Introduction to QFT (1995), problem 5.2 (from memory).
    """
    s2 = (1.0 - c) / 2.0
    c2 = (1.0 + c) / 2.0
    return alpha**2 / (2.0 * s) * ((1.0 + c2**2) / s2**2 - 2.0 * c2**2 / s2 + (1.0 + c * c) / 2.0)


def moller_dsigma_domega(s: float, c: float, alpha: float) -> float:
    """Massless Moller dsigma/dOmega (GeV^-2) in the CM frame: alpha^2 (3 + cos^2 theta)^2 / (s sin^4 theta).

    Moller, Annalen der Physik 406 (1932) 531, in its ultra-relativistic limit (from memory).
    """
    return alpha**2 * (3.0 + c * c) ** 2 / (s * (1.0 - c * c) ** 2)


def mumu_dsigma_dcos_shape(c: float, beta: float) -> float:
    """Angular shape of e+e- -> mu+mu- with massive muons, up to normalization: 2 - beta^2 + beta^2 cos^2.

    Peskin & Schroeder (1995), eq. 5.13: dsigma/dOmega ~ 1 + m^2/E^2 + (1 - m^2/E^2) cos^2 theta (from memory).
    """
    return 2.0 - beta * beta + beta * beta * c * c


def ew_fermion_pair_sigma(s: float, qf: float, t3f: float, nc: float, alpha: float, sw2: float,
                          mz: float, gz: float, beta: float = 1.0) -> float:
    """sigma(e+e- -> gamma*/Z -> f fbar) in GeV^-2, final fermions of speed beta in the CM frame.

    Massless: Ellis, Stirling & Webber, QCD and Collider Physics (1996), sec. 3.1 (from memory):
    sigma = (4 pi alpha^2 / 3s) N_c [Q_f^2 - 2 Q_f V_e V_f chi1 + (A_e^2 + V_e^2)(A_f^2 + V_f^2) chi2],
    chi1 = kappa s (s - M^2)/((s - M^2)^2 + G^2 M^2), chi2 = kappa^2 s^2/((s - M^2)^2 + G^2 M^2),
    kappa = sqrt2 G_F M^2/(4 pi alpha) = 1/(4 sin^2 cos^2) at tree level, V = T3 - 2 Q sin^2, A = T3.
    Massive: the vector parts carry beta (3 - beta^2)/2 and the axial part beta^3, the standard
    threshold behaviour of vector and axial currents (e.g. for top pairs; from memory).
    """
    kappa = 1.0 / (4.0 * sw2 * (1.0 - sw2))
    den = (s - mz * mz) ** 2 + gz * gz * mz * mz
    chi1 = kappa * s * (s - mz * mz) / den
    chi2 = kappa**2 * s * s / den
    ve, ae = -0.5 + 2.0 * sw2, -0.5
    vf, af = t3f - 2.0 * qf * sw2, t3f
    vector = qf * qf - 2.0 * qf * ve * vf * chi1 + (ae * ae + ve * ve) * vf * vf * chi2
    axial = (ae * ae + ve * ve) * af * af * chi2
    return 4.0 * math.pi * alpha**2 / (3.0 * s) * nc * (beta * (3.0 - beta**2) / 2.0 * vector + beta**3 * axial)


def zh_sigma(s: float, g_fermi: float, mz: float, mh: float, sw2: float) -> float:
    """sigma(e+e- -> Z H) in GeV^-2 for Gamma_Z = 0.

    Djouadi, Phys. Rept. 457 (2008) 1, sec. 3.1 (formula from memory; shared check values):
    G_F^2 m_Z^4/(96 pi s) (v_e^2 + a_e^2) lambda^(1/2) (lambda + 12 m_Z^2/s)/(1 - m_Z^2/s)^2,
    v_e = -1 + 4 sin^2, a_e = -1, lambda = (1 - (m_H + m_Z)^2/s)(1 - (m_H - m_Z)^2/s).
    """
    lam = (1.0 - (mh + mz) ** 2 / s) * (1.0 - (mh - mz) ** 2 / s)
    ve, ae = -1.0 + 4.0 * sw2, -1.0
    return (g_fermi**2 * mz**4 / (96.0 * math.pi * s) * (ve * ve + ae * ae) * math.sqrt(lam)
            * (lam + 12.0 * mz * mz / s) / (1.0 - mz * mz / s) ** 2)


def z_width_ff(g_fermi: float, mz: float, qf: float, t3f: float, sw2: float, nc: float = 1.0) -> float:
    """Tree-level Gamma(Z -> f fbar) = N_c G_F m_Z^3 (V^2 + A^2) / (6 sqrt2 pi), V = T3 - 2 Q sin^2, A = T3.

    PDG review "Electroweak model and constraints on new physics" (tree level, from memory).
    """
    v, a = t3f - 2.0 * qf * sw2, t3f
    return nc * g_fermi * mz**3 * (v * v + a * a) / (6.0 * math.sqrt(2.0) * math.pi)
