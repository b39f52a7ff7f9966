"""Tree-level QCD: e+e- -> gamma* -> q qbar g (the `qcd` model), and the massless 2->2 parton
|M|^2 / g_s^4 (colour and spin averaged over the initial and summed over the final state) for the
coming hadron-collider processes.

The 2->2 parton channels follow
Ellis, Stirling & Webber, QCD and Collider Physics (1996), Table 7.1, in the canonical order
a(p1) b(p2) -> c(p3) d(p4), t = (p1 - p3)^2, u = (p1 - p4)^2. Identical final-state partons
(q q -> q q, q qbar -> g g, g g -> g g) need the factor 1/2 when integrated over all angles. Not
yet registered as processes: hadron-level generation (parton densities, channel sums and colour
flow) is the next step.
"""

from __future__ import annotations

import math


from ..constants import ALPHA_0
from ..particles import species
from .registry import ColourFlow, Model, Param, ProcessSpec

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


def _dot(a, b):
    return a[..., 0] * b[..., 0] - a[..., 1] * b[..., 1] - a[..., 2] * b[..., 2] - a[..., 3] * b[..., 3]


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
        s = 2.0 * _dot(p1, p2) + par["m1"] ** 2 + par["m2"] ** 2
        e4g2 = (4.0 * math.pi * par["alpha"]) ** 2 * 4.0 * math.pi * par["alpha_s"]
        num = _dot(p1, p3) ** 2 + _dot(p1, p4) ** 2 + _dot(p2, p3) ** 2 + _dot(p2, p4) ** 2
        return 4.0 * (4.0 / 3.0) * 3.0 * charge**2 * e4g2 * num / (s * _dot(p3, p5) * _dot(p4, p5))

    return three_jet


three_jet = make_three_jet("u")

_FLOW = ColourFlow(((0, 0), (0, 0), (1, 0), (0, 2), (2, 1)))  # q carries 1, g carries 2 and anti-1, qbar anti-2

MODEL = Model(
    name="qcd",
    doc="Tree-level QCD radiation: e+e- -> gamma* -> q qbar g with a fixed alpha_s (cut away soft and collinear gluons).",
    params={"alpha_s": Param(0.118, 1e-4, 1.0, "", "strong coupling, fixed (give its value at the process's scale)"),
            "alpha": Param(ALPHA_0, 1e-6, 1.0, "", "fine-structure constant (CODATA alpha(0) by default)")},
    resolve=lambda over: {"alpha_s": float(over.get("alpha_s", 0.118)), "alpha": float(over.get("alpha", ALPHA_0))},
    processes=tuple(
        ProcessSpec("qcd", ("e-", "e+"), (q, q + "bar", "g"), None, make_three_jet(q).__doc__,
                    needs_angular_cut=True, colour=_FLOW, momentum_matrix=make_three_jet(q),
                    reference="qcd.three_jet")
        for q in ("d", "u", "s", "c", "b")),
)
