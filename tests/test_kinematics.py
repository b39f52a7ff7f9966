"""Four-vector kinematics against an outside reference and at its numerical extremes.

Outside references: the scikit-hep `vector` package at random points (products, masses,
rapidities, angles, boosts), and 50-digit `mpmath` arithmetic of the textbook formulas (the
Lorentz boost with gamma = E/m, t = m1^2 + m3^2 - 2(E1 E3 - p p' cos)) at the extremes where
double precision needs care: a frame with m/E = 1e-12, massless systems, t at 1e-14 from the beam.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from gen.physics.kinematics import (AngularMap, azimuth, boost_from_rest, boost_z, delta_r, dot, mandelstam_tu, mass,
                                    pseudorapidity, rapidity, to_rest_frame, two_body_decay)
from gen.physics.phasespace import sequential

vector = pytest.importorskip("vector")
RNG = np.random.default_rng(2024)
mpmath.mp.dps = 50


def _random_momenta(n, m_max=50.0):
    p3 = RNG.normal(0.0, 40.0, (n, 3))
    m = RNG.uniform(0.0, m_max, n)
    e = np.sqrt(m * m + (p3 * p3).sum(1))
    return np.column_stack([e, p3])


def _vec(p):
    return vector.array({"E": p[:, 0], "px": p[:, 1], "py": p[:, 2], "pz": p[:, 3]})


def test_products_masses_and_angles_against_vector():
    a, b = _random_momenta(2000), _random_momenta(2000)
    va, vb = _vec(a), _vec(b)
    np.testing.assert_allclose(dot(a, b), va.dot(vb), rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(mass(a), va.mass, rtol=1e-9, atol=1e-7)
    np.testing.assert_allclose(rapidity(a), va.rapidity, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(pseudorapidity(a), va.eta, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(azimuth(a), va.phi, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(delta_r(pseudorapidity(a), azimuth(a), pseudorapidity(b), azimuth(b)), va.deltaR(vb),
                               rtol=1e-12, atol=1e-12)


def test_boosts_against_vector():
    k, q = _random_momenta(2000), _random_momenta(2000, m_max=80.0)
    q[:, 0] = np.sqrt(q[:, 0] ** 2 + 1.0)  # keep every frame massive
    vk, vq = _vec(k), _vec(q)
    lab = vk.boost_p4(vq)  # k given in the rest frame of q, seen where q moves
    for got, want in zip(boost_from_rest(k, q).T, (lab.E, lab.px, lab.py, lab.pz)):
        np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-8)
    rest = vk.boost_beta3(-vq.to_beta3())  # k seen in the rest frame of q
    for got, want in zip(to_rest_frame(k, q).T, (rest.E, rest.px, rest.py, rest.pz)):
        np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-8)
    y = RNG.uniform(-3.0, 3.0, 2000)
    along = vk.boostZ(beta=np.tanh(y))
    for got, want in zip(boost_z(k, y).T, (along.E, along.px, along.py, along.pz)):
        np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-8)


def _mp_boost(k, q, m):
    """The boost from the rest frame of q in 50 digits: E = (E_q k0 + p.k)/m, k' = k + p (k0 + p.k/(E_q + m))/m."""
    k = [mpmath.mpf(float(v)) for v in k]
    q = [mpmath.mpf(float(v)) for v in q]
    m = mpmath.mpf(m)
    pk = q[1] * k[1] + q[2] * k[2] + q[3] * k[3]
    return [(q[0] * k[0] + pk) / m] + [k[i] + q[i] * (k[0] + pk / (q[0] + m)) / m for i in (1, 2, 3)]


@pytest.mark.parametrize("m_over_e", [7e-7, 1e-9, 1e-12])
def test_a_boost_stays_exact_when_the_frame_is_nearly_massless(m_over_e):
    """At m/E = 7e-7 the form 1/sqrt(1 - beta^2) was 1.5e-4 off; below 7e-9 it was infinite. The
    frame's mass is given (E and p alone cannot carry it when m << E)."""
    e = 1000.0
    m = m_over_e * e
    q = np.array([[e, 0.0, 0.6 * math.sqrt(e * e - m * m), 0.8 * math.sqrt(e * e - m * m)]])
    k = np.array([[0.5 * m, 0.3 * m, -0.2 * m, 0.1 * m]])
    got = boost_from_rest(k, q, m)[0]
    want = [float(v) for v in _mp_boost(k[0], q[0], m)]
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-14 * e)
    # a massless daughter of the frame (k0 = |k|) stays massless after the boost
    d = np.array([[0.5 * m, 0.3 * m, 0.0, 0.4 * m]])
    b = boost_from_rest(d, q, m)[0]
    want = [float(v) for v in _mp_boost(d[0], q[0], m)]
    np.testing.assert_allclose(b, want, rtol=1e-12, atol=1e-14 * e)


def test_massless_momenta_stay_massless_under_boosts():
    p = np.array([[10.0, 3.0, 4.0, math.sqrt(100 - 25)], [5.0, 0.0, 0.0, -5.0]])
    for y in (-8.0, 0.3, 12.0):
        b = boost_z(p, y)
        assert np.all(np.abs(mass(b) ** 2) <= 1e-12 * b[:, 0] ** 2)


def test_a_massless_system_decays_collinearly():
    """m_parent = 0 with massless products: the products share the parent's momentum along its
    direction p^, in the fractions (1 +- p^.n)/2 for the decay direction n of the rest frame (the
    limit of the boost as m -> 0; no 0/0)."""
    parent = np.array([[10.0, 0.0, 6.0, 8.0]] * 3)
    cos = np.array([-1.0, 0.2, 1.0])
    phi = np.array([0.0, 1.0, 2.0])
    p1, p2, ratio = two_body_decay(parent, np.zeros(3), 0.0, 0.0, cos, phi)
    sin = np.sqrt(1 - cos**2)
    n = np.column_stack([sin * np.cos(phi), sin * np.sin(phi), cos])
    fraction = (1 + n @ (parent[0, 1:] / 10.0)) / 2
    np.testing.assert_allclose(ratio, 0.5)
    np.testing.assert_allclose(p1, parent * fraction[:, None], atol=1e-12)
    np.testing.assert_allclose(p1 + p2, parent, atol=1e-12)


@pytest.mark.parametrize("x0", [0.0, 1e-15, 1e-300, 0.5])
def test_sequential_phase_space_at_the_edge_of_the_hypercube(x0):
    """Three massless particles: the sequential weight is s (1 - x0) / (2 pi (8 pi)^2), x0 = Q^2/s of
    the first splitting (dPhi_3 = dPhi_2(P; p1, Q) dQ^2/2pi dPhi_2(Q; p2, p3), each massless dPhi_2 =
    |p*|/M dOmega/(16 pi^2); common practice, no source); a first variable of 1e-15 used to give
    wrong energies and 0 a NaN weight."""
    sqrt_s = 91.0
    x = RNG.random((200, 5))
    x[:, 0] = x0
    p, w = sequential(x, sqrt_s, [0.0, 0.0, 0.0])
    np.testing.assert_allclose(w, sqrt_s**2 * (1 - x0) / (2 * math.pi) / (8 * math.pi) ** 2, rtol=1e-12)
    np.testing.assert_allclose(p[:, :, 0].sum(1), sqrt_s, rtol=1e-12)
    np.testing.assert_allclose(p[:, :, 1:].sum(1), 0.0, atol=1e-12 * sqrt_s)
    assert np.all(np.abs(mass(p) ** 2) <= 1e-10 * p[..., 0] ** 2 + 1e-300)


def _mp_t(s, m1, m2, m3, omc):
    """t = m1^2 + m3^2 - 2 (E1 E3 - p p' (1 - omc)) in 50 digits (m4 = m2)."""
    s, m1, m2, m3, omc = (mpmath.mpf(v) for v in (s, m1, m2, m3, omc))
    rs = mpmath.sqrt(s)
    def mom(a, b):
        return mpmath.sqrt((s - (a + b) ** 2) * (s - (a - b) ** 2)) / (2 * rs)
    e1, e3 = (s + m1**2 - m2**2) / (2 * rs), (s + m3**2 - m2**2) / (2 * rs)
    return m1**2 + m3**2 - 2 * (e1 * e3 - mom(m1, m2) * mom(m3, m2) * (1 - omc))


@pytest.mark.parametrize("masses", [(0.0, 0.0, 0.0), (0.000511, 0.10566, 0.000511), (0.000511, 0.000511, 0.000511)])
@pytest.mark.parametrize("omc", [1e-14, 1e-8, 0.3])
def test_mandelstam_t_keeps_its_precision_near_the_beam(masses, omc):
    """e mu -> e mu at sqrt(s) = 10 GeV (and massless): t at 1 - cos = 1e-14 to 1e-9 relative,
    where E E' - p p' cos loses every digit."""
    m1, m2, m3 = masses
    s = 100.0
    t, _ = mandelstam_tu(s, m1, m2, m3, m2, np.array([omc]), np.array([2.0 - omc]))
    want = float(_mp_t(s, m1, m2, m3, omc))
    assert t[0] == pytest.approx(want, rel=1e-9, abs=1e-300)


def test_the_angular_map_returns_one_minus_cos_without_cancellation():
    """The forward map of massless exchange (density 1/(1 - c)^2): 1 - c equals 1/F(x) in 50 digits."""
    amap = AngularMap("forward", 2, 0.0, -1.0, 1.0 - 1e-12)
    x = np.array([0.0, 0.5, 1.0 - 1e-9, 1.0])
    c, omc, opc, _ = amap.with_complements(x)
    f_lo, f_hi = mpmath.mpf(1) / 2, 1 / (1 - (1 - mpmath.mpf(1e-12)))
    for xi, got in zip(x, omc):
        want = 1 / (f_lo + (f_hi - f_lo) * mpmath.mpf(float(xi)))
        assert got == pytest.approx(float(want), rel=1e-9)
    np.testing.assert_allclose(c + omc, 1.0, atol=2e-16)
    np.testing.assert_allclose(opc, 1.0 + c, atol=2e-16)
