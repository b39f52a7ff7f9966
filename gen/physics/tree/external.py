"""External states of the automatic amplitudes: helicity spinors and polarization vectors.

Arrays are component-major: a four-vector is (4, N), a Dirac spinor (4, N) in the chiral basis
gamma^mu = [[0, sigma^mu], [sigmabar^mu, 0]], psi = (psi_L, psi_R), P_L = diag(1, 1, 0, 0).
Helicity eigenstates chi_+- (p) and the spinors u = (sqrt(E - l|p|) chi_l, sqrt(E + l|p|) chi_l),
v = (-l sqrt(E + l|p|) chi_-l, l sqrt(E - l|p|) chi_-l) follow the helicity-amplitude conventions
of Murayama, Watanabe & Hagiwara, KEK-91-11 (1992); polarization vectors
eps(k, +-1) = (-+ e1 - i e2)/sqrt(2) with e1 = (0, cos t cos f, cos t sin f, -sin t),
e2 = (0, -sin f, cos f, 0), and eps(k, 0) = (|k|, E k/|k|)/m (same source; from memory).
Along -z the azimuth is taken as 0; a particle at rest has the z axis as its axis.
"""

from __future__ import annotations

import numpy as np

__all__ = ["axis", "chi", "u_spinor", "v_spinor", "bar", "polarization"]


def axis(p):
    """(|p|, cos t, sin t, cos f, sin f) of momenta p (4, N)."""
    px, py, pz = p[1], p[2], p[3]
    pt = np.hypot(px, py)
    pabs = np.hypot(pt, pz)
    at_rest = pabs == 0.0
    safe = np.where(at_rest, 1.0, pabs)
    cos_t = np.where(at_rest, 1.0, pz / safe)
    sin_t = np.where(at_rest, 0.0, pt / safe)
    flat = pt == 0.0
    ptsafe = np.where(flat, 1.0, pt)
    cos_f = np.where(flat, 1.0, px / ptsafe)
    sin_f = np.where(flat, 0.0, py / ptsafe)
    return pabs, cos_t, sin_t, cos_f, sin_f


def chi(p, hel: int):
    """Two-component helicity eigenstates (2, N) along p (4, N), helicity +1 or -1."""
    _, cos_t, sin_t, cos_f, sin_f = axis(p)
    # half angles from the full ones, stable along -z: cos(t/2) = sqrt((1 + cos t)/2)
    c2 = np.sqrt(np.maximum(0.5 * (1.0 + cos_t), 0.0))
    s2 = np.sqrt(np.maximum(0.5 * (1.0 - cos_t), 0.0))
    phase = cos_f + 1j * sin_f
    if hel > 0:
        return np.stack([c2 + 0j, phase * s2])
    return np.stack([-np.conj(phase) * s2, c2 + 0j])


def _roots(p, m):
    """(sqrt(E - |p|), sqrt(E + |p|)), the small one as m / sqrt(E + |p|) (exactly 0 when massless,
    free of the cancellation E - |p|)."""
    pabs = axis(p)[0]
    plus = np.sqrt(p[0] + pabs)
    return m / np.maximum(plus, 1e-300), plus


def u_spinor(p, m, hel: int):
    """u(p, hel) (4, N): the spinor of an incoming fermion (its bar for an outgoing one)."""
    minus, plus = _roots(p, m)
    c = chi(p, hel)
    lo, hi = (minus, plus) if hel > 0 else (plus, minus)
    return np.concatenate([lo * c, hi * c])


def v_spinor(p, m, hel: int):
    """v(p, hel) (4, N): the spinor of an outgoing antifermion (its bar for an incoming one)."""
    minus, plus = _roots(p, m)
    c = chi(p, -hel)
    # -l sqrt(E + l|p|) and l sqrt(E - l|p|)
    if hel > 0:
        return np.concatenate([-plus * c, minus * c])
    return np.concatenate([minus * c, -plus * c])


def bar(spinor):
    """The Dirac conjugate psi^dagger gamma^0 of a spinor (4, N), as a row (4, N)."""
    return np.conj(np.concatenate([spinor[2:], spinor[:2]]))


def polarization(k, m: float, hel: int):
    """Polarization vector eps^mu(k, hel) (4, N) of a vector boson: hel +-1, or 0 when massive."""
    pabs, cos_t, sin_t, cos_f, sin_f = axis(k)
    zero = np.zeros_like(pabs)
    if hel == 0:
        e = k[0]
        return np.stack([pabs / m, e * sin_t * cos_f / m, e * sin_t * sin_f / m, e * cos_t / m]) + 0j
    e1 = np.stack([zero, cos_t * cos_f, cos_t * sin_f, -sin_t])
    e2 = np.stack([zero, -sin_f, cos_f, zero])
    return (-hel * e1 - 1j * e2) / np.sqrt(2.0)
