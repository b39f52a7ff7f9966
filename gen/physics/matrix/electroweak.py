"""The electroweak theory at tree level: e+e- -> gamma*/Z -> f fbar and e+e- -> Z H.

Input schemes (card key `parameters.scheme`):

- ``"fermi"`` (default): G_F, m_W, m_Z are inputs; sin^2 theta_W = 1 - m_W^2/m_Z^2 and
  alpha = sqrt(2) G_F m_W^2 sin^2 theta_W / pi (tree-level relations).
- ``"thomson"``: alpha(0), m_W, m_Z are inputs; sin^2 theta_W = 1 - m_W^2/m_Z^2.
- ``"zpole"``: alpha(m_Z) and the effective leptonic sin^2 theta_eff are inputs, with m_Z; this
  reproduces the measured Z-pole asymmetries best.

The Z propagator carries a fixed width in the s channel, 1/(s - m_Z^2 + i m_Z Gamma_Z), and none
in the t channel. The final-fermion mass is kept in |M|^2 and in the kinematics; the electron mass
only in the kinematics (corrections of order m_e^2/s).
"""

from __future__ import annotations

import math

import numpy as np

from ...keys import NUMBER, Key
from ..constants import ALPHA_MZ, SW2_EFFECTIVE, alpha_0, g_fermi
from ..kinematics import dot
from ..particles import species
from .registry import ColourFlow, Model, ProcessSpec, flow_from_orderings

SCHEMES = ("fermi", "thomson", "zpole")


def _chiral(name: str, sw2: float) -> tuple[float, float, float]:
    """(Q, g_L, g_R) of a fermion: g_L = T3 - Q sin^2, g_R = -Q sin^2 (particle state)."""
    sp = species(name)
    q = sp.charge
    return q, sp.t3 - q * sw2, -q * sw2


def _amplitudes(x, qq, gl_e, gr_e, gl_f, gr_f, par, width: bool):
    """Reduced helicity amplitudes f_ij(x) = e^2 [Q_e Q_f / x + g_i g_j / (sw2 cw2 (x - mZ^2 + i mZ GZ))]."""
    e2 = 4.0 * math.pi * par["alpha"]
    sw2 = par["sw2"]
    mz = par["m_Z"]
    gz = par["width_Z"] if width else 0.0
    prop = 1.0 / (sw2 * (1.0 - sw2) * (x - mz * mz + 1j * mz * gz))
    pho = qq / x
    return tuple(e2 * (pho + a * b * prop) for a, b in ((gl_e, gl_f), (gr_e, gr_f), (gl_e, gr_f), (gr_e, gl_f)))


def make_fermion_pair(flavour: str, initial: str = "e-"):
    """|M|^2 for f'(p1) f'bar(p2) -> f(p3) fbar(p4) through s-channel gamma and Z, full
    interference; f' = e- (a lepton collider) or a quark (Drell-Yan).

    Helicity form with reduced amplitudes f_ij = e^2 [Q_f' Q_f/s + g_i^f' g_j^f / (s_W^2 c_W^2
    (s - m_Z^2 + i m_Z Gamma_Z))], g_L = T3 - Q s_W^2, g_R = -Q s_W^2, a massless initial pair and the
    final-fermion mass m kept:
    (1/4) sum |M|^2 = C [(u - m^2)^2 (|f_LL|^2 + |f_RR|^2) + (t - m^2)^2 (|f_LR|^2 + |f_RL|^2)
    + 2 m^2 s Re(f_LL f_LR* + f_RR f_RL*)], from the Dirac traces of the vector and axial currents;
    the colour factor C is N_c for a quark pair made, 1/N_c for a quark pair annihilating, else 1.
    For m = 0 it integrates to the textbook sigma = (4 pi alpha^2 / 3 s) C [Q_f'^2 Q_f^2 - 2 Q_f' Q_f
    v v' chi_1 + (v'^2 + a'^2)(v^2 + a^2) chi_2] (Ellis, Stirling & Webber, QCD and Collider
    Physics (1996), sec. 3.1 and the Drell-Yan chapter; for the photon alone Peskin & Schroeder eq. 5.10).
    For e- e+ -> e- e+ (massless) the t-channel gamma and Z are added: (1/4) sum |M|^2 = u^2 (|f_LL(s) +
    f_LL(t)|^2 + |f_RR(s) + f_RR(t)|^2) + t^2 (|f_LR(s)|^2 + |f_RL(s)|^2) + s^2 (|f_LR(t)|^2 +
    |f_RL(t)|^2) (the Bhabha amplitudes of Budny, Phys. Lett. B 55 (1975) 227, in helicity form;
    from memory), with no width in the space-like propagator.
    """
    nc = 3.0 if species(flavour).is_quark else 1.0
    if species(initial).is_quark:
        nc /= 3.0
    bhabha = flavour == "e-" and initial == "e-"

    def matrix(s, t, u, par):
        sw2 = par["sw2"]
        qe, gle, gre = _chiral(initial, sw2)
        qf, glf, grf = _chiral(flavour, sw2)
        ll, rr, lr, rl = _amplitudes(s, qe * qf, gle, gre, glf, grf, par, True)
        if bhabha:
            tll, trr, tlr, trl = _amplitudes(t, qe * qf, gle, gre, glf, grf, par, False)
            return (u * u * (np.abs(ll + tll) ** 2 + np.abs(rr + trr) ** 2)
                    + t * t * (np.abs(lr) ** 2 + np.abs(rl) ** 2)
                    + s * s * (np.abs(tlr) ** 2 + np.abs(trl) ** 2))
        m2 = par["m3"] ** 2
        return nc * ((u - m2) ** 2 * (np.abs(ll) ** 2 + np.abs(rr) ** 2)
                     + (t - m2) ** 2 * (np.abs(lr) ** 2 + np.abs(rl) ** 2)
                     + 2.0 * m2 * s * (ll * np.conj(lr) + rr * np.conj(rl)).real)

    matrix.__doc__ = make_fermion_pair.__doc__
    return matrix


def make_w_decay(incoming_fermion_first: bool, pair: str):
    """|M|^2 for q(p1) qbar'(p2) -> W -> lepton pair (p3, p4) through an s-channel W with a fixed width:
    (1/12) g^4 |V|^2 (p_f - p_fbar')^4 / ((s - m_W^2)^2 + m_W^2 Gamma_W^2), g^2 = e^2 / s_W^2, where
    f is the incoming fermion (the quark, not the antiquark) and fbar' the outgoing antifermion
    (V - A: the pair of left-handed lines; 1/12 = 1/4 spins x 1/3 colours). Integrated:
    sigma = |V|^2 G_F^2 m_W^4 s / (18 pi |s - m_W^2 + i m_W Gamma_W|^2), which for Gamma_W -> 0 is
    (pi sqrt(2) / 3) G_F m_W^2 |V|^2 delta(s - m_W^2) x Gamma(W -> l nu)/Gamma_W (Ellis, Stirling &
    Webber (1996), the vector-boson chapter; from memory). |V|^2 is the parameter `ckm2_<pair>`."""
    key = f"ckm2_{pair}"

    def matrix(s, t, u, par):
        g2 = 4.0 * math.pi * par["alpha"] / par["sw2"]
        mw2 = par["m_W"] ** 2
        x = t if incoming_fermion_first else u
        return g2 * g2 * par[key] / 12.0 * x * x / ((s - mw2) ** 2 + mw2 * par["width_W"] ** 2)

    matrix.__doc__ = make_w_decay.__doc__
    return matrix


def gluon_fusion_higgs(s, t, u, par):
    """g g -> H through a top loop in the heavy-top limit, narrow width:
    (1/256) sum |M|^2 = G_F alpha_s^2 s^2 / (288 sqrt(2) pi^2), so that sigma = sigma_0 m_H^2
    delta(s - m_H^2) with sigma_0 = G_F alpha_s^2 / (288 sqrt(2) pi) (Djouadi, Phys. Rept. 457 (2008)
    1, sec. 3.4, with the loop factor |(3/4) A_Q|^2 -> 1 for m_t -> infinity; from memory)."""
    return par["g_fermi"] * par["alpha_s"] ** 2 * s * s / (288.0 * math.sqrt(2.0) * math.pi**2)


def higgs_strahlung(s, t, u, par):
    """e-(p1) e+(p2) -> Z(p3) H(p4) through an s-channel Z, summed over Z polarizations.

    (1/4) sum |M|^2 = (g_Z^4 m_Z^2 / 4) (v_e^2 + a_e^2) [s/2 + (m_Z^2 - t)(m_Z^2 - u)/(2 m_Z^2)]
    / |s - m_Z^2 + i m_Z Gamma_Z|^2 with g_Z = e/(s_W c_W), v_e = -1/2 + 2 s_W^2, a_e = -1/2 (the
    Z-fermion vertex -i (g_Z/2) gamma^mu (v - a gamma5), the ZZH vertex i g_Z m_Z g^{mu nu}).
    Integrated it gives sigma = G_F^2 m_Z^4 / (96 pi s) (v'^2 + a'^2) lambda^(1/2) (lambda +
    12 m_Z^2/s) / (1 - m_Z^2/s)^2, v' = -1 + 4 s_W^2, a' = -1, for Gamma_Z = 0 (Djouadi,
    Phys. Rept. 457 (2008) 1, sec. 3.1; formula from memory).
    """
    sw2 = par["sw2"]
    gz2 = 4.0 * math.pi * par["alpha"] / (sw2 * (1.0 - sw2))
    mz2 = par["m_Z"] ** 2
    ve, ae = -0.5 + 2.0 * sw2, -0.5
    den = (s - mz2) ** 2 + mz2 * par["width_Z"] ** 2
    bracket = 0.5 * s + (mz2 - t) * (mz2 - u) / (2.0 * mz2)
    return 0.25 * gz2 * gz2 * mz2 * (ve * ve + ae * ae) * bracket / den


def muon_decay(p, par):
    """mu-(p1) -> e-(p2) nubar_e(p3) nu_mu(p4) in the four-fermion (V - A) limit, m_W -> infinity:
    (1/2) sum |M|^2 = 64 G_F^2 (p1.p3)(p2.p4) (Griffiths, Introduction to Elementary Particles,
    2nd ed. (2008), sec. 10.3; recalled, and its width checked against the formula in tests/test_widths.py). Integrated it gives Gamma = G_F^2 m^5/(192 pi^3) f(m_e^2/m^2)
    and the Michel electron spectrum x^2 (3 - 2x) for m_e -> 0. The same form holds for
    mu+ -> e+ nu_e nubar_mu with the particles conjugated."""
    gf = par["g_fermi"]
    return 64.0 * gf * gf * dot(p[:, 0], p[:, 2]) * dot(p[:, 1], p[:, 3])


def _resolve(over):
    scheme = str(over.get("scheme", "fermi"))
    mz = float(over.get("m_Z", species("Z").mass))
    mw = float(over.get("m_W", species("W+").mass))
    gf = float(over.get("g_fermi", g_fermi()))
    theta = float(over.get("cabibbo_angle", 0.0))
    c2, s2 = math.cos(theta) ** 2, math.sin(theta) ** 2
    out: dict[str, float | str] = {"scheme": scheme, "m_Z": mz,
                                    "width_Z": float(over.get("width_Z", species("Z").width)),
                                    "m_H": float(over.get("m_H", species("H").mass)),
                                    "width_W": float(over.get("width_W", species("W+").width)),
                                    "width_H": float(over.get("width_H", species("H").width)),
                                    "cabibbo_angle": theta, "ckm2_ud": c2, "ckm2_us": s2, "ckm2_cd": s2, "ckm2_cs": c2,
                                    "m_W": mw, "g_fermi": gf}
    if scheme == "fermi":
        sw2 = 1.0 - (mw / mz) ** 2
        out.update(sw2=sw2, alpha=math.sqrt(2.0) * gf * mw * mw * sw2 / math.pi)
    elif scheme == "thomson":
        out.update(alpha=float(over.get("alpha", alpha_0())), sw2=1.0 - (mw / mz) ** 2)
    else:
        out.update(alpha=float(over.get("alpha", ALPHA_MZ)), sw2=float(over.get("sw2", SW2_EFFECTIVE)))
    return out


def _inapplicable(given) -> dict[str, str]:
    """Parameters the card gives that the chosen scheme does not use, with the reason."""
    scheme = given.get("scheme", "fermi")
    derived = {"fermi": {"alpha": "alpha from G_F, m_W and m_Z", "sw2": "sin^2 theta_W = 1 - m_W^2/m_Z^2"},
               "thomson": {"sw2": "sin^2 theta_W = 1 - m_W^2/m_Z^2"}}.get(scheme, {})
    settable = {"alpha": 'scheme = "thomson" or "zpole"', "sw2": 'scheme = "zpole"'}
    return {k: f"the {scheme} scheme derives {v}; choose {settable[k]} to set it"
            for k, v in derived.items() if k in given}


_QUARK_FLOW = ColourFlow(((0, 0), (0, 0), (1, 0), (0, 1)))
_ANNIHILATION_FLOW = flow_from_orderings(4, [(1, 0)])  # a quark pair annihilating into a colour singlet
_LEPTONS = {"e-": "e+", "mu-": "mu+"}
_NUS = {"e-": "nu_e", "mu-": "nu_mu"}

_PROC = []
for _f in ("e-", "mu-", "tau-", "d", "u", "s", "c", "b"):
    _anti = {"e-": "e+", "mu-": "mu+", "tau-": "tau+"}.get(_f, _f + "bar")
    _PROC.append(ProcessSpec(
        "electroweak", ("e-", "e+"), (_f, _anti), make_fermion_pair(_f), make_fermion_pair.__doc__,
        poles="forward" if _f == "e-" else "none", pole_power=2, needs_angular_cut=_f == "e-",
        colour=_QUARK_FLOW if species(_f).is_quark else None,
        reference=None if _f == "e-" else f"electroweak.gamma_z.{_f}"))
_PROC.append(ProcessSpec("electroweak", ("e-", "e+"), ("Z", "H"), higgs_strahlung, higgs_strahlung.__doc__,
                         reference="electroweak.higgs_strahlung"))
# hadron colliders: Drell-Yan, W production with a CKM matrix, Higgs production by gluon fusion
for _q in ("d", "u", "s", "c", "b"):
    for _l, _lbar in _LEPTONS.items():
        _PROC.append(ProcessSpec("electroweak", (_q, _q + "bar"), (_l, _lbar), make_fermion_pair(_l, _q),
                                 make_fermion_pair.__doc__, flows=(_ANNIHILATION_FLOW,), resonance=("m_Z", "width_Z"),
                                 massless_s_pole=True))
for _up, _down in (("u", "d"), ("u", "s"), ("c", "d"), ("c", "s")):
    for _l, _lbar in _LEPTONS.items():
        _nu = _NUS[_l]
        # W+: u dbar -> l+ nu (the fermion u pairs with the antifermion l+ = p3); W-: d ubar -> l- nubar
        _PROC.append(ProcessSpec("electroweak", (_up, _down + "bar"), (_lbar, _nu), make_w_decay(True, _up + _down),
                                 make_w_decay.__doc__, flows=(_ANNIHILATION_FLOW,), resonance=("m_W", "width_W")))
        _PROC.append(ProcessSpec("electroweak", (_down, _up + "bar"), (_l, _nu + "bar"), make_w_decay(False, _up + _down),
                                 make_w_decay.__doc__, flows=(_ANNIHILATION_FLOW,), resonance=("m_W", "width_W")))
for _mu, _decay in (("mu-", ("e-", "nu_ebar", "nu_mu")), ("mu+", ("e+", "nu_e", "nu_mubar"))):
    _PROC.append(ProcessSpec("electroweak", (_mu,), _decay, None, muon_decay.__doc__, momentum_matrix=muon_decay))
_PROC.append(ProcessSpec("electroweak", ("g", "g"), ("H",), gluon_fusion_higgs, gluon_fusion_higgs.__doc__,
                         flows=(flow_from_orderings(3, [("ring", 0, 1)]),), strong_order=2, resonance=("m_H", "width_H")))

MODEL = Model(
    name="electroweak",
    doc="Tree-level electroweak theory with a selectable input scheme: fermi (default; alpha = sqrt2 G_F m_W^2 "
        "sin^2/pi, about 1/132), thomson (alpha(0) = 1/137.036) or zpole (alpha(m_Z) = 1/127.951).",
    params={
        "scheme": Key(str, "fermi", doc="electroweak input scheme", choices=SCHEMES),
        "m_Z": Key(NUMBER, None, 1.0, 1e4, "GeV", "Z mass", default_doc="PDG"),
        "width_Z": Key(NUMBER, None, 0.0, 1e3, "GeV", "Z width in the s-channel propagator and its decays",
                       default_doc="PDG"),
        "m_W": Key(NUMBER, None, 1.0, 1e4, "GeV", "W mass", default_doc="PDG"),
        "m_H": Key(NUMBER, None, 1.0, 1e4, "GeV", "Higgs mass", default_doc="PDG"),
        "width_W": Key(NUMBER, None, 0.0, 1e3, "GeV", "W width in the s-channel propagator and its decays",
                       default_doc="PDG"),
        "width_H": Key(NUMBER, None, 0.0, 1e3, "GeV", "Higgs width (gluon fusion is generated in the "
                       "narrow-width limit)", default_doc="PDG"),
        "cabibbo_angle": Key(NUMBER, 0.0, -1.6, 1.6, "rad", "Cabibbo angle of the two-generation quark mixing; 0 "
                             "(default) is a diagonal CKM matrix"),
        "g_fermi": Key(NUMBER, None, 1e-7, 1e-3, "GeV^-2", "Fermi constant (an input of the fermi scheme; in every "
                       "scheme it sets muon decay and gluon fusion)", default_doc="CODATA"),
        "alpha": Key(NUMBER, None, 1e-6, 1.0, "", "fine-structure constant (thomson and zpole schemes only)",
                     default_doc="thomson: CODATA alpha(0); zpole: 1/127.951"),
        "sw2": Key(NUMBER, SW2_EFFECTIVE, 0.0, 1.0, "", "sin^2 theta, the effective leptonic value (zpole scheme only)",
                   lo_open=True),
    },
    couplings=("alpha", "sw2", "g_fermi"),
    resolve=_resolve,
    mass_params={"Z": "m_Z", "H": "m_H", "W+": "m_W"},
    width_params={"Z": "width_Z", "H": "width_H", "W+": "width_W"},
    inapplicable=_inapplicable,
    processes=tuple(_PROC),
)
