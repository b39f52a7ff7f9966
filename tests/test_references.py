"""The analytic references of `gen validate` (gen/physics/references.py) against tree amplitudes
evaluated here with explicit Dirac traces, so that neither the references nor the library's
matrix elements are their own check.

Outside references: the QED Feynman rules (vertex -i e gamma^mu, photon propagator -i g/q^2,
fermion propagator i (pslash + m)/(p^2 - m^2)) and the trace technique with the photon
polarization sum -g_{mu nu} (Peskin & Schroeder, An Introduction to QFT (1995), ch. 4-5; common
practice), the Dirac matrices in the Dirac representation built with numpy, and the 2 -> 2 cross
section dsigma/dcos = |M|^2 p_f / (32 pi s p_i) (PDG review "Kinematics", two-body scattering).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from gen.physics.constants import HBARC2_PB
from gen.physics.references import REFERENCES

_I2, _Z2 = np.eye(2), np.zeros((2, 2))
_SIGMA = [np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), np.array([[1, 0], [0, -1]])]
G = [np.block([[_I2, _Z2], [_Z2, -_I2]]).astype(complex)] + [np.block([[_Z2, s], [-s, _Z2]]) for s in _SIGMA]
ETA = np.array([1.0, -1.0, -1.0, -1.0])
ONE = np.eye(4)
ALPHA = 1 / 137.035999
E2 = 4 * math.pi * ALPHA


def slash(p):
    return sum(ETA[m] * p[m] * G[m] for m in range(4))


def dot(a, b):
    return float(np.sum(ETA * a * b))


def momenta(s, c, m1, m2, m3, m4):
    """Centre-of-mass momenta: p1 along +z, p3 at cos theta = c to it in the x-z plane."""
    rs = math.sqrt(s)

    def p(ma, mb):
        return math.sqrt((s - (ma + mb) ** 2) * (s - (ma - mb) ** 2)) / (2 * rs)

    pi, pf = p(m1, m2), p(m3, m4)
    e1, e3 = (s + m1**2 - m2**2) / (2 * rs), (s + m3**2 - m4**2) / (2 * rs)
    sn = math.sqrt(1 - c * c)
    p1 = np.array([e1, 0, 0, pi])
    p2 = np.array([rs - e1, 0, 0, -pi])
    p3 = np.array([e3, pf * sn, 0, pf * c])
    p4 = np.array([rs - e3, -pf * sn, 0, -pf * c])
    return p1, p2, p3, p4, pi, pf


def dsigma_dcos(m2, s, pi, pf):
    return HBARC2_PB * m2 * pf / (32 * math.pi * s * pi)


def electron_muon_m2(p1, p2, p3, p4, m, mm):
    """e(p1) mu(p2) -> e(p3) mu(p4), one t-channel photon: (1/4) sum |M|^2 =
    e^4 / (4 t^2) Tr[(p3 + m) g^mu (p1 + m) g^nu] Tr[(p4 + M) g_mu (p2 + M) g_nu]."""
    t = dot(p1 - p3, p1 - p3)
    a, b = slash(p3) + m * ONE, slash(p1) + m * ONE
    c, d = slash(p4) + mm * ONE, slash(p2) + mm * ONE
    total = 0.0
    for mu, nu in itertools.product(range(4), repeat=2):
        total += ETA[mu] * ETA[nu] * (np.trace(a @ G[mu] @ b @ G[nu]) * np.trace(c @ G[mu] @ d @ G[nu])).real
    return E2 * E2 * total / (4 * t * t)


def annihilation_m2(p1, p2, k1, k2, m):
    """e-(p1) e+(p2) -> gamma(k1) gamma(k2), t- and u-channel electrons: (1/4) sum |M|^2 with
    O^{mu nu} = g^nu (p1 - k1 + m) g^mu / (t - m^2) + g^mu (p1 - k2 + m) g^nu / (u - m^2), mu for k1."""
    t, u = dot(p1 - k1, p1 - k1), dot(p1 - k2, p1 - k2)
    prop_t, prop_u = slash(p1 - k1) + m * ONE, slash(p1 - k2) + m * ONE
    o = {(mu, nu): G[nu] @ prop_t @ G[mu] / (t - m * m) + G[mu] @ prop_u @ G[nu] / (u - m * m)
         for mu, nu in itertools.product(range(4), repeat=2)}
    # O-bar^{mu nu} = gamma0 O^dagger gamma0 reverses the products
    ob = {k: G[0] @ v.conj().T @ G[0] for k, v in o.items()}
    a, b = slash(p2) - m * ONE, slash(p1) + m * ONE
    total = 0.0
    for mu, nu in itertools.product(range(4), repeat=2):
        total += ETA[mu] * ETA[nu] * np.trace(a @ o[(mu, nu)] @ b @ ob[(mu, nu)]).real
    return E2 * E2 * total / 4


def pair_m2(p1, p2, p3, p4, m_in, m_out):
    """e-(p1) e+(p2) -> l-(p3) l+(p4), one s-channel photon: (1/4) sum |M|^2 =
    e^4 / (4 s^2) Tr[(p2 - m) g^mu (p1 + m) g^nu] Tr[(p3 + M) g_mu (p4 - M) g_nu]."""
    s = dot(p1 + p2, p1 + p2)
    a, b = slash(p2) - m_in * ONE, slash(p1) + m_in * ONE
    c, d = slash(p3) + m_out * ONE, slash(p4) - m_out * ONE
    total = 0.0
    for mu, nu in itertools.product(range(4), repeat=2):
        total += ETA[mu] * ETA[nu] * (np.trace(a @ G[mu] @ b @ G[nu]) * np.trace(c @ G[mu] @ d @ G[nu])).real
    return E2 * E2 * total / (4 * s * s)


M_E, M_MU = 0.51099895e-3, 0.1056583755
POINTS = [(s, c) for s in (0.05, 1.3, 40.0) for c in (-0.93, -0.2, 0.41, 0.97)]


@pytest.mark.parametrize("s, c", POINTS)
def test_electron_muon_reference_against_dirac_traces(s, c):
    par = {"m1": M_E, "m2": M_MU, "m3": M_E, "m4": M_MU, "alpha": ALPHA}
    s = s + (M_E + M_MU) ** 2
    p1, p2, p3, p4, pi, pf = momenta(s, c, M_E, M_MU, M_E, M_MU)
    expect = dsigma_dcos(electron_muon_m2(p1, p2, p3, p4, M_E, M_MU), s, pi, pf)
    got = float(np.asarray(REFERENCES["qed.electron_muon"].density(np.array([c]), s, par))[0])
    assert got == pytest.approx(expect, rel=1e-9, abs=0)


@pytest.mark.parametrize("s, c", POINTS)
def test_two_photon_annihilation_reference_against_dirac_traces(s, c):
    """With the factor 1/2 for the two identical photons."""
    par = {"m1": M_E, "m2": M_E, "m3": 0.0, "m4": 0.0, "alpha": ALPHA}
    s = s * 1e-3 + 4 * M_E**2 * 1.001
    p1, p2, k1, k2, pi, pf = momenta(s, c, M_E, M_E, 0.0, 0.0)
    expect = 0.5 * dsigma_dcos(annihilation_m2(p1, p2, k1, k2, M_E), s, pi, pf)
    got = float(np.asarray(REFERENCES["qed.two_photon_annihilation"].density(np.array([c]), s, par))[0])
    assert got == pytest.approx(expect, rel=1e-9, abs=0)


@pytest.mark.parametrize("s, c", POINTS)
def test_photon_fusion_reference_against_dirac_traces(s, c):
    """gamma(p1) gamma(p2) -> e-(p3) e+(p4): the same squared amplitude as the annihilation, with
    the average over 2 x 2 photon polarizations in place of 2 x 2 spins (crossing; the overall
    sign of the crossed fermion pair cancels in |M|^2 once both are crossed)."""
    par = {"m1": 0.0, "m2": 0.0, "m3": M_E, "m4": M_E, "alpha": ALPHA}
    s = s * 1e-3 + 4 * M_E**2 * 1.001
    q1, q2, p3, p4, pi, pf = momenta(s, c, 0.0, 0.0, M_E, M_E)
    # the annihilation e-(p3) e+(p4) -> gamma(q1) gamma(q2) has the same spin-summed |M|^2
    expect = dsigma_dcos(annihilation_m2(p3, p4, q1, q2, M_E), s, pi, pf)
    got = float(np.asarray(REFERENCES["qed.photon_fusion"].density(np.array([c]), s, par))[0])
    assert got == pytest.approx(expect, rel=1e-9, abs=0)


@pytest.mark.parametrize("s, c", POINTS)
def test_massive_lepton_pair_reference_against_dirac_traces(s, c):
    """e+e- -> tau+tau- above threshold, the electron mass neglected in the reference (its accuracy
    m_e^2/s), kept in the traces."""
    m_tau = 1.77686
    s = 4 * m_tau**2 + s
    par = {"m1": M_E, "m2": M_E, "m3": m_tau, "m4": m_tau, "alpha": ALPHA}
    p1, p2, p3, p4, pi, pf = momenta(s, c, M_E, M_E, m_tau, m_tau)
    expect = dsigma_dcos(pair_m2(p1, p2, p3, p4, M_E, m_tau), s, pi, pf)
    ref = REFERENCES["qed.lepton_pair"]
    got = float(np.asarray(ref.density(np.array([c]), s, par))[0])
    assert got == pytest.approx(expect, rel=max(10 * ref.accuracy(s, par), 1e-9), abs=0)


# --- the library's own QED |M|^2 against the same traces -----------------------------------------

@pytest.mark.parametrize("s, c", POINTS)
def test_library_qed_matrix_elements_against_dirac_traces(s, c):
    """e mu scattering with both masses, e+e- -> gamma gamma and gamma gamma -> e+e- with the
    electron mass, e+e- -> tau+tau- with massless electrons: gen/physics/matrix/qed.py against the
    traces above, to 1e-9. (So the Breit-Wheeler and Dirac totals the cross-section tests compare
    with integrate an |M|^2 that is itself checked here.)"""
    from gen.physics.matrix import qed

    def invariants(p1, p2, p3, p4):
        return dot(p1 + p2, p1 + p2), dot(p1 - p3, p1 - p3), dot(p1 - p4, p1 - p4)

    se = s + (M_E + M_MU) ** 2
    p1, p2, p3, p4, _, _ = momenta(se, c, M_E, M_MU, M_E, M_MU)
    par = {"alpha": ALPHA, "m1": M_E, "m2": M_MU, "m3": M_E, "m4": M_MU}
    assert qed.lepton_scattering(*invariants(p1, p2, p3, p4), par) == pytest.approx(
        electron_muon_m2(p1, p2, p3, p4, M_E, M_MU), rel=1e-9, abs=0)

    sa = s * 1e-3 + 4 * M_E**2 * 1.001
    p1, p2, k1, k2, _, _ = momenta(sa, c, M_E, M_E, 0.0, 0.0)
    par = {"alpha": ALPHA, "m1": M_E, "m2": M_E, "m3": 0.0, "m4": 0.0}
    expect = annihilation_m2(p1, p2, k1, k2, M_E)
    assert qed.annihilation_to_photons(*invariants(p1, p2, k1, k2), par) == pytest.approx(expect, rel=1e-9, abs=0)
    q1, q2, p3, p4, _, _ = momenta(sa, c, 0.0, 0.0, M_E, M_E)
    par = {"alpha": ALPHA, "m1": 0.0, "m2": 0.0, "m3": M_E, "m4": M_E}
    assert qed.photon_fusion(*invariants(q1, q2, p3, p4), par) == pytest.approx(
        annihilation_m2(p3, p4, q1, q2, M_E), rel=1e-9, abs=0)

    m_tau = 1.77686
    st = 4 * m_tau**2 + s
    p1, p2, p3, p4, _, _ = momenta(st, c, 0.0, 0.0, m_tau, m_tau)
    par = {"alpha": ALPHA, "m1": 0.0, "m2": 0.0, "m3": m_tau, "m4": m_tau}
    assert qed.pair_production(*invariants(p1, p2, p3, p4), par) == pytest.approx(
        pair_m2(p1, p2, p3, p4, 0.0, m_tau), rel=1e-9, abs=0)
