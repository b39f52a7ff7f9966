"""Massless 2->2 parton scattering at tree level, |M|^2 / g_s^4 (colour and spin averaged over the
initial and summed over the final state), for the coming hadron-collider processes.

Ellis, Stirling & Webber, QCD and Collider Physics (1996), Table 7.1, in the canonical order
a(p1) b(p2) -> c(p3) d(p4), t = (p1 - p3)^2, u = (p1 - p4)^2. Identical final-state partons
(q q -> q q, q qbar -> g g, g g -> g g) need the factor 1/2 when integrated over all angles. Not
yet registered as processes: hadron-level generation (parton densities, channel sums and colour
flow) is the next step.
"""

from __future__ import annotations

__all__ = ["CHANNELS"]


def qqprime_qqprime(s, t, u):
    """q q' -> q q' (and q qbar' -> q qbar'): 4/9 (s^2 + u^2)/t^2."""
    return 4.0 / 9.0 * (s * s + u * u) / (t * t)


def qq_qq(s, t, u):
    """q q -> q q: 4/9 [(s^2 + u^2)/t^2 + (s^2 + t^2)/u^2] - 8/27 s^2/(u t)."""
    return 4.0 / 9.0 * ((s * s + u * u) / (t * t) + (s * s + t * t) / (u * u)) - 8.0 / 27.0 * s * s / (u * t)


def qqbar_qprimeqprimebar(s, t, u):
    """q qbar -> q' qbar': 4/9 (t^2 + u^2)/s^2."""
    return 4.0 / 9.0 * (t * t + u * u) / (s * s)


def qqbar_qqbar(s, t, u):
    """q qbar -> q qbar: 4/9 [(s^2 + u^2)/t^2 + (t^2 + u^2)/s^2] - 8/27 u^2/(s t)."""
    return 4.0 / 9.0 * ((s * s + u * u) / (t * t) + (t * t + u * u) / (s * s)) - 8.0 / 27.0 * u * u / (s * t)


def qqbar_gg(s, t, u):
    """q qbar -> g g: 32/27 (t^2 + u^2)/(t u) - 8/3 (t^2 + u^2)/s^2."""
    return 32.0 / 27.0 * (t * t + u * u) / (t * u) - 8.0 / 3.0 * (t * t + u * u) / (s * s)


def gg_qqbar(s, t, u):
    """g g -> q qbar: 1/6 (t^2 + u^2)/(t u) - 3/8 (t^2 + u^2)/s^2."""
    return 1.0 / 6.0 * (t * t + u * u) / (t * u) - 3.0 / 8.0 * (t * t + u * u) / (s * s)


def gq_gq(s, t, u):
    """g q -> g q: -4/9 (s^2 + u^2)/(s u) + (u^2 + s^2)/t^2."""
    return -4.0 / 9.0 * (s * s + u * u) / (s * u) + (u * u + s * s) / (t * t)


def gg_gg(s, t, u):
    """g g -> g g: 9/2 (3 - t u/s^2 - s u/t^2 - s t/u^2)."""
    return 4.5 * (3.0 - t * u / (s * s) - s * u / (t * t) - s * t / (u * u))


#: channel name -> |M|^2 / g^4
CHANNELS = {
    "qq'->qq'": qqprime_qqprime, "qq->qq": qq_qq, "qqbar->q'qbar'": qqbar_qprimeqprimebar,
    "qqbar->qqbar": qqbar_qqbar, "qqbar->gg": qqbar_gg, "gg->qqbar": gg_qqbar, "gq->gq": gq_gq, "gg->gg": gg_gg,
}
