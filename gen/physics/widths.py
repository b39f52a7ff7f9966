"""Partial widths (GeV) and branching ratios of Z, W, H, the top quark and the muon.

Z, W and t (and H -> f fbar) at tree level: inputs are G_F, masses and sin^2 theta_W as resolved
by the electroweak model (`fermi` scheme by default). `alpha_s` > 0 multiplies hadronic Z and W
widths by the first QCD correction (1 + alpha_s/pi); with the default 0 every width is the pure
leading-order one.

The Higgs boson's branching ratios are not a tree-level matter: its decays into b bbar and c cbar
take the running quark masses and large QCD corrections, and W W*, Z Z*, g g and gamma gamma
(a quarter of the total) are off-shell or loop-induced. The default branching ratios of a decaying
Higgs boson are therefore the Standard-Model values of `HIGGS_BRANCHING_RATIOS` at the mass they
were computed for; at another mass the card must give them.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from collections import Counter

from .particles import antiparticle, species

__all__ = ["z_to_ff", "w_to_ff", "h_to_ff", "top_to_bw", "muon_decay", "partial_widths", "branching_ratios",
           "TABLES", "branching_ratio"]

_SQRT2 = math.sqrt(2.0)


def _beta(m_parent: float, m: float) -> float:
    return math.sqrt(max(1.0 - 4.0 * m * m / (m_parent * m_parent), 0.0))


def z_to_ff(g_fermi: float, m_z: float, sw2: float, flavour: str, m_f: float = 0.0, alpha_s: float = 0.0) -> float:
    """Gamma(Z -> f fbar) = N_c G_F m_Z^3 / (6 sqrt2 pi) beta [(3 - beta^2)/2 v^2 + beta^2 a^2],
    v = T3 - 2 Q sin^2, a = T3 (PDG review "Electroweak model and constraints on new physics";
    the threshold factors of vector and axial currents; recalled, and checked against the tree amplitude by
    Dirac traces to 1e-10 in tests/test_widths.py)."""
    sp = species(flavour)
    nc = 3.0 if sp.is_quark else 1.0
    v, a = sp.t3 - 2.0 * sp.charge * sw2, sp.t3
    b = _beta(m_z, m_f)
    qcd = 1.0 + alpha_s / math.pi if sp.is_quark else 1.0
    return nc * qcd * g_fermi * m_z**3 / (6.0 * _SQRT2 * math.pi) * b * ((3.0 - b * b) / 2.0 * v * v + b * b * a * a)


def w_to_ff(g_fermi: float, m_w: float, coloured: bool = False, ckm2: float = 1.0, alpha_s: float = 0.0) -> float:
    """Gamma(W -> f fbar') = N_c |V|^2 G_F m_W^3 / (6 sqrt2 pi), massless fermions (PDG review;
    recalled, and checked against Dirac traces in tests/test_widths.py)."""
    nc = 3.0 * (1.0 + alpha_s / math.pi) if coloured else 1.0
    return nc * ckm2 * g_fermi * m_w**3 / (6.0 * _SQRT2 * math.pi)


def h_to_ff(g_fermi: float, m_h: float, m_f: float, coloured: bool) -> float:
    """Gamma(H -> f fbar) = N_c G_F m_H m_f^2 beta^3 / (4 sqrt2 pi) (Djouadi, Phys. Rept. 457 (2008) 1,
    sec. 2.1; recalled, and checked against Dirac traces in tests/test_widths.py). The answer scales with m_f^2: for quarks give the running mass at m_H."""
    nc = 3.0 if coloured else 1.0
    return nc * g_fermi * m_h * m_f * m_f * _beta(m_h, m_f) ** 3 / (4.0 * _SQRT2 * math.pi)


def top_to_bw(g_fermi: float, m_t: float, m_w: float, vtb2: float = 1.0) -> float:
    """Gamma(t -> b W) = G_F m_t^3 / (8 sqrt2 pi) |V_tb|^2 (1 - x)^2 (1 + 2x), x = m_W^2/m_t^2, m_b = 0
    (the LO formula quoted by the PDG top-quark review)."""
    x = (m_w / m_t) ** 2
    return g_fermi * m_t**3 / (8.0 * _SQRT2 * math.pi) * vtb2 * (1.0 - x) ** 2 * (1.0 + 2.0 * x)


def muon_decay(g_fermi: float, m_mu: float, m_e: float = 0.0) -> float:
    """Gamma(mu -> e nu nu) = G_F^2 m_mu^5 / (192 pi^3) f(m_e^2/m_mu^2), f(x) = 1 - 8x + 8x^3 - x^4 - 12 x^2 ln x,
    without the QED correction (PDG review "Electroweak model"; recalled, and checked against a Dalitz-plot
    integral of the amplitude to 1e-7 in tests/test_widths.py)."""
    x = (m_e / m_mu) ** 2
    f = 1.0 - 8.0 * x + 8.0 * x**3 - x**4 - (12.0 * x * x * math.log(x) if x > 0 else 0.0)
    return g_fermi**2 * m_mu**5 / (192.0 * math.pi**3) * f


def partial_widths(particle: str, par: Mapping[str, float], alpha_s: float = 0.0) -> dict[str, float]:
    """Partial widths (GeV) by decay channel ('mu- mu+', 'b bbar', ...) of Z, W+, H or t.

    `par` holds g_fermi, sw2, m_Z, m_W, m_H and optional masses m_t and m_<flavour> (GeV); fermion
    masses default to the PDG values of the `particle` package.
    """
    gf = par["g_fermi"]

    def mass(name):
        return par.get(f"m_{name}", species(name).mass)

    if particle == "Z":
        out = {}
        for f, anti in (("e-", "e+"), ("mu-", "mu+"), ("tau-", "tau+"), ("nu_e", "nu_ebar"), ("nu_mu", "nu_mubar"),
                        ("nu_tau", "nu_taubar"), ("d", "dbar"), ("u", "ubar"), ("s", "sbar"), ("c", "cbar"), ("b", "bbar")):
            out[f"{f} {anti}"] = z_to_ff(gf, par["m_Z"], par["sw2"], f, mass(f), alpha_s)
        return out
    if particle == "W+":
        out = {f"{l} {nu}": w_to_ff(gf, par["m_W"]) for l, nu in (("e+", "nu_e"), ("mu+", "nu_mu"), ("tau+", "nu_tau"))}
        out.update({f"{u} {d}": w_to_ff(gf, par["m_W"], True, 1.0, alpha_s) for u, d in (("u", "dbar"), ("c", "sbar"))})
        return out
    if particle == "H":
        return {f"{f} {anti}": h_to_ff(gf, par["m_H"], mass(f), species(f).is_quark)
                for f, anti in (("b", "bbar"), ("c", "cbar"), ("tau-", "tau+"), ("mu-", "mu+"))}
    if particle == "t":
        return {"b W+": top_to_bw(gf, par.get("m_t", species("t").mass), par["m_W"])}
    raise ValueError(f"no decay table for {particle!r}; tables exist for Z, W+, H, t")


def branching_ratios(widths: Mapping[str, float]) -> dict[str, float]:
    total = sum(widths.values())
    return {k: v / total for k, v in widths.items()}


#: Standard-Model branching ratios of the Higgs boson at m_H = HIGGS_TABLE_MASS (LHC Higgs Cross Section
#: Working Group, CERN Yellow Report 4, arXiv:1610.07922, the table of branching ratios; from memory),
#: with the total width HIGGS_TABLE_WIDTH (GeV) of the same report
HIGGS_BRANCHING_RATIOS = {"b bbar": 5.809e-1, "W+ W-": 2.152e-1, "g g": 8.180e-2, "tau- tau+": 6.256e-2,
                          "c cbar": 2.884e-2, "Z Z": 2.641e-2, "gamma gamma": 2.270e-3, "Z gamma": 1.541e-3,
                          "mu- mu+": 2.171e-4}
HIGGS_TABLE_MASS = 125.09
HIGGS_TABLE_WIDTH = 4.088e-3
#: how far from HIGGS_TABLE_MASS (GeV) the table is used
HIGGS_TABLE_RANGE = 0.5

#: particles with a width table: the table's name and whether the particle is the conjugate of it
TABLES = {"Z": ("Z", False), "H": ("H", False), "W+": ("W+", False), "W-": ("W+", True), "t": ("t", False),
          "tbar": ("t", True)}


def branching_ratio(parent: str, products: tuple[str, ...], par: Mapping[str, float]) -> tuple[float | None, list[str]]:
    """The branching ratio of parent -> products: tree level from `partial_widths` for Z, W and t
    (W- and tbar by conjugation of W+ and t), the Standard-Model table for H; and the channels of
    the table. (None, channels) when the channel is not in it, (None, []) when the particle has no
    table (or, for H, the mass is outside the table's range)."""
    if parent not in TABLES:
        return None, []
    table, conjugate = TABLES[parent]
    wanted = Counter(antiparticle(p) for p in products) if conjugate else Counter(products)
    if table == "H":
        if abs(par["m_H"] - HIGGS_TABLE_MASS) > HIGGS_TABLE_RANGE:
            return None, []
        brs = HIGGS_BRANCHING_RATIOS
    else:
        brs = branching_ratios(partial_widths(table, par))
    for channel, br in brs.items():
        if Counter(channel.split()) == wanted:
            return br, list(brs)
    return None, list(brs)
