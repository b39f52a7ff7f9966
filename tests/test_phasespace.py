"""n-body phase space against analytic volumes (RAMBO paper; exact two- and three-body results)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from gen.physics.kinematics import BreitWignerMap, PowerMap
from gen.physics.phasespace import massless_volume, rambo, sequential, three_massless

RNG = np.random.default_rng(99)


def _check_momenta(p, sqrt_s, masses):
    total = p.sum(axis=1)
    assert np.abs(total - [sqrt_s, 0, 0, 0]).max() < 1e-9 * sqrt_s
    m2 = p[..., 0] ** 2 - (p[..., 1:] ** 2).sum(axis=-1)
    assert np.abs(m2 - np.asarray(masses) ** 2).max() < 1e-9 * sqrt_s**2


def test_massless_volume_formula_for_two_bodies():
    """Phi_2 = 1/(8 pi) for massless particles (common practice, no source)."""
    assert massless_volume(2, 91.0) == pytest.approx(1 / (8 * math.pi))


@pytest.mark.parametrize("n", [3, 4, 5, 6])
def test_rambo_massless_weight_is_the_analytic_volume(n):
    """Kleiss, Stirling & Ellis (1986): the massless weight is constant and equals the volume
    (2 pi)^(4-3n) (pi/2)^(n-1) s^(n-2) / ((n-1)! (n-2)!)."""
    p, w = rambo(RNG, 20000, 100.0, [0.0] * n)
    _check_momenta(p, 100.0, [0.0] * n)
    assert np.all(w == w[0])
    # the formula evaluated independently for n = 3: (2pi)^-5 (pi/2)^2 s / 2
    if n == 3:
        assert w[0] == pytest.approx((2 * math.pi) ** -5 * (math.pi / 2) ** 2 * 100.0**2 / 2)


@pytest.mark.parametrize("n", [3, 4, 5])
def test_sequential_massless_volume(n):
    x = RNG.random((200000, 3 * n - 4))
    p, w = sequential(x, 50.0, [0.0] * n)
    _check_momenta(p, 50.0, [0.0] * n)
    vol = massless_volume(n, 50.0)
    assert abs(w.mean() - vol) < 5 * w.std() / math.sqrt(w.size)


@pytest.mark.parametrize("y_min", [1e-4, 0.05, 0.2])
def test_three_massless_with_pair_cuts_has_the_cut_dalitz_volume(y_min):
    """The log-mapped three-body generator: on shell, momentum conserved, and its mean weight the
    massless three-body volume (Kleiss, Stirling & Ellis (1986), the n = 3 case above) times the
    share (1 - 3 y_min)^2 of the Dalitz triangle x1 + x2 + x3 = 2 left when every pair mass
    exceeds y_min s (flat in x1, x2: Ellis, Stirling & Webber (1996), ch. 3; from memory)."""
    x = RNG.random((400000, 5))
    p, w = three_massless(x, 30.0, y_min)
    live = w > 0
    _check_momenta(p[live], 30.0, [0.0] * 3)
    s_pair = [2 * (p[live, i, 0] * p[live, j, 0] - (p[live, i, 1:] * p[live, j, 1:]).sum(-1)) for i, j in
              ((0, 1), (0, 2), (1, 2))]
    assert min(float(v.min()) for v in s_pair) >= y_min * 900.0 * (1 - 1e-9)
    vol = massless_volume(3, 30.0) * (1 - 3 * y_min) ** 2
    assert abs(w.mean() - vol) < 5 * w.std() / math.sqrt(w.size)
    assert w.std() / math.sqrt(w.size) < 0.01 * vol


def test_massive_two_body_is_exact():
    """Phi_2 = p*/(4 pi sqrt(s)) (common practice, no source)."""
    m = [10.0, 30.0]
    lam = (100.0**2 - 40.0**2) * (100.0**2 - 20.0**2)
    exact = math.sqrt(lam) / 200.0 / (4 * math.pi * 100.0)
    p, w = rambo(RNG, 5000, 100.0, m)
    _check_momenta(p, 100.0, m)
    np.testing.assert_allclose(w, exact, rtol=1e-10)
    q, ws = sequential(RNG.random((5000, 2)), 100.0, m)
    _check_momenta(q, 100.0, m)
    np.testing.assert_allclose(ws, exact, rtol=1e-10)


def _dalitz_volume(big_m, m1, m2, m3):
    """Phi_3 = (1/(128 pi^3 M^2)) x area of the Dalitz plot (PDG kinematics review, eq. for dGamma), by scipy."""
    def span(s12):
        r = math.sqrt(s12)
        e2 = (s12 - m1**2 + m2**2) / (2 * r)
        e3 = (big_m**2 - s12 - m3**2) / (2 * r)
        return 4 * math.sqrt(max(e2**2 - m2**2, 0)) * math.sqrt(max(e3**2 - m3**2, 0))
    return quad(span, (m1 + m2) ** 2, (big_m - m3) ** 2, epsrel=1e-11)[0] / (128 * math.pi**3 * big_m**2)


@pytest.mark.parametrize("maps", [None, [BreitWignerMap(5.0, 0.5)], [PowerMap(1.0)], [PowerMap(2.0)]])
def test_massive_three_body_against_the_dalitz_area(maps):
    ms = [1.0, 2.0, 3.0]
    exact = _dalitz_volume(10.0, *ms)
    p, w = rambo(RNG, 300000, 10.0, ms)
    _check_momenta(p, 10.0, ms)
    assert abs(w.mean() - exact) < 5 * w.std() / math.sqrt(w.size)
    q, ws = sequential(RNG.random((300000, 5)), 10.0, ms, maps)
    _check_momenta(q, 10.0, ms)
    assert abs(ws.mean() - exact) < 5 * ws.std() / math.sqrt(ws.size), (ws.mean(), exact)


def _volume_with_pt_cut(sqrt_s: float, pt_min: float) -> float:
    """Massless Phi_3 with p_T(particle 0) > pt_min about the z axis, by scipy: the factorization
    dPhi_3 = dPhi_2(s; 0, m23) ds23 / (2 pi) dPhi_2(s23; 0, 0) with Phi_2(s; 0, m) = (1 - m^2/s) / (8 pi)
    (common practice, no source), the polar angle of particle 0 flat in cos theta, so that the share
    with p* sin theta > pt_min is sqrt(1 - pt_min^2 / p*^2)."""
    s = sqrt_s**2

    def integrand(s23):
        pstar = (s - s23) / (2 * sqrt_s)
        share = math.sqrt(1 - (pt_min / pstar) ** 2) if pstar > pt_min else 0.0
        return (1 - s23 / s) / (8 * math.pi) * share / (8 * math.pi) / (2 * math.pi)
    return quad(integrand, 0.0, s, epsrel=1e-11, points=[s - 2 * sqrt_s * pt_min])[0]


@pytest.mark.parametrize("pt_min", [5.0, 20.0, 45.0])
def test_the_pseudorapidity_root_map_keeps_the_cut_volume(pt_min):
    """A decay tree whose root splitting draws eta* flat inside the p_T cut: every point it makes
    passes the cut, its mean weight is the cut volume (scipy above), and its density is 1/weight."""
    from gen.physics.channels import Node, Topology
    top = Topology(Node((0, 1, 2), (0, Node((1, 2), (1, 2)))), [0.0] * 3, root_pt_min=pt_min)
    p, w = top.generate(RNG.random((300000, top.ndim)), 100.0)
    live = w > 0
    _check_momenta(p[live], 100.0, [0.0] * 3)
    assert np.hypot(p[live, 0, 1], p[live, 0, 2]).min() >= pt_min * (1 - 1e-9)
    exact = _volume_with_pt_cut(100.0, pt_min)
    assert abs(w.mean() - exact) < 5 * w.std() / math.sqrt(w.size), (w.mean(), exact)
    assert w.std() / math.sqrt(w.size) < 0.01 * exact
    np.testing.assert_allclose(top.density(p[live], 100.0) * w[live], 1.0, rtol=1e-8)
    # the same cut applied after a flat polar angle: the same volume within errors
    flat = Topology(top.root, [0.0] * 3)
    q, v = flat.generate(RNG.random((300000, flat.ndim)), 100.0)
    v = np.where(np.hypot(q[:, 0, 1], q[:, 0, 2]) > pt_min, v, 0.0)
    assert abs(v.mean() - exact) < 5 * v.std() / math.sqrt(v.size)
