"""n-body phase space: RAMBO and a sequential-splitting generator on the unit hypercube.

Both return laboratory-independent momenta in the rest frame of the decaying (or colliding)
system, shape (N, n, 4), and weights w such that the mean of w over the points estimates the
phase-space volume

    Phi_n = int prod_i d^3p_i / ((2 pi)^3 2 E_i) (2 pi)^4 delta^4(P - sum_i p_i)

(GeV^(2n - 4)). Everything is vectorized over points; loops run over particles only.

- `rambo`: Kleiss, Stirling & Ellis, Comput. Phys. Commun. 40 (1986) 359. Massless momenta have
  the constant weight of the massless volume; masses are put on by the paper's rescaling, with
  its weight factor.
- `sequential`: P -> p1 + Q2, Q2 -> p2 + Q3, ... with the invariant masses Q_k drawn from the
  unit hypercube through a flat, Breit-Wigner or power-law map of Q_k^2 (the maps of
  `gen.physics.kinematics`), and the decay angles
  flat. It has 3n - 4 variables, suited to vegas adaptation; dPhi_n = dPhi_2(P; p1, Q2) dQ2^2/(2 pi)
  dPhi_{n-1}(Q2; p2, ...), dPhi_2 = p*/(4 pi M) dOmega/(4 pi).
"""

from __future__ import annotations

import math

import numpy as np

from .kinematics import FlatMap, two_body_decay

__all__ = ["massless_volume", "rambo", "sequential", "three_massless"]


def massless_volume(n: int, sqrt_s: float) -> float:
    """(2 pi)^(4 - 3n) (pi/2)^(n - 1) s^(n - 2) / ((n - 1)! (n - 2)!) (the RAMBO paper)."""
    return ((2 * math.pi) ** (4 - 3 * n) * (math.pi / 2) ** (n - 1) * sqrt_s ** (2 * n - 4)
            / (math.factorial(n - 1) * math.factorial(n - 2)))


def rambo(rng: np.random.Generator, n_points: int, sqrt_s: float, masses) -> tuple[np.ndarray, np.ndarray]:
    """RAMBO momenta (N, n, 4) in the rest frame of sqrt_s and their weights (N,)."""
    masses = np.asarray(masses, float)
    n = masses.size
    r = rng.random((n_points, n, 4))
    c = 2.0 * r[..., 0] - 1.0
    phi = 2.0 * math.pi * r[..., 1]
    q0 = -np.log(r[..., 2] * r[..., 3])
    sn = np.sqrt(1.0 - c * c)
    q = np.stack([q0, q0 * sn * np.cos(phi), q0 * sn * np.sin(phi), q0 * c], axis=-1)
    big_q = q.sum(axis=1)
    m = np.sqrt(big_q[:, 0] ** 2 - (big_q[:, 1:] ** 2).sum(axis=1))
    b = -big_q[:, 1:] / m[:, None]
    x = sqrt_s / m
    gamma = big_q[:, 0] / m
    a = 1.0 / (1.0 + gamma)
    bq = np.einsum("nk,nik->ni", b, q[..., 1:])
    p = np.empty_like(q)
    p[..., 0] = x[:, None] * (gamma[:, None] * q[..., 0] + bq)
    p[..., 1:] = x[:, None, None] * (q[..., 1:] + b[:, None, :] * q[..., :1] + (a[:, None] * bq)[..., None] * b[:, None, :])
    w = np.full(n_points, massless_volume(n, sqrt_s))
    if not np.any(masses > 0):
        return p, w
    if masses.sum() >= sqrt_s:
        raise ValueError("the masses exceed the available energy")
    # rescale the three-momenta by xi so that the energies with masses add up to sqrt_s (Newton)
    e0 = p[..., 0]
    xi = np.full(n_points, math.sqrt(1.0 - (masses.sum() / sqrt_s) ** 2))
    m2 = masses * masses
    for _ in range(50):
        e = np.sqrt(m2 + (xi[:, None] * e0) ** 2)
        f = e.sum(axis=1) - sqrt_s
        df = (xi[:, None] * e0 * e0 / e).sum(axis=1)
        step = f / df
        xi -= step
        if np.all(np.abs(step) < 1e-15 * xi):
            break
    k = np.empty_like(p)
    k[..., 1:] = xi[:, None, None] * p[..., 1:]
    k[..., 0] = np.sqrt(m2 + (xi[:, None] * e0) ** 2)
    kabs = xi[:, None] * e0
    factor = (sqrt_s ** (4 - 2 * n) * kabs.sum(axis=1) ** (2 * n - 3) * np.prod(kabs / k[..., 0], axis=1)
              / (kabs * kabs / k[..., 0]).sum(axis=1))
    return k, w * factor


def sequential(x: np.ndarray, sqrt_s: float, masses, maps=None):
    """Momenta (N, n, 4) and weights (N,) from points x (N, 3n - 4) of the unit hypercube.

    Columns: n - 2 invariant masses (Q_2 ... Q_{n-1}, mapped by `maps`, maps of
    `gen.physics.kinematics` such as `BreitWignerMap`, flat by default), then a (cos theta, phi)
    pair for each of the n - 1 two-body splittings.
    """
    masses = np.asarray(masses, float)
    n = masses.size
    n_pts = x.shape[0]
    maps = maps or [FlatMap()] * (n - 2)
    if x.shape[1] != 3 * n - 4:
        raise ValueError(f"{n} particles need {3 * n - 4} variables, found {x.shape[1]}")
    parent = np.zeros((n_pts, 4))
    parent[:, 0] = sqrt_s
    m_parent = np.full(n_pts, float(sqrt_s))
    weight = np.ones(n_pts)
    out = np.empty((n_pts, n, 4))
    col = n - 2
    for k in range(n - 1):
        rest = masses[k + 1:].sum()
        if k < n - 2:
            lo = rest**2
            hi = (m_parent - masses[k]) ** 2
            s_rest, jac = maps[k](x[:, k], lo, hi)
            m_rest = np.sqrt(s_rest)
            weight = weight * jac / (2.0 * math.pi)
        else:
            m_rest = np.full(n_pts, masses[-1])
        cos_t = 2.0 * x[:, col] - 1.0
        phi = 2.0 * math.pi * x[:, col + 1]
        col += 2
        p1, p_rest, ratio = two_body_decay(parent, m_parent, masses[k], m_rest, cos_t, phi)
        weight = weight * ratio / (4.0 * math.pi)  # dPhi_2 = (p*/M) dOmega / (16 pi^2)
        out[:, k] = p1
        parent, m_parent = p_rest, m_rest
    out[:, n - 1] = parent
    return out, weight


def three_massless(x: np.ndarray, sqrt_s: float, y_min: float):
    """Momenta (N, 3, 4) and weights (N,) of three massless particles from points x (N, 5), for
    integrands singular where particle 3 is soft or collinear to 1 or 2 (a gluon off a quark pair).

    Columns: y13 = s13/s on [y_min, 1 - 2 y_min], then y23 = s23/s on [y_min, 1 - y13 - y_min]
    (so that y12 = 1 - y13 - y23 >= y_min), each mapped logarithmically (density ~ 1/y, the
    1/(y13 y23) of the singularities); then the orientation as Euler angles (cos theta, phi, chi), uniform. The massless
    three-body phase space is dPhi_3 = s/(128 pi^3) dx1 dx2 dOmega dchi/(8 pi^2) with x_i = 2E_i/sqrt(s),
    x1 = 1 - y23, x2 = 1 - y13 (Ellis, Stirling & Webber (1996), ch. 3, from memory; Byckling & Kajantie,
    Particle Kinematics (1973), ch. V).
    """
    if y_min <= 0.0:
        raise ValueError("three_massless needs a pair-mass cut y_min > 0")
    n_pts = x.shape[0]
    if 3.0 * y_min >= 1.0:
        return np.zeros((n_pts, 3, 4)), np.zeros(n_pts)
    span1 = math.log((1.0 - 2.0 * y_min) / y_min)
    y13 = y_min * np.exp(span1 * x[:, 0])
    span2 = np.log(np.maximum(1.0 - y13 - y_min, y_min) / y_min)  # y23 up to where y12 = y_min
    y23 = y_min * np.exp(span2 * x[:, 1])
    y12 = 1.0 - y13 - y23
    inside = (y12 >= y_min * (1.0 - 1e-12)) & (span2 > 0)
    x1, x2 = 1.0 - y23, 1.0 - y13
    x3 = 2.0 - x1 - x2
    e = 0.5 * sqrt_s
    # particle 1 along z', particle 2 in the x'z' plane, particle 3 balancing them
    c12 = np.clip(1.0 - 2.0 * y12 / np.where(inside, x1 * x2, 1.0), -1.0, 1.0)
    s12 = np.sqrt(1.0 - c12 * c12)
    body = np.zeros((n_pts, 3, 3))
    body[:, 0, 2] = e * x1
    body[:, 1, 0] = e * x2 * s12
    body[:, 1, 2] = e * x2 * c12
    body[:, 2] = -(body[:, 0] + body[:, 1])
    ct = 2.0 * x[:, 2] - 1.0
    st = np.sqrt(np.clip(1.0 - ct * ct, 0.0, None))
    phi, chi = 2.0 * math.pi * x[:, 3], 2.0 * math.pi * x[:, 4]
    cp, sp, cc, sc = np.cos(phi), np.sin(phi), np.cos(chi), np.sin(chi)
    # R = Rz(phi) Ry(theta) Rz(chi): uniform over rotations for uniform cos theta, phi, chi
    rot = np.empty((n_pts, 3, 3))
    rot[:, 0, 0] = cp * ct * cc - sp * sc
    rot[:, 0, 1] = -cp * ct * sc - sp * cc
    rot[:, 0, 2] = cp * st
    rot[:, 1, 0] = sp * ct * cc + cp * sc
    rot[:, 1, 1] = -sp * ct * sc + cp * cc
    rot[:, 1, 2] = sp * st
    rot[:, 2, 0] = -st * cc
    rot[:, 2, 1] = st * sc
    rot[:, 2, 2] = ct
    out = np.empty((n_pts, 3, 4))
    out[..., 1:] = np.einsum("nij,nkj->nki", rot, body)
    out[:, 0, 0], out[:, 1, 0], out[:, 2, 0] = e * x1, e * x2, e * x3
    weight = np.where(inside, sqrt_s * sqrt_s / (128.0 * math.pi ** 3) * (span1 * y13) * (span2 * y23), 0.0)
    return out, weight
