"""Orientation and charge at hadron colliders: angular distributions in the parton centre-of-mass
frame against their analytic shapes, the colour flow of q q -> q q against its leading-colour
weights, from the events gen writes.

Outside references, named beside each check: the V-A decay distributions of W bosons made in
q qbar' annihilation (Ellis, Stirling & Webber, QCD and Collider Physics (1996), sec. 9.2: the
charged lepton of W+ follows the antiquark, d sigma / d cos theta ~ (1 - cos theta)^2 against the
quark, mean cos theta = -1/2; the opposite sign for W-; from memory, the mean derived below); the
q q -> q q colour decomposition (the t-channel flow weighted by (s^2 + u^2)/t^2, the u-channel one
by (s^2 + t^2)/u^2; Ellis, Stirling & Webber (1996) ch. 7, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from gen.card import parse_card
from gen.jobs.run import run
from gen.records.store import read_table

from conftest import card

SQRT_S = 13600.0
FAST = "[integration]\nwarmup_iterations = 3\niterations = 4\npoints_per_iteration = 8000"


def _events(tmp_path, outgoing, extra, weighted=60000, seed=11):
    text = card("electroweak" if "jet" not in outgoing else "qcd", ["p", "p"], outgoing, f"sqrt_s = {SQRT_S}",
                extra + "\n" + FAST, f"events = 0\nweighted_events = {weighted}\nseed = {seed}")
    run(parse_card(text, "orientation.toml"), tmp_path / "out")
    table = read_table(tmp_path / "out" / "weighted.parquet")
    parts = table.column("particles").combine_chunks().flatten()
    n = table.num_rows
    p = np.stack([parts.field(c).to_numpy() for c in ("e", "px", "py", "pz")], -1).reshape(n, -1, 4)
    pdg = parts.field("pdg").to_numpy().reshape(n, -1)
    return p, pdg, table.column("weight").to_numpy(), table


def _cos_in_parton_frame(p, a: int, b: int) -> np.ndarray:
    """cos of the angle between particle a and incoming particle b in the frame where the two
    incoming partons (slots 0 and 1, along z) have no total momentum: a boost along z."""
    tot = p[:, 0] + p[:, 1]
    beta = tot[:, 3] / tot[:, 0]
    gamma = 1.0 / np.sqrt(1.0 - beta * beta)

    def boosted(v):
        e = gamma * (v[:, 0] - beta * v[:, 3])
        pz = gamma * (v[:, 3] - beta * v[:, 0])
        return np.stack([e, v[:, 1], v[:, 2], pz], 1)

    va, vb = boosted(p[:, a]), boosted(p[:, b])
    num = (va[:, 1:] * vb[:, 1:]).sum(1)
    return num / np.linalg.norm(va[:, 1:], axis=1) / np.linalg.norm(vb[:, 1:], axis=1)


def _cos_per_event(p, slot_a, slot_b) -> np.ndarray:
    """cos of the angle between particle slot_a[i] and incoming slot_b[i] of each event i."""
    c = np.empty(len(p))
    for b in (0, 1):
        for a in range(2, p.shape[1]):
            sel = (slot_b == b) & (slot_a == a)
            if sel.any():
                c[sel] = _cos_in_parton_frame(p[sel], a, b)
    return c


def _weighted_mean(x, w):
    mean = np.sum(w * x) / np.sum(w)
    err = np.sqrt(np.sum(w * w * (x - mean) ** 2)) / np.sum(w)
    return mean, err


def test_the_v_minus_a_mean_is_minus_one_half():
    """<cos> = int c (1 - c)^2 dc / int (1 - c)^2 dc over [-1, 1] = (-4/3) / (8/3) (the shape of
    the module docstring, integrated exactly with numpy's polynomials)."""
    shape = np.polynomial.Polynomial([1.0, -2.0, 1.0])  # (1 - c)^2
    first = (shape * np.polynomial.Polynomial([0.0, 1.0])).integ()
    norm = shape.integ()
    assert (first(1) - first(-1)) / (norm(1) - norm(-1)) == pytest.approx(-0.5, abs=1e-15)


@pytest.mark.parametrize("outgoing, lepton_pdg, sign", [(["l+", "nu"], (-11, -13), -1.0),
                                                       (["l-", "nubar"], (11, 13), +1.0)])
def test_w_decay_angle_against_v_minus_a(outgoing, lepton_pdg, sign, tmp_path):
    """W+: <cos theta(l+, quark)> = -1/2; W-: <cos theta(l-, quark)> = +1/2, in the parton frame
    (no cuts on the angles: the pair-mass window does not bias them)."""
    p, pdg, w, _ = _events(tmp_path, outgoing, "[cuts]\nmass_min = 60.0\nmass_max = 100.0")
    quark_slot = np.where(pdg[:, 0] > 0, 0, 1)  # the incoming quark (not the antiquark)
    lep = np.where(np.isin(pdg[:, 2], lepton_pdg), 2, 3)
    assert np.all(np.isin(pdg[np.arange(len(pdg)), lep], lepton_pdg))
    c = _cos_per_event(p, lep, quark_slot)
    mean, err = _weighted_mean(c, w)
    assert abs(mean - sign * 0.5) < 5 * err + 0.005, (mean, err)


def test_w_decay_angle_distribution_has_the_v_minus_a_shape(tmp_path):
    """The binned distribution of cos theta(l+, quark) in W+ events against (3/8)(1 - c)^2 per unit c."""
    p, pdg, w, _ = _events(tmp_path, ["l+", "nu"], "[cuts]\nmass_min = 60.0\nmass_max = 100.0", seed=12)
    quark_slot = np.where(pdg[:, 0] > 0, 0, 1)
    lep = np.where(np.isin(pdg[:, 2], (-11, -13)), 2, 3)
    c = _cos_per_event(p, lep, quark_slot)
    edges = np.linspace(-1, 1, 11)
    h, _ = np.histogram(c, edges, weights=w)
    h2, _ = np.histogram(c, edges, weights=w * w)
    expected = w.sum() * np.diff(((edges - 1) ** 3) / 8.0)  # int (3/8)(1 - c)^2 dc = (c - 1)^3 / 8
    pulls = (h - expected) / np.sqrt(h2 + 1e-300)
    assert np.all(np.abs(pulls) < 5), pulls


def test_quark_quark_colour_flows_follow_the_leading_colour_weights(tmp_path):
    """In u u -> u u, a t-channel gluon (t = (p0 - p2)^2) carries the colour of incoming quark 0
    across to outgoing quark 3 (in double-line notation the exchanged gluon takes the colour of one
    line to the other; common practice, no source), so that flow is chosen with probability
    A_t / (A_t + A_u), A_t = (s^2 + u^2)/t^2, A_u = (s^2 + t^2)/u^2."""
    text_cuts = "[cuts]\npt_min = 200.0"
    p, pdg, w, table = _events(tmp_path, ["jet", "jet"], text_cuts, weighted=60000, seed=13)
    parts = table.column("particles").combine_chunks().flatten()
    col = parts.field("colour").to_numpy().reshape(len(w), -1)
    uu = np.all(pdg == 2, axis=1)
    assert uu.sum() > 500
    p, col, w = p[uu], col[uu], w[uu]
    s = 2.0 * (p[:, 0, 0] * p[:, 1, 0] - (p[:, 0, 1:] * p[:, 1, 1:]).sum(1))
    t = -2.0 * (p[:, 0, 0] * p[:, 2, 0] - (p[:, 0, 1:] * p[:, 2, 1:]).sum(1))
    u = -s - t
    a_t, a_u = (s * s + u * u) / (t * t), (s * s + t * t) / (u * u)
    follows_t = (col[:, 0] == col[:, 3]).astype(float)  # incoming 0's colour goes to outgoing slot 3
    expected = a_t / (a_t + a_u)
    # per event a Bernoulli draw with probability e: sum (chosen - e)(2e - 1) has mean 0 and variance
    # sum e (1 - e)(2e - 1)^2; with the two weights swapped its mean would be -sum (2e - 1)^2
    lever = 2.0 * expected - 1.0
    stat = np.sum((follows_t - expected) * lever)
    sd = np.sqrt(np.sum(expected * (1 - expected) * lever * lever))
    assert abs(stat) < 5 * sd, (stat, sd)
    assert np.sum(lever * lever) > 20 * sd  # the test separates the right weights from swapped ones


def _afb_lever(shat, q_charge, t3, par):
    """A1 / (4 A0) = <cos theta*(l-, quark)> at fixed s-hat for q qbar -> gamma*/Z -> l- l+, from
    d sigma / d cos ~ A0 (1 + c^2) + A1 c. Ellis, Stirling & Webber (1996) sec. 8.3 give, for
    e+e- -> f fbar, A0 = Q_f^2 - 2 Q_f v_e v_f chi1 + (v_e^2 + a_e^2)(v_f^2 + a_f^2) chi2 and
    A1 = -4 Q_f a_e a_f chi1 + 8 v_e a_e v_f a_f chi2 with the electron's charge -1 inside; with both
    charges written out (Q_f -> -Q_q Q_l) that is A0 = Q_q^2 Q_l^2 + 2 Q_q Q_l v_q v_l chi1 + ...,
    A1 = 4 Q_q Q_l a_q a_l chi1 + 8 v_q a_q v_l a_l chi2; v = T3 - 2 Q sin^2, a = T3,
    chi1 = kappa s (s - M^2) / D, chi2 = kappa^2 s^2 / D, D = (s - M^2)^2 + Gamma^2 M^2,
    kappa = 1 / (4 sin^2 cos^2) (from memory). Its signs agree with the measured muon-pair
    asymmetries: negative below the Z (about -0.1 at 35 GeV, PETRA) and positive above (about
    +0.5 near 200 GeV, LEP 2), both from memory."""
    sw2, mz, gz = par["sw2"], par["m_Z"], par["width_Z"]
    ql, t3l = -1.0, -0.5
    vq, aq, vl, al = t3 - 2 * q_charge * sw2, t3, t3l - 2 * ql * sw2, t3l
    kappa = 1.0 / (4 * sw2 * (1 - sw2))
    d = (shat - mz**2) ** 2 + (gz * mz) ** 2
    chi1, chi2 = kappa * shat * (shat - mz**2) / d, kappa**2 * shat**2 / d
    a0 = q_charge**2 * ql**2 + 2 * q_charge * ql * vq * vl * chi1 + (vq**2 + aq**2) * (vl**2 + al**2) * chi2
    a1 = 4 * q_charge * ql * aq * al * chi1 + 8 * vq * aq * vl * al * chi2
    return a1 / (4 * a0)


@pytest.mark.parametrize("window", [(20.0, 50.0), (66.0, 116.0), (150.0, 400.0)])
def test_drell_yan_forward_backward_asymmetry_against_the_gamma_z_formula(window, tmp_path):
    """Below, at and above the Z: the weighted mean of cos theta*(l-, quark) minus its expectation at
    each event's s-hat and flavour vanishes within errors, and the expectation itself is far from
    zero somewhere (so that a flipped orientation fails)."""
    lo, hi = window
    p, pdg, w, table = _events(tmp_path, ["e-", "e+"], f"[cuts]\nmass_min = {lo}\nmass_max = {hi}", seed=21)
    from gen.records.store import read_run

    par = read_run(tmp_path / "out" / "weighted.parquet")["parameters"]["model"]
    quark_slot = np.where(pdg[:, 0] > 0, 0, 1)
    lep = np.where(pdg[:, 2] == 11, 2, 3)
    c = _cos_per_event(p, lep, quark_slot)
    shat = (p[:, 0, 0] + p[:, 1, 0]) ** 2 - (p[:, 0, 3] + p[:, 1, 3]) ** 2
    flavour = np.abs(pdg[np.arange(len(w)), quark_slot])
    up = np.isin(flavour, (2, 4))
    expect = np.where(up, _afb_lever(shat, 2 / 3, 0.5, par), _afb_lever(shat, -1 / 3, -0.5, par))
    resid, err = _weighted_mean(c - expect, w)
    assert abs(resid) < 5 * err, (resid, err)
    mean_expect = np.sum(w * expect) / np.sum(w)
    assert abs(mean_expect) > 10 * err or window == (66.0, 116.0), mean_expect
    # the sign of the muon-pair asymmetry measured below and above the Z (see _afb_lever)
    if window != (66.0, 116.0):
        assert np.sign(mean_expect) == (-1 if hi < 91 else 1)


def test_w_charge_asymmetry_in_rapidity_against_the_luminosity_ratio(tmp_path):
    """d sigma(W+)/dy over d sigma(W-)/dy = [u(x1) dbar(x2) + dbar(x1) u(x2) + c sbar + sbar c] /
    [d(x1) ubar(x2) + ubar(x1) d(x2) + s cbar + cbar s], x1,2 = (m_W / sqrt s) e^(+-y), densities
    of the same set at mu = m_W, no Cabibbo mixing: at leading order both charges have the same
    partonic cross-section (common practice, no source). The proton's u/d excess makes W+ more
    frequent, the more so at large |y| where one x is large."""
    from gen.physics import pdf

    cuts = "[cuts]\nmass_min = 70.0\nmass_max = 90.0"
    p_plus, _, w_plus, t_plus = _events(tmp_path / "plus", ["l+", "nu"], cuts, weighted=60000, seed=31)
    p_minus, _, w_minus, t_minus = _events(tmp_path / "minus", ["l-", "nubar"], cuts, weighted=60000, seed=32)

    def rapidity(table):
        x1, x2 = table.column("x1").to_numpy(), table.column("x2").to_numpy()
        return 0.5 * np.log(x1 / x2)

    edges = np.linspace(-3.0, 3.0, 7)
    s_plus, _ = np.histogram(rapidity(t_plus), edges, weights=w_plus)
    s_minus, _ = np.histogram(rapidity(t_minus), edges, weights=w_minus)
    e_plus = np.sqrt(np.histogram(rapidity(t_plus), edges, weights=w_plus**2)[0])
    e_minus = np.sqrt(np.histogram(rapidity(t_minus), edges, weights=w_minus**2)[0])
    ratio = s_plus / s_minus
    err = ratio * np.hypot(e_plus / s_plus, e_minus / s_minus)
    m_w, rs = 80.3692, SQRT_S  # PDG m_W (arXiv:2308.09417, as in test_widths)
    dens = pdf.load()

    def lum(y, pairs):
        x1, x2 = m_w / rs * np.exp(y), m_w / rs * np.exp(-y)
        return sum(dens.xfx(a, x1, m_w) * dens.xfx(b, x2, m_w) for a, b in pairs)

    grid = np.linspace(-1, 1, 41)
    expect = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        y = lo + (hi - lo) * (grid + 1) / 2  # the bin average of each luminosity
        plus = lum(y, [(2, -1), (-1, 2), (4, -3), (-3, 4)]).mean()
        minus = lum(y, [(1, -2), (-2, 1), (3, -4), (-4, 3)]).mean()
        expect.append(plus / minus)
    expect = np.array(expect)
    pulls = (ratio - expect) / np.hypot(err, 0.02 * expect)  # 2%: the luminosities taken at m_W only
    assert np.all(np.abs(pulls) < 5), (ratio, expect, err)
    # W+ outnumbers W- everywhere and more so forward: swapped charges would give 1/ratio < 1
    assert np.all(expect > 1.05) and expect[0] > expect[2] + 0.2 and expect[-1] > expect[3] + 0.2


def test_quark_gluon_scattering_sends_the_quark_where_its_matrix_element_says(tmp_path):
    """In q g -> q g the two jets point at +-c in the parton frame; the outgoing quark is the one at
    c (measured from the incoming quark) with probability M(c) / (M(c) + M(-c)),
    M = -4/9 (s^2 + u^2)/(s u) + (s^2 + u^2)/t^2, t = -s (1 - c)/2, u = -s (1 + c)/2 (Ellis,
    Stirling & Webber (1996) Table 7.1, t between the two quarks; the same table that
    test_qcd.py takes from `equation-database`). With the orientation flipped (the quark sent the
    gluon's way) the statistic below would sit at -sum w (2P - 1)^2."""
    p, pdg, w, _ = _events(tmp_path, ["jet", "jet"], "[cuts]\npt_min = 200.0", weighted=60000, seed=14)
    quark_in = (np.abs(pdg[:, :2]) <= 5) & (pdg[:, :2] != 0)
    quark_out = (np.abs(pdg[:, 2:]) <= 5) & (pdg[:, 2:] != 0)
    qg = (quark_in.sum(1) == 1) & (quark_out.sum(1) == 1) & np.any(pdg[:, :2] == 21, axis=1)
    assert qg.sum() > 1000
    p, pdg, quark_in, quark_out = p[qg], pdg[qg], quark_in[qg], quark_out[qg]
    iq = np.argmax(quark_in, axis=1)
    oq = 2 + np.argmax(quark_out, axis=1)
    c2 = _cos_per_event(p, np.full(len(iq), 2), iq)
    s = (p[:, 0, 0] + p[:, 1, 0]) ** 2 - (p[:, 0, 3] + p[:, 1, 3]) ** 2

    def m2(c):
        t, u = -s * (1 - c) / 2, -s * (1 + c) / 2
        return -4 / 9 * (s * s + u * u) / (s * u) + (s * s + u * u) / (t * t)

    prob = m2(c2) / (m2(c2) + m2(-c2))  # the quark is the jet in slot 2
    observed = (oq == 2).astype(float)
    # weighted events: E[w (observed - prob)] = 0 whatever probability the sampler gave each
    # orientation, since the weight carries M of the orientation drawn
    lever = 2 * prob - 1
    ww = w[qg]
    stat = np.sum(ww * (observed - prob) * lever)
    sd = np.sqrt(np.sum((ww * (observed - prob) * lever) ** 2))
    assert abs(stat) < 5 * sd, (stat, sd)
    assert np.sum(ww * lever * lever) > 20 * sd
