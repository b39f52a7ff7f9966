"""Four-vector kinematics: the one place where products, boosts, angles, Mandelstam variables and
the maps of invariant masses and angles are written.

Conventions: metric (+,-,-,-); a four-momentum is an array whose last axis holds (E, px, py, pz),
energies in GeV: shape (N, 4) for one particle per event, (N, n, 4) for n particles. Everything is
vectorized and branch-free over events.

Numerics. Boosts use gamma = E/m and beta gamma = p/m of the frame (or cosh and sinh of its
rapidity), never 1/sqrt(1 - beta^2), so they stay exact for any mass down to m/E ~ 1e-12 and for
massless momenta; a decay of a system of mass M is written in units of M, so that a massless
system (M = 0, products collinear) has a finite limit. Mandelstam t and u of a 2 -> 2 process are
built from 1 - cos and 1 + cos (which the angular map returns directly), and E E' - p p' in its
cancellation-free form, so that t near the beam keeps its relative precision.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "dot", "mass2", "mass", "pt", "rapidity", "pseudorapidity", "azimuth", "delta_phi", "delta_r",
    "kallen", "two_body_momentum", "two_body", "boost_z", "rapidity_of", "boost_from_rest", "to_rest_frame",
    "two_body_decay", "mandelstam_tu", "AngularMap", "FlatMap", "BreitWignerMap", "PowerMap",
]


# --- products and observables ---------------------------------------------------------------------

def dot(a, b):
    """Minkowski product a.b of (..., 4) arrays."""
    return a[..., 0] * b[..., 0] - a[..., 1] * b[..., 1] - a[..., 2] * b[..., 2] - a[..., 3] * b[..., 3]


def mass2(p):
    """Invariant mass squared p.p of (..., 4) arrays."""
    return dot(p, p)


def mass(p):
    """Invariant mass sqrt(max(p.p, 0)) of (..., 4) arrays."""
    return np.sqrt(np.clip(mass2(p), 0.0, None))


def pt(p):
    """Transverse momentum to the beam (z) axis."""
    return np.hypot(p[..., 1], p[..., 2])


def rapidity(p):
    """Rapidity y = (1/2) ln((E + pz)/(E - pz)); +-inf for a massless momentum along the beam."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return 0.5 * np.log((p[..., 0] + p[..., 3]) / (p[..., 0] - p[..., 3]))


def pseudorapidity(p):
    """Pseudorapidity eta = asinh(pz / pT); +-inf along the beam, nan for a zero momentum."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.arcsinh(p[..., 3] / pt(p))


def azimuth(p):
    """Azimuth phi in (-pi, pi] around the beam axis."""
    return np.arctan2(p[..., 2], p[..., 1])


def delta_phi(phi1, phi2):
    """|phi1 - phi2| folded into [0, pi]."""
    d = np.abs(phi1 - phi2) % (2.0 * math.pi)
    return np.minimum(d, 2.0 * math.pi - d)


def delta_r(eta1, phi1, eta2, phi2):
    """Delta R = sqrt(Delta eta^2 + Delta phi^2)."""
    return np.hypot(eta1 - eta2, delta_phi(phi1, phi2))


# --- two-body systems -----------------------------------------------------------------------------

def kallen(a, b, c):
    """The triangle function lambda(a, b, c) = a^2 + b^2 + c^2 - 2ab - 2ac - 2bc."""
    return a * a + b * b + c * c - 2.0 * (a * b + a * c + b * c)


def two_body_momentum(m, m1, m2):
    """|p| of either particle of a two-body system of mass m in its rest frame (0 below threshold),
    from lambda in the factorized form (m^2 - (m1 + m2)^2)(m^2 - (m1 - m2)^2), which keeps its
    precision near threshold. Scalars or arrays."""
    lam = (m * m - (m1 + m2) ** 2) * (m * m - (m1 - m2) ** 2)
    if np.ndim(lam) == 0:
        return math.sqrt(max(float(lam), 0.0)) / (2.0 * m) if m > 0 else 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(m > 0, np.sqrt(np.clip(lam, 0.0, None)) / (2.0 * np.where(m > 0, m, 1.0)), 0.0)


def two_body(sqrt_s: float, m3: float, m4: float, cos_theta, phi, sin_theta=None):
    """Momenta (N, 2, 4) of a two-body final state in its rest frame; particle 3 at (theta, phi) to +z.
    `sin_theta` may be given where it is known more precisely than sqrt(1 - cos^2)."""
    n = np.shape(cos_theta)[0]
    p = two_body_momentum(sqrt_s, m3, m4)
    e3 = (sqrt_s * sqrt_s + m3 * m3 - m4 * m4) / (2.0 * sqrt_s)
    sin = np.sqrt(np.clip(1.0 - cos_theta * cos_theta, 0.0, None)) if sin_theta is None else sin_theta
    res = np.empty((n, 2, 4))
    res[:, 0, 0] = e3
    res[:, 0, 1] = p * sin * np.cos(phi)
    res[:, 0, 2] = p * sin * np.sin(phi)
    res[:, 0, 3] = p * cos_theta
    res[:, 1, 0] = sqrt_s - e3
    res[:, 1, 1:] = -res[:, 0, 1:]
    return res


def mandelstam_tu(s, m1, m2, m3, m4, one_minus_cos, one_plus_cos):
    """t = (p1 - p3)^2 and u = (p1 - p4)^2 of a 2 -> 2 process at s (GeV^2, a scalar or an array),
    from the angle of p3 to p1 in the centre-of-mass frame, given as 1 - cos and 1 + cos.

    t = t0 - 2 p p' (1 - cos) with t0 = m1^2 + m3^2 - 2 (E1 E3 - p p') its value in the forward
    direction, and E1 E3 - p p' = (m1^2 p'^2 + m3^2 p^2 + m1^2 m3^2) / (E1 E3 + p p') written without
    the cancellation (likewise u with p4 and 1 + cos), so that t -> 0 towards the beam keeps its
    relative precision (common practice, no source)."""
    rs = np.sqrt(s)
    p = two_body_momentum(rs, m1, m2)
    q = two_body_momentum(rs, m3, m4)
    e1 = (s + m1 * m1 - m2 * m2) / (2.0 * rs)
    e3 = (s + m3 * m3 - m4 * m4) / (2.0 * rs)
    e4 = rs - e3

    def forward(ma, ea, mb, eb):
        return ma * ma + mb * mb - 2.0 * (ma * ma * q * q + mb * mb * p * p + ma * ma * mb * mb) / (ea * eb + p * q)

    t = forward(m1, e1, m3, e3) - 2.0 * p * q * one_minus_cos
    u = forward(m1, e1, m4, e4) - 2.0 * p * q * one_plus_cos
    return t, u


# --- boosts -----------------------------------------------------------------------------------

def rapidity_of(e: float, pz: float) -> float:
    """Rapidity of a frame (or system) of energy e and momentum pz along z."""
    return 0.5 * math.log((e + pz) / (e - pz)) if pz != 0.0 else 0.0


def boost_z(p, y, out=None):
    """Boost (..., 4) momenta along +z by rapidity y (a scalar, or an array broadcasting against the
    leading axes of p): E' = cosh(y) E + sinh(y) pz, pz' = sinh(y) E + cosh(y) pz. Exact for any
    rapidity. Returns a new array, or fills `out` (which may be p itself)."""
    ch, sh = np.cosh(y), np.sinh(y)
    if np.ndim(y) > 0:
        extra = np.ndim(p) - 1 - np.ndim(y)
        ch, sh = (np.reshape(v, np.shape(v) + (1,) * extra) for v in (ch, sh))
    e, z = p[..., 0].copy(), p[..., 3].copy()
    res = np.array(p, copy=True) if out is None else out
    if res is not p:
        res[..., 1:3] = p[..., 1:3]
    res[..., 0] = ch * e + sh * z
    res[..., 3] = sh * e + ch * z
    return res


def _from_rest_scaled(d, q, m):
    """Momenta d given in the rest frame of q in units of its mass m (d = k/m), expressed where q is
    (E, p): E' = E d0 + p.d, k' = m d + p (d0 + p.d / (E + m)). No division by m, so a massless
    system (m = 0) has its collinear limit."""
    qe, qv = q[..., 0], q[..., 1:]
    pd = (qv * d[..., 1:]).sum(axis=-1)
    out = np.empty(np.broadcast_shapes(np.shape(d), np.shape(q)))
    out[..., 0] = qe * d[..., 0] + pd
    out[..., 1:] = m[..., None] * d[..., 1:] + qv * (d[..., 0] + pd / (qe + m))[..., None]
    return out


def boost_from_rest(k, q, m=None):
    """Momenta k (N, 4) given in the rest frame of the system q (N, 4) of mass m > 0, expressed in
    the frame where that system has four-momentum q (gamma = E/m, exact for any m). Give m where it
    is known: when m << E it cannot be recovered from E and p in double precision."""
    m = mass(q) if m is None else np.broadcast_to(np.asarray(m, float), np.shape(q)[:-1])
    return _from_rest_scaled(k / m[..., None], q, m)


def to_rest_frame(k, q, m=None):
    """Momenta k (N, 4) seen in the rest frame of the system q (N, 4) of mass m > 0:
    E* = (E k0 - p.k)/m, k* = k + p (p.k / (E + m) - k0)/m (give m where it is known, as for
    `boost_from_rest`)."""
    m = mass(q) if m is None else np.broadcast_to(np.asarray(m, float), np.shape(q)[:-1])
    qe, qv = q[..., 0], q[..., 1:]
    pk = (qv * k[..., 1:]).sum(axis=-1)
    out = np.empty(np.broadcast_shapes(np.shape(k), np.shape(q)))
    out[..., 0] = (qe * k[..., 0] - pk) / m
    out[..., 1:] = k[..., 1:] + qv * ((pk / (qe + m) - k[..., 0]) / m)[..., None]
    return out


def two_body_decay(parent, m_parent, m1, m2, cos_t, phi):
    """Momenta (N, 4) of the two daughters of `parent` (N, 4) of mass m_parent, at angles (theta,
    phi) of daughter 1 in the parent's rest frame, and |p*|/m_parent of the decay.

    Written in units of the parent's mass, so it holds down to m_parent -> 0 (massless products
    then share the parent's momentum in the fractions (1 +- cos theta*)/2 along its direction)."""
    m_parent = np.asarray(m_parent, float) * np.ones(np.shape(parent)[:-1])
    live = m_parent > 0
    safe = np.where(live, m_parent, 1.0)
    a, b = np.asarray(m1, float) / safe, np.asarray(m2, float) / safe
    # |p*| / M and E1 / M in units of the parent's mass; a massless pair from M = 0 has 1/2 and 1/2
    ratio = np.where(live, np.sqrt(np.clip((1.0 - (a + b) ** 2) * (1.0 - (a - b) ** 2), 0.0, None)) / 2.0, 0.5)
    e1 = np.where(live, (1.0 + a * a - b * b) / 2.0, 0.5)
    sin_t = np.sqrt(np.clip(1.0 - cos_t * cos_t, 0.0, None))
    d = np.stack([e1, ratio * sin_t * np.cos(phi), ratio * sin_t * np.sin(phi), ratio * cos_t], axis=-1)
    out1 = _from_rest_scaled(d, parent, m_parent)
    return out1, parent - out1, ratio


# --- maps of the unit interval ---------------------------------------------------------------------

@dataclass(frozen=True)
class FlatMap:
    """x in [0, 1] -> s in [lo, hi] uniformly; returns (s, ds/dx)."""

    def __call__(self, x, lo, hi):
        return lo + (hi - lo) * x, (hi - lo) * np.ones_like(x)

    def jacobian(self, s, lo, hi):
        """ds/dx at s (the inverse map's density is its reciprocal)."""
        return (hi - lo) * np.ones_like(s)


@dataclass(frozen=True)
class BreitWignerMap:
    """x in [0, 1] -> s in [lo, hi] with density ~ 1/((s - m^2)^2 + m^2 w^2) (a resonance of mass m
    and width w > 0); returns (s, ds/dx)."""

    mass: float
    width: float

    def __call__(self, x, lo, hi):
        m2, mg = self.mass**2, self.mass * self.width
        a_lo, a_hi = np.arctan((lo - m2) / mg), np.arctan((hi - m2) / mg)
        s = m2 + mg * np.tan(a_lo + (a_hi - a_lo) * x)
        s = np.clip(s, lo, hi)
        return s, (a_hi - a_lo) * ((s - m2) ** 2 + mg * mg) / mg

    def jacobian(self, s, lo, hi):
        m2, mg = self.mass**2, self.mass * self.width
        a_lo, a_hi = np.arctan((lo - m2) / mg), np.arctan((hi - m2) / mg)
        return (a_hi - a_lo) * ((s - m2) ** 2 + mg * mg) / mg


@dataclass(frozen=True)
class PowerMap:
    """x in [0, 1] -> s in [lo, hi] (lo > 0) with density ~ s^-nu (nu = 1: logarithmic, as for a
    photon propagator or tau = x1 x2); returns (s, ds/dx)."""

    nu: float = 1.0

    def __call__(self, x, lo, hi):
        if abs(self.nu - 1.0) < 1e-12:
            span = np.log(hi / lo)
            s = lo * np.exp(span * x)
            return s, s * span
        e = 1.0 - self.nu
        s = (lo**e + x * (hi**e - lo**e)) ** (1.0 / e)
        return s, (hi**e - lo**e) / e * s**self.nu

    def jacobian(self, s, lo, hi):
        if abs(self.nu - 1.0) < 1e-12:
            return s * np.log(hi / lo)
        e = 1.0 - self.nu
        return (hi**e - lo**e) / e * s**self.nu


@dataclass(frozen=True)
class AngularMap:
    """Maps x in [0, 1] to c = cos(theta) in [lo, hi] with a density that follows the poles.

    poles: 'none' (flat), 'forward' (pole at c = A), 'backward' (pole at c = -A) or 'both';
    power 2 follows 1/(A -+ c)^2 (massless t- or u-channel exchange), power 1 follows 1/(A -+ c)
    (massive fermion exchange); A = 1 + gap > 1 keeps the pole outside the range. vegas adapts
    on top of this map, which only has to remove the steep part. `with_complements` also returns
    1 - c and 1 + c computed without cancellation near the poles.
    """

    poles: str
    power: int
    gap: float
    lo: float
    hi: float

    def _f(self, c):
        a = 1.0 + self.gap
        if self.poles == "forward":
            return 1.0 / (a - c) if self.power == 2 else -np.log(a - c)
        if self.poles == "backward":
            return -1.0 / (a + c) if self.power == 2 else np.log(a + c)
        if self.power == 2:
            return 1.0 / (a - c) - 1.0 / (a + c)
        return np.log((a + c) / (a - c))

    def _density(self, c):
        """dF/dc of the primitive F used by the map."""
        a = 1.0 + self.gap
        if self.poles == "forward":
            return 1.0 / (a - c) ** self.power
        if self.poles == "backward":
            return 1.0 / (a + c) ** self.power
        return 1.0 / (a - c) ** self.power + 1.0 / (a + c) ** self.power

    def __call__(self, x):
        """(c, dc/dx) for an array x in [0, 1]."""
        c, _, _, jac = self.with_complements(x)
        return c, jac

    def with_complements(self, x):
        """(c, 1 - c, 1 + c, dc/dx) for an array x in [0, 1]."""
        if self.poles == "none":
            c = self.lo + (self.hi - self.lo) * x
            return c, 1.0 - c, 1.0 + c, np.full_like(x, self.hi - self.lo)
        a = 1.0 + self.gap
        f_lo, f_hi = self._f(np.float64(self.lo)), self._f(np.float64(self.hi))
        f = f_lo + (f_hi - f_lo) * x
        if self.poles == "forward":
            a_minus_c = 1.0 / f if self.power == 2 else np.exp(-f)
            c = a - a_minus_c
            omc, opc = a_minus_c - self.gap, 2.0 + self.gap - a_minus_c
        elif self.poles == "backward":
            a_plus_c = -1.0 / f if self.power == 2 else np.exp(f)
            c = a_plus_c - a
            omc, opc = 2.0 + self.gap - a_plus_c, a_plus_c - self.gap
        else:
            if self.power == 2:
                # F = 1/(A - c) - 1/(A + c) solved for A -+ c without cancellation on either side
                r = np.sqrt(1.0 + f * f * a * a)
                a_minus_c, a_plus_c = 2.0 * a / (1.0 + a * f + r), 2.0 * a / (1.0 - a * f + r)
            else:
                # F = ln((A + c)/(A - c)): A -+ c = 2A / (1 + e^(+-F))
                a_minus_c, a_plus_c = 2.0 * a / (1.0 + np.exp(f)), 2.0 * a / (1.0 + np.exp(-f))
            c = np.where(f >= 0, a - a_minus_c, a_plus_c - a)
            omc, opc = a_minus_c - self.gap, a_plus_c - self.gap
        inside = (c >= self.lo) & (c <= self.hi)
        c = np.clip(c, self.lo, self.hi)
        omc = np.where(inside, omc, 1.0 - c)
        opc = np.where(inside, opc, 1.0 + c)
        return c, omc, opc, (f_hi - f_lo) / self._density(c)
