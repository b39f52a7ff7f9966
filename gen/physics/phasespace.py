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

__all__ = ["massless_volume", "rambo", "sequential"]


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
