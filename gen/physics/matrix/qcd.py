"""Tree-level QCD (the `qcd` model): e+e- -> gamma* -> q qbar g, the parton 2->2 processes for
hadron colliders (the eight massless channels, heavy-quark pairs, prompt photons), each with its
colour flows.

The massless 2->2 channels are |M|^2 / g_s^4 (colour and spin averaged over the initial and summed
over the final state) of Ellis, Stirling & Webber, QCD and Collider Physics (1996), Table 7.1, in
the canonical order a(p1) b(p2) -> c(p3) d(p4), t = (p1 - p3)^2, u = (p1 - p4)^2. Identical
final-state partons (q q -> q q, q qbar -> g g, g g -> g g) carry the factor 1/2 of the registry.

Colour flows are chosen per event with probability proportional to the leading-colour partial
weights (the squared colour-ordered amplitudes at large N_c; for the heavy-quark channels those of
the massless case with t -> t - m^2, u -> u - m^2). In a hadron run alpha_s comes per event from
the running coupling at the renormalization scale; at fixed beam energies it is the model's
`alpha_s` parameter.
"""

from __future__ import annotations

import math

import numpy as np

from ...keys import NUMBER, Key
from ..constants import alpha_0
from ..kinematics import dot
from ..particles import species
from .registry import ColourFlow, Model, ProcessSpec, flow_from_orderings

__all__ = ["CHANNELS", "MODEL", "three_jet"]


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


def make_three_jet(flavour: str):
    charge = species(flavour).charge

    def three_jet(p, par):
        """e-(p1) e+(p2) -> q(p3) qbar(p4) g(p5) through one photon, massless partons:
        (1/4) sum |M|^2 = 4 C_F N_c Q_q^2 e^4 g_s^2 [(p1.p3)^2 + (p1.p4)^2 + (p2.p3)^2 + (p2.p4)^2]
        / (s (p3.p5)(p4.p5)) (the form of Ellis, Ross & Terrano, Nucl. Phys. B 178 (1981) 421, from
        memory), normalized so that averaged over the beam direction it is dsigma/dx1 dx2 =
        sigma_0 (2 alpha_s / 3 pi) (x1^2 + x2^2)/((1 - x1)(1 - x2)) (DeGrand, Ng & Tye, Phys. Rev. D 16
        (1977) 3251, eq. 2.9; Halzen & Martin eq. 11.35). Quark masses enter the kinematics only."""
        p1, p2, p3, p4, p5 = (p[:, i] for i in range(5))
        s = 2.0 * dot(p1, p2) + par["m1"] ** 2 + par["m2"] ** 2
        e4g2 = (4.0 * math.pi * par["alpha"]) ** 2 * 4.0 * math.pi * par["alpha_s"]
        num = dot(p1, p3) ** 2 + dot(p1, p4) ** 2 + dot(p2, p3) ** 2 + dot(p2, p4) ** 2
        return 4.0 * (4.0 / 3.0) * 3.0 * charge**2 * e4g2 * num / (s * dot(p3, p5) * dot(p4, p5))

    return three_jet


three_jet = make_three_jet("u")

_FLOW = ColourFlow(((0, 0), (0, 0), (1, 0), (0, 2), (2, 1)))  # q carries 1, g carries 2 and anti-1, qbar anti-2


# --- parton 2->2 processes -----------------------------------------------------------------------

def _gs4(par):
    a = par["alpha_s"]
    return (4.0 * math.pi) ** 2 * a * a


def _coupled(channel):
    """|M|^2 = g_s^4 times a channel of Table 7.1 (one function object per channel, shared by all
    flavours, so that a hadron run evaluates it once per phase-space point)."""

    def matrix(s, t, u, par):
        return _gs4(par) * channel(s, t, u)

    matrix.__doc__ = f"g_s^4 times {channel.__doc__} (Ellis, Stirling & Webber (1996), Table 7.1)"
    return matrix


#: channel name -> |M|^2 (one function object per channel, shared by every flavour)
_QCD_MATRIX = {name: _coupled(fn) for name, fn in CHANNELS.items()}


def heavy_qqbar(s, t, u, par):
    """q qbar -> Q Qbar with the heavy-quark mass m = par["m3"]:
    g_s^4 (4/9) [tau1^2 + tau2^2 + rho/2], tau1 = (m^2 - t)/s, tau2 = (m^2 - u)/s, rho = 4 m^2/s
    (Combridge, Nucl. Phys. B 151 (1979) 429; Ellis, Stirling & Webber (1996) eq. 10.12; from memory)."""
    m2 = par["m3"] ** 2
    t1, t2, rho = (m2 - t) / s, (m2 - u) / s, 4.0 * m2 / s
    return _gs4(par) * (4.0 / 9.0) * (t1 * t1 + t2 * t2 + 0.5 * rho)


def heavy_gg(s, t, u, par):
    """g g -> Q Qbar with the heavy-quark mass m = par["m3"]:
    g_s^4 (1/(6 tau1 tau2) - 3/8) (tau1^2 + tau2^2 + rho - rho^2/(4 tau1 tau2)), tau and rho as for
    q qbar -> Q Qbar (Combridge (1979); Ellis, Stirling & Webber (1996) eq. 10.12; from memory)."""
    m2 = par["m3"] ** 2
    t1, t2, rho = (m2 - t) / s, (m2 - u) / s, 4.0 * m2 / s
    return _gs4(par) * (1.0 / (6.0 * t1 * t2) - 0.375) * (t1 * t1 + t2 * t2 + rho - rho * rho / (4.0 * t1 * t2))


def _charge2(name):
    q = species(name).charge
    return q * q


def make_photon_annihilation(flavour: str):
    q2 = _charge2(flavour)

    def matrix(s, t, u, par):
        """q(p1) qbar(p2) -> g(p3) gamma(p4): e^2 e_q^2 g_s^2 (8/9)(t/u + u/t) (Ellis, Stirling &
        Webber (1996), Table 7.2 at s + t + u = 0, N = 3)."""
        return (4.0 * math.pi) ** 2 * par["alpha"] * par["alpha_s"] * q2 * (8.0 / 9.0) * (t / u + u / t)

    return matrix


def make_photon_compton(flavour: str):
    q2 = _charge2(flavour)

    def matrix(s, t, u, par):
        """g(p1) q(p2) -> gamma(p3) q(p4): -e^2 e_q^2 g_s^2 (1/3)(s/u + u/s) (Ellis, Stirling &
        Webber (1996), Table 7.2 at s + t + u = 0, N = 3)."""
        return -(4.0 * math.pi) ** 2 * par["alpha"] * par["alpha_s"] * q2 / 3.0 * (s / u + u / s)

    return matrix


def _ratio(a, b):
    """A flow weight a/b of two (negative or positive) invariants, as a magnitude."""
    return lambda s, t, u, par: np.abs(a(s, t, u, par) / b(s, t, u, par))


def _s_hat(s, t, u, par):
    return s


def _t_hat(s, t, u, par):
    return t


def _u_hat(s, t, u, par):
    return u


def _t_minus_m2(s, t, u, par):
    """t - m^2 of the heavy quark p3 (its propagator in g g -> Q Qbar)."""
    return t - par["m3"] ** 2


def _u_minus_m2(s, t, u, par):
    return u - par["m3"] ** 2


def _t_channel_gluon(s, t, u, par):
    """(s^2 + u^2)/t^2: the squared colour-ordered amplitude of a t-channel gluon exchange."""
    return (s * s + u * u) / (t * t)


def _u_channel_gluon(s, t, u, par):
    return (s * s + t * t) / (u * u)


def _s_channel_gluon(s, t, u, par):
    return (t * t + u * u) / (s * s)


def _flows(*items):
    return tuple(flow_from_orderings(4, orderings, weight) for orderings, weight in items)


def _gluon_ring(ring, weight):
    return flow_from_orderings(4, [("ring",) + ring], weight)


# flows in canonical order; colour orderings as in `flow_from_orderings` (0, 1 incoming; 2, 3 outgoing),
# each with its leading-colour weight
_FLOWS = {
    "qq'": _flows(([(3, 0), (2, 1)], None)),                     # q q' -> q q' (t-channel gluon)
    "qqbar'": _flows(([(1, 0), (2, 3)], None)),                  # q qbar' -> q qbar'
    "qbarqbar'": _flows(([(0, 3), (1, 2)], None)),               # qbar qbar' -> qbar qbar'
    "qq": _flows(([(3, 0), (2, 1)], _t_channel_gluon), ([(2, 0), (3, 1)], _u_channel_gluon)),
    "qbarqbar": _flows(([(0, 3), (1, 2)], _t_channel_gluon), ([(0, 2), (1, 3)], _u_channel_gluon)),
    "s-channel": _flows(([(2, 0), (1, 3)], None)),               # q qbar -> q' qbar' and -> Q Qbar
    "qqbar": _flows(([(2, 0), (1, 3)], _s_channel_gluon), ([(1, 0), (2, 3)], _t_channel_gluon)),
    "qqbar->gg": _flows(([(1, 3, 2, 0)], _ratio(_u_hat, _t_hat)), ([(1, 2, 3, 0)], _ratio(_t_hat, _u_hat))),
    "gg->qqbar": _flows(([(2, 0, 1, 3)], _ratio(_u_hat, _t_hat)), ([(2, 1, 0, 3)], _ratio(_t_hat, _u_hat))),
    "gg->QQbar": _flows(([(2, 0, 1, 3)], _ratio(_u_minus_m2, _t_minus_m2)),
                        ([(2, 1, 0, 3)], _ratio(_t_minus_m2, _u_minus_m2))),
    "gq": _flows(([(3, 0, 2, 1)], _ratio(_s_hat, _u_hat)), ([(3, 2, 0, 1)], _ratio(_u_hat, _s_hat))),
    "gqbar": _flows(([(1, 2, 0, 3)], _ratio(_s_hat, _u_hat)), ([(1, 0, 2, 3)], _ratio(_u_hat, _s_hat))),
    "gg": tuple(_gluon_ring(ring, w) for ring, w in (
        ((0, 1, 2, 3), lambda s, t, u, par: t * t), ((0, 3, 2, 1), lambda s, t, u, par: t * t),
        ((0, 2, 3, 1), lambda s, t, u, par: u * u), ((0, 1, 3, 2), lambda s, t, u, par: u * u),
        ((0, 3, 1, 2), lambda s, t, u, par: s * s), ((0, 2, 1, 3), lambda s, t, u, par: s * s))),
    "qqbar->g gamma": _flows(([(1, 2, 0)], None)),
    "g q->gamma q": _flows(([(3, 0, 1)], None)),
    "g qbar->gamma qbar": _flows(([(1, 0, 3)], None)),
}

_SRC = "Ellis, Stirling & Webber, QCD and Collider Physics (1996), Table 7.1"


def _partonic() -> list[ProcessSpec]:
    light = ("d", "u", "s", "c", "b")
    bar = {q: q + "bar" for q in light}
    out: list[ProcessSpec] = []

    def add(inc, outg, matrix, flows, poles="both", power=2, source=_SRC, order=2, s_pole=False):
        out.append(ProcessSpec("qcd", inc, outg, matrix, source, poles=poles, pole_power=power,
                               needs_angular_cut=poles != "none", flows=flows, strong_order=order,
                               massless_s_pole=s_pole))

    for i, q in enumerate(light):
        qb = bar[q]
        for r in light[i + 1:]:
            add((q, r), (q, r), _QCD_MATRIX["qq'->qq'"], _FLOWS["qq'"])
            add((qb, bar[r]), (qb, bar[r]), _QCD_MATRIX["qq'->qq'"], _FLOWS["qbarqbar'"])
        for r in light:
            if r != q:
                add((q, bar[r]), (q, bar[r]), _QCD_MATRIX["qq'->qq'"], _FLOWS["qqbar'"])
                add((q, qb), (r, bar[r]), _QCD_MATRIX["qqbar->q'qbar'"], _FLOWS["s-channel"], poles="none",
                    s_pole=True)
        add((q, q), (q, q), _QCD_MATRIX["qq->qq"], _FLOWS["qq"])
        add((qb, qb), (qb, qb), _QCD_MATRIX["qq->qq"], _FLOWS["qbarqbar"])
        add((q, qb), (q, qb), _QCD_MATRIX["qqbar->qqbar"], _FLOWS["qqbar"])
        add((q, qb), ("g", "g"), _QCD_MATRIX["qqbar->gg"], _FLOWS["qqbar->gg"])
        add(("g", "g"), (q, qb), _QCD_MATRIX["gg->qqbar"], _FLOWS["gg->qqbar"])
        add(("g", q), ("g", q), _QCD_MATRIX["gq->gq"], _FLOWS["gq"])
        add(("g", qb), ("g", qb), _QCD_MATRIX["gq->gq"], _FLOWS["gqbar"])
        add((q, qb), ("t", "tbar"), heavy_qqbar, _FLOWS["s-channel"], poles="none", source=heavy_qqbar.__doc__)
        add((q, qb), ("g", "gamma"), make_photon_annihilation(q), _FLOWS["qqbar->g gamma"], power=1,
            source=make_photon_annihilation(q).__doc__, order=1)
        add(("g", q), ("gamma", q), make_photon_compton(q), _FLOWS["g q->gamma q"], poles="backward", power=1,
            source=make_photon_compton(q).__doc__, order=1)
        add(("g", qb), ("gamma", qb), make_photon_compton(q), _FLOWS["g qbar->gamma qbar"], poles="backward",
            power=1, source=make_photon_compton(q).__doc__, order=1)
    add(("g", "g"), ("g", "g"), _QCD_MATRIX["gg->gg"], _FLOWS["gg"])
    add(("g", "g"), ("t", "tbar"), heavy_gg, _FLOWS["gg->QQbar"], poles="none", source=heavy_gg.__doc__)
    return out


MODEL = Model(
    name="qcd",
    doc="Tree-level QCD: e+e- -> gamma* -> q qbar g with a fixed alpha_s (cut away soft and collinear gluons), and "
        "the parton processes of hadron collisions (jets, top pairs, prompt photons) with a running alpha_s.",
    params={"alpha_s": Key(NUMBER, 0.118, 1e-4, 1.0, "", "strong coupling, fixed (give its value at the process's "
                           "scale); at hadron colliders it runs instead (see [partons])"),
            "alpha": Key(NUMBER, None, 1e-6, 1.0, "", "fine-structure constant", default_doc="CODATA alpha(0)")},
    couplings=("alpha_s", "alpha"),
    resolve=lambda over: {"alpha_s": float(over.get("alpha_s", 0.118)), "alpha": float(over.get("alpha", alpha_0()))},
    processes=tuple(
        ProcessSpec("qcd", ("e-", "e+"), (q, q + "bar", "g"), None, make_three_jet(q).__doc__,
                    needs_angular_cut=True, colour=_FLOW, momentum_matrix=make_three_jet(q),
                    reference="qcd.three_jet")
        for q in ("d", "u", "s", "c", "b")) + tuple(_partonic()),
)
