"""|M|^2 of the library against textbook expressions from `equation-database`, at random points."""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy

from gen.physics.matrix import MODELS
from gen.physics.matrix import electroweak, qed

hm = pytest.importorskip("equation_database.isbn_9780471887416")  # Halzen & Martin (1984)

ALPHA = 1.0 / 137.035999
E = math.sqrt(4.0 * math.pi * ALPHA)
RNG = np.random.default_rng(2024)


def _massless_points(n=200):
    """Random massless 2->2 kinematics: s in [1, 1e4] GeV^2, cos theta in (-1, 1)."""
    s = 10.0 ** RNG.uniform(0, 4, n)
    c = RNG.uniform(-0.999, 0.999, n)
    t = -0.5 * s * (1.0 - c)
    u = -0.5 * s * (1.0 + c)
    return s, t, u


def _reference(expr, s, t, u):
    f = sympy.lambdify((hm.s, hm.t, hm.u, hm.e), expr, "numpy")
    return f(s, t, u, E)


PAR0 = {"alpha": ALPHA, "m1": 0.0, "m2": 0.0, "m3": 0.0, "m4": 0.0}


def test_pair_production_matches_halzen_martin_6_31():
    s, t, u = _massless_points()
    np.testing.assert_allclose(qed.pair_production(s, t, u, PAR0), _reference(hm.equation_6_31, s, t, u), rtol=1e-12)


def test_lepton_scattering_matches_halzen_martin_6_30():
    s, t, u = _massless_points()
    np.testing.assert_allclose(qed.lepton_scattering(s, t, u, PAR0), _reference(hm.equation_6_30, s, t, u), rtol=1e-12)


def test_massless_compton_matches_halzen_martin_6_113():
    # Compton kinematics: s > 0, u < 0 (backward scattering pole), t = -s - u
    s = 10.0 ** RNG.uniform(-2, 3, 200)
    c = RNG.uniform(-0.999, 0.999, 200)
    t = -0.5 * s * (1.0 - c)
    u = -0.5 * s * (1.0 + c)
    np.testing.assert_allclose(qed.compton(s, t, u, PAR0), _reference(hm.equation_6_113, s, t, u), rtol=1e-12)


def test_electroweak_pair_reduces_to_qed_without_the_z():
    """With the Z decoupled (huge mass) the gamma*/Z amplitude is HM eq. 6.31 (times N_c for quarks)."""
    s, t, u = _massless_points()
    par = {"alpha": ALPHA, "sw2": 0.23, "m_Z": 1e7, "width_Z": 0.0, "m3": 0.0, "m4": 0.0}
    ref = _reference(hm.equation_6_31, s, t, u)
    np.testing.assert_allclose(electroweak.make_fermion_pair("mu-")(s, t, u, par), ref, rtol=1e-6)
    # u quark: charge 2/3, three colours (common practice, no source: N_c Q^2 scaling)
    np.testing.assert_allclose(electroweak.make_fermion_pair("u")(s, t, u, par), 3 * (2 / 3) ** 2 * ref, rtol=1e-6)
    # Bhabha limit of the electroweak e+e- -> e+e-: Peskin & Schroeder problem 5.2 in Mandelstam form,
    # written here: 2 e^4 [(s^2 + u^2)/t^2 + 2 u^2/(s t) + (t^2 + u^2)/s^2] (from memory; the
    # library's own QED Bhabha is checked against the textbook dsigma/dOmega in test_cross_sections)
    e4 = (4 * np.pi * ALPHA) ** 2
    bh = 2 * e4 * ((s * s + u * u) / (t * t) + 2 * u * u / (s * t) + (t * t + u * u) / (s * s))
    np.testing.assert_allclose(electroweak.make_fermion_pair("e-")(s, t, u, par), bh, rtol=1e-6)


def test_massive_pair_production_against_an_explicit_trace():
    """Slow, obviously correct check: the Dirac traces of e+e- -> mu+mu- evaluated with numpy gamma matrices."""
    g0 = np.diag([1, 1, -1, -1]).astype(complex)
    sig = [np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), np.array([[1, 0], [0, -1]])]
    gam = [g0] + [np.block([[np.zeros((2, 2)), sk], [-sk, np.zeros((2, 2))]]) for sk in sig]
    metric = np.diag([1.0, -1.0, -1.0, -1.0])

    def slash(p):
        return sum(metric[m, m] * p[m] * gam[m] for m in range(4))

    m = 1.777
    rs = 10.0
    for c in (-0.7, 0.1, 0.9):
        pin = rs / 2
        pout = math.sqrt(pin**2 - m * m)
        sn = math.sqrt(1 - c * c)
        p1 = np.array([pin, 0, 0, pin]); p2 = np.array([pin, 0, 0, -pin])
        p3 = np.array([pin, pout * sn, 0, pout * c]); p4 = np.array([pin, -pout * sn, 0, -pout * c])
        one = np.eye(4)
        lep = np.array([[np.trace(slash(p2) @ gam[a] @ slash(p1) @ gam[b]) for b in range(4)] for a in range(4)])
        had = np.array([[np.trace((slash(p3) + m * one) @ gam[a] @ (slash(p4) - m * one) @ gam[b])
                         for b in range(4)] for a in range(4)])
        s = rs * rs
        total = np.einsum("ab,ac,bd,cd->", lep, metric, metric, had).real * E**4 / s**2 / 4.0
        t = m * m - 2 * (p1[0] * p3[0] - p1[3] * p3[3])
        u = m * m - 2 * (p1[0] * p4[0] - p1[3] * p4[3])
        got = qed.pair_production(np.array([s]), np.array([t]), np.array([u]), dict(PAR0, m3=m, m4=m))[0]
        assert got == pytest.approx(total, rel=1e-10)


def test_every_process_has_a_source_and_a_finite_positive_matrix_element():
    for model in MODELS.values():
        for spec in model.processes:
            assert spec.source and len(spec.source.split()) > 5, spec.label
            if spec.momentum_matrix is not None:
                continue  # the 2 -> 3 processes: tests/test_three_jets.py
            s, t, u = _massless_points(50)
            par = dict(model.resolve({}), m1=0.0005, m2=0.0005, m3=0.0005, m4=0.0005)
            par.setdefault("alpha_s", 0.118)  # hadron runs pass it per event
            if spec.model == "scalar":
                par.update(m1=1.0, m2=1.0, m3=1.0, m4=1.0)
            val = spec.matrix(s + 1000.0, t, u, par)
            assert np.all(np.isfinite(val)) and np.all(val >= 0), spec.label


def test_massive_electroweak_pair_reduces_to_massive_qed_without_the_z():
    """Mass terms of the gamma*/Z formula against Peskin & Schroeder eq. 5.10 (qed.pair_production) at random points."""
    m = 4.18
    s = RNG.uniform(4 * m * m * 1.01, 1e4, 200)
    c = RNG.uniform(-1, 1, 200)
    beta = np.sqrt(1 - 4 * m * m / s)
    t = m * m - 0.5 * s * (1 - beta * c)
    u = m * m - 0.5 * s * (1 + beta * c)
    par = {"alpha": ALPHA, "sw2": 0.23, "m_Z": 1e7, "width_Z": 0.0, "m3": m, "m4": m}
    np.testing.assert_allclose(electroweak.make_fermion_pair("b")(s, t, u, par),
                               3 * (1 / 3) ** 2 * qed.pair_production(s, t, u, par), rtol=1e-6)
