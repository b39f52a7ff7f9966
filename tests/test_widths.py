"""Tree-level widths against PDG values, within tolerances set by the known missing corrections."""

from __future__ import annotations

import math

import numpy as np
import pytest

import scipy.constants as sc

from gen.physics.constants import g_fermi
from gen.physics.particles import species
from gen.physics.widths import branching_ratios, h_to_ff, muon_decay, partial_widths, top_to_bw, w_to_ff, z_to_ff

G_FERMI = g_fermi()

HBAR_GEV_S = sc.hbar / sc.e * 1e-9  # hbar in GeV s (CODATA, via scipy.constants)
M_Z, M_W = 91.1876, 80.3692  # PDG (shared check values; m_W from arXiv:2308.09417)
SW2 = 1 - (M_W / M_Z) ** 2  # the fermi scheme's on-shell value
PAR = {"g_fermi": G_FERMI, "sw2": SW2, "m_Z": M_Z, "m_W": M_W, "m_H": 125.0}


def test_muon_lifetime_against_pdg():
    """PDG / MuLan (PRL 106 (2011) 041803): 2.1969811 us. Tree level is about 0.44% short of it
    (the known QED correction, which lengthens the lifetime): tolerance 0.5%, and it must be short."""
    tau = HBAR_GEV_S / muon_decay(G_FERMI, species("mu-").mass, species("e-").mass)
    assert tau * 1e6 == pytest.approx(2.1969811, rel=5e-3)
    assert tau * 1e6 < 2.1969811


def test_top_width_against_pdg():
    """The LO width (checked against Dirac traces below) is about 4% above the PDG average 1.42 GeV,
    inside its +0.19 -0.15 GeV error (PDG top-quark review; from memory)."""
    assert 1.42 - 0.15 < top_to_bw(G_FERMI, 172.5, M_W) < 1.42 + 0.19


def test_w_widths_against_pdg():
    """PDG Gamma_W = 2.14 GeV and BR(W -> e nu) = 10.71% (from memory): the LO leptonic width
    (checked against Dirac traces below) is 1% below, the total with the (1 + alpha_s/pi) factor
    about 2% below (tolerance 3%)."""
    assert w_to_ff(G_FERMI, M_W) == pytest.approx(0.1071 * 2.14, rel=0.02)
    total = sum(partial_widths("W+", PAR, alpha_s=0.118).values())
    assert total == pytest.approx(2.14, rel=0.03)
    br = branching_ratios(partial_widths("W+", PAR, alpha_s=0.118))
    assert br["e+ nu_e"] == pytest.approx(0.1071, rel=0.03)


def test_z_widths_against_pdg():
    """PDG / LEP-SLC (Phys. Rept. 427 (2006) 257): Gamma_Z = 2.4952 GeV, Gamma_ll = 83.984 MeV,
    R_l = 20.767. At LO in the fermi scheme Gamma_ll is about 0.7% low (tolerance 1.5%); the total
    with (1 + alpha_s/pi) for quarks within 1.5%; R_l within 2% (it is the ratio, so the electroweak
    corrections largely cancel)."""
    widths = partial_widths("Z", PAR, alpha_s=0.118)
    assert widths["mu- mu+"] == pytest.approx(0.083984, rel=0.015)
    assert sum(widths.values()) == pytest.approx(2.4952, rel=0.015)
    hadrons = sum(v for k, v in widths.items() if species(k.split()[0]).is_quark)
    assert hadrons / widths["mu- mu+"] == pytest.approx(20.767, rel=0.02)
    # the massive b width is below the massless one by the threshold factor (no source needed: beta < 1)
    assert z_to_ff(G_FERMI, M_Z, SW2, "b", 4.18) < z_to_ff(G_FERMI, M_Z, SW2, "b", 0.0)


def test_branching_ratios_sum_to_one():
    br = branching_ratios(partial_widths("H", PAR))
    assert sum(br.values()) == pytest.approx(1.0)
    assert max(br, key=br.get) == "b bbar"  # common practice, no source: b bbar dominates at 125 GeV


# --- widths to the precision of their formulas, computed apart from the library ------------------
#
# The partial widths below are computed in the test from the tree-level amplitudes with explicit
# Dirac traces (numpy gamma matrices, Dirac representation) and the two-body phase space
# Gamma = beta |M|^2_avg / (16 pi m) (PDG "Kinematics" review, two-body decays), or, for the muon,
# by a numerical integral over the Dalitz plot (PDG "Kinematics": dGamma = |M|^2 dm12^2 dm23^2 /
# ((2 pi)^3 32 M^3)) of the amplitude in Griffiths, Introduction to Elementary Particles (2008)
# sec. 10.3. Couplings: Z f fbar vertex -i (g_Z/2) gamma^mu (v - a gamma5), g_Z^2 = 4 sqrt2 G_F m_Z^2;
# H f fbar vertex -i m_f / v_H, v_H^2 = 1 / (sqrt2 G_F) (the Standard-Model Feynman rules,
# e.g. Peskin & Schroeder (1995) ch. 20-21; from memory, the massless limits checked against PDG above).

_I2, _Z2 = np.eye(2), np.zeros((2, 2))
_SIGMA = [np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), np.array([[1, 0], [0, -1]])]
GAMMA = [np.block([[_I2, _Z2], [_Z2, -_I2]]).astype(complex)] + [np.block([[_Z2, s], [-s, _Z2]]) for s in _SIGMA]
GAMMA5 = 1j * GAMMA[0] @ GAMMA[1] @ GAMMA[2] @ GAMMA[3]
METRIC = np.diag([1.0, -1.0, -1.0, -1.0])


def _slash(p):
    return sum(METRIC[m, m] * p[m] * GAMMA[m] for m in range(4))


def _decay_momenta(m_parent, m):
    q = math.sqrt(m_parent**2 / 4 - m * m)
    e = m_parent / 2
    return np.array([e, 0.3 * q, -0.48 * q, math.sqrt(1 - 0.09 - 0.2304) * q]), np.array([e, -0.3 * q, 0.48 * q,
                                                                                          -math.sqrt(1 - 0.09 - 0.2304) * q])


def _z_width_by_traces(m_z, sw2, flavour, m_f):
    sp = species(flavour)
    v, a = sp.t3 - 2 * sp.charge * sw2, sp.t3
    gz2 = 4 * math.sqrt(2) * G_FERMI * m_z**2
    p1, p2 = _decay_momenta(m_z, m_f)
    k = p1 + p2
    one = np.eye(4)
    left, right = _slash(p1) + m_f * one, _slash(p2) - m_f * one
    pol = -METRIC + np.outer(k, k) / m_z**2  # sum over Z polarizations, upper indices
    total = 0.0
    for mu in range(4):
        for nu in range(4):
            if pol[mu, nu] == 0:
                continue
            tr = np.trace(left @ GAMMA[mu] @ (v * one - a * GAMMA5) @ right @ (v * one + a * GAMMA5) @ GAMMA[nu])
            # lower both Lorentz indices of the trace to contract with pol^{mu nu}
            total += pol[mu, nu] * METRIC[mu, mu] * METRIC[nu, nu] * tr.real
    m2_avg = gz2 / 4 * total / 3  # average over the three Z polarizations
    nc = 3 if sp.is_quark else 1
    beta = math.sqrt(1 - 4 * m_f**2 / m_z**2)
    return nc * beta * m2_avg / (16 * math.pi * m_z)


def _h_width_by_traces(m_h, m_f, coloured):
    p1, p2 = _decay_momenta(m_h, m_f)
    y2 = m_f**2 * math.sqrt(2) * G_FERMI
    tr = np.trace((_slash(p1) + m_f * np.eye(4)) @ (_slash(p2) - m_f * np.eye(4))).real
    beta = math.sqrt(1 - 4 * m_f**2 / m_h**2)
    return (3 if coloured else 1) * beta * y2 * tr / (16 * math.pi * m_h)


@pytest.mark.parametrize("flavour, m_f", [("mu-", 0.0), ("b", 4.18), ("c", 1.27), ("tau-", 1.77686),
                                          ("u", 0.0), ("b", 20.0)])
def test_z_partial_widths_against_dirac_traces(flavour, m_f):
    """Gamma(Z -> f fbar) with the fermion mass kept, to 1e-10: the massive vector and axial
    threshold factors are tested by b and c quarks, tau leptons and a heavy 20 GeV b."""
    assert z_to_ff(G_FERMI, M_Z, SW2, flavour, m_f) == pytest.approx(_z_width_by_traces(M_Z, SW2, flavour, m_f),
                                                                      rel=1e-10, abs=0)


@pytest.mark.parametrize("m_f, coloured", [(4.18, True), (1.77686, False), (60.0, True), (0.1057, False)])
def test_h_partial_widths_against_dirac_traces(m_f, coloured):
    """Gamma(H -> f fbar) to 1e-10, including a 60 GeV fermion where beta^3 is far from 1."""
    assert h_to_ff(G_FERMI, 125.0, m_f, coloured) == pytest.approx(_h_width_by_traces(125.0, m_f, coloured), rel=1e-10, abs=0)


def test_muon_width_with_the_electron_mass_against_a_dalitz_integral():
    """Gamma(mu -> e nubar_e nu_mu) with m_e kept, to 1e-7, from the amplitude
    <|M|^2> = 64 G_F^2 (p.k2)(k1.k3) (Griffiths sec. 10.3; k1 = e, k2 = nubar_e, k3 = nu_mu), which in
    the invariant m13^2 = (k1 + k3)^2 is 16 G_F^2 (m^2 - m13^2)(m13^2 - m_e^2), integrated over the
    Dalitz plot with scipy.integrate; the m_e terms of f(x) shift Gamma by about 2e-4."""
    import scipy.integrate as si

    m, me = species("mu-").mass, species("e-").mass

    def inner(m13sq):
        e3 = (m13sq - me**2) / (2 * math.sqrt(m13sq))
        e2 = (m * m - m13sq) / (2 * math.sqrt(m13sq))
        width23 = (e2 + e3) ** 2 - (e2 - e3) ** 2  # the m23^2 range has this length (massless 2 and 3)
        return 16 * G_FERMI**2 * (m * m - m13sq) * (m13sq - me**2) * width23

    integral, err = si.quad(inner, me**2, m * m, epsabs=0, epsrel=1e-12, limit=200)
    gamma = integral / ((2 * math.pi) ** 3 * 32 * m**3)
    assert muon_decay(G_FERMI, m, me) == pytest.approx(gamma, rel=1e-7, abs=0)  # Gamma ~ 3e-19 GeV: no absolute floor
    assert abs(muon_decay(G_FERMI, m, 0.0) / gamma - 1) > 1e-4  # the mass terms matter at this precision


def _w_vertex_width(m_parent, m_w, m_down, polarizations_of_parent):
    """Width of a two-body decay through the W vertex -i (g/sqrt2) gamma^mu (1 - gamma5)/2,
    g^2 = 8 m_W^2 G_F / sqrt2, by Dirac traces: W+ -> l+ nu (parent = the W, both fermions
    massless) or t -> b W+ (parent = the top, massless b; the W polarization sum)."""
    g2 = 8 * m_w**2 * G_FERMI / math.sqrt(2)
    one = np.eye(4)
    pl = (one - GAMMA5) / 2
    if polarizations_of_parent == 3:  # W(k) -> nu(p1) l+(p2): sum_pol eps eps* on the W
        p1, p2 = _decay_momenta(m_parent, 0.0)
        k = p1 + p2
        pol = -METRIC + np.outer(k, k) / m_w**2
        left, right = _slash(p1), _slash(p2)
        total = sum(pol[mu, nu] * METRIC[mu, mu] * METRIC[nu, nu]
                    * np.trace(left @ GAMMA[mu] @ pl @ right @ (one + GAMMA5) / 2 @ GAMMA[nu]).real
                    for mu in range(4) for nu in range(4))
        q = m_parent / 2
        return g2 / 2 * total / 3 * q / (8 * math.pi * m_parent**2)
    # t(p) -> b(pb) W(k): |p_b| and the W polarization sum
    q = (m_parent**2 - m_w**2) / (2 * m_parent)
    pb = np.array([q, 0.0, 0.0, q])
    pt = np.array([m_parent, 0.0, 0.0, 0.0])
    k = pt - pb
    pol = -METRIC + np.outer(k, k) / m_w**2
    total = sum(pol[mu, nu] * METRIC[mu, mu] * METRIC[nu, nu]
                * np.trace(_slash(pb) @ GAMMA[mu] @ pl @ (_slash(pt) + m_parent * one) @ (one + GAMMA5) / 2
                           @ GAMMA[nu]).real
                for mu in range(4) for nu in range(4))
    return g2 / 2 * total / 2 * q / (8 * math.pi * m_parent**2)


def test_w_leptonic_width_against_dirac_traces():
    assert w_to_ff(G_FERMI, M_W) == pytest.approx(_w_vertex_width(M_W, M_W, 0.0, 3), rel=1e-10, abs=0)


@pytest.mark.parametrize("m_t", [172.5, 150.0, 250.0])
def test_top_width_against_dirac_traces(m_t):
    """Gamma(t -> b W) with the W mass kept, massless b, |V_tb| = 1."""
    assert top_to_bw(G_FERMI, m_t, M_W) == pytest.approx(_w_vertex_width(m_t, M_W, 0.0, 2), rel=1e-10, abs=0)


def test_muon_width_without_the_electron_mass_is_the_fermi_formula():
    """G_F^2 m_mu^5 / (192 pi^3) with CODATA G_F (scipy.constants) and the PDG muon mass (`particle`)."""
    from particle import Particle

    gf = sc.physical_constants["Fermi coupling constant"][0]
    m = Particle.from_pdgid(13).mass / 1e3
    assert muon_decay(gf, m) == pytest.approx(gf**2 * m**5 / (192 * math.pi**3), rel=1e-12, abs=0)
