"""Four-vector kinematics, two-body phase space and the mapping of the scattering angle.

Conventions: metric (+,-,-,-), components (E, px, py, pz), energies in GeV, arrays of shape
(N, 4) for one particle per event and (N, n, 4) for n particles. Everything is vectorized.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["kallen", "momentum_2body", "mass2", "two_body", "boost_z", "AngularMap"]


def kallen(a, b, c):
    """The triangle function lambda(a, b, c) = a^2 + b^2 + c^2 - 2ab - 2ac - 2bc."""
    return a * a + b * b + c * c - 2.0 * (a * b + a * c + b * c)


def momentum_2body(sqrt_s: float, m1: float, m2: float) -> float:
    """|p| of either particle of a two-body system of mass sqrt_s in its rest frame (0 below threshold)."""
    lam = kallen(sqrt_s**2, m1 * m1, m2 * m2)
    return math.sqrt(max(lam, 0.0)) / (2.0 * sqrt_s)


def mass2(p):
    """Invariant mass squared p.p of (..., 4) arrays."""
    return p[..., 0] ** 2 - p[..., 1] ** 2 - p[..., 2] ** 2 - p[..., 3] ** 2


def two_body(sqrt_s: float, m3: float, m4: float, cos_theta, phi, out=None):
    """Momenta (N, 2, 4) of a two-body final state in its rest frame; particle 3 at (theta, phi) to +z."""
    n = cos_theta.shape[0]
    p = momentum_2body(sqrt_s, m3, m4)
    e3 = (sqrt_s * sqrt_s + m3 * m3 - m4 * m4) / (2.0 * sqrt_s)
    e4 = sqrt_s - e3
    sin_theta = np.sqrt(np.clip(1.0 - cos_theta * cos_theta, 0.0, None))
    res = np.empty((n, 2, 4)) if out is None else out
    res[:, 0, 0] = e3
    res[:, 0, 1] = p * sin_theta * np.cos(phi)
    res[:, 0, 2] = p * sin_theta * np.sin(phi)
    res[:, 0, 3] = p * cos_theta
    res[:, 1, 0] = e4
    res[:, 1, 1:] = -res[:, 0, 1:]
    return res


def boost_z(p, beta: float):
    """Boost (..., 4) momenta in place along +z with speed beta (returns p)."""
    if beta == 0.0:
        return p
    gamma = 1.0 / math.sqrt((1.0 - beta) * (1.0 + beta))
    e = p[..., 0].copy()
    p[..., 0] = gamma * (e + beta * p[..., 3])
    p[..., 3] = gamma * (p[..., 3] + beta * e)
    return p


@dataclass(frozen=True)
class AngularMap:
    """Maps x in [0, 1] to c = cos(theta) in [lo, hi] with a density that follows the poles.

    kind: 'none' (flat), 'forward' (pole at c = A), 'backward' (pole at c = -A) or 'both';
    power 2 follows 1/(A -+ c)^2 (massless t- or u-channel exchange), power 1 follows 1/(A -+ c)
    (massive fermion exchange); A = 1 + gap > 1 keeps the pole outside the range. vegas adapts
    on top of this map, which only has to remove the steep part.
    """

    kind: str
    power: int
    gap: float
    lo: float
    hi: float

    def _f(self, c):
        a = 1.0 + self.gap
        if self.kind == "forward":
            return 1.0 / (a - c) if self.power == 2 else -np.log(a - c)
        if self.kind == "backward":
            return -1.0 / (a + c) if self.power == 2 else np.log(a + c)
        if self.power == 2:
            return 1.0 / (a - c) - 1.0 / (a + c)
        return np.log((a + c) / (a - c))

    def _density(self, c):
        """dF/dc of the primitive F used by the map."""
        a = 1.0 + self.gap
        fw = 1.0 / (a - c) ** self.power
        bw = 1.0 / (a + c) ** self.power
        if self.kind == "forward":
            return fw
        if self.kind == "backward":
            return bw
        return fw + bw

    def __call__(self, x):
        """(c, dc/dx) for an array x in [0, 1]."""
        if self.kind == "none":
            return self.lo + (self.hi - self.lo) * x, np.full_like(x, self.hi - self.lo)
        a = 1.0 + self.gap
        f_lo, f_hi = self._f(np.float64(self.lo)), self._f(np.float64(self.hi))
        f = f_lo + (f_hi - f_lo) * x
        if self.kind == "forward":
            c = a - 1.0 / f if self.power == 2 else a - np.exp(-f)
        elif self.kind == "backward":
            c = -1.0 / f - a if self.power == 2 else np.exp(f) - a
        elif self.power == 2:
            # F = 2c / (A^2 - c^2), solved for c in its stable form
            c = f * a * a / (1.0 + np.sqrt(1.0 + f * f * a * a))
        else:
            c = a * np.tanh(0.5 * f)
        c = np.clip(c, self.lo, self.hi)
        return c, (f_hi - f_lo) / self._density(c)
