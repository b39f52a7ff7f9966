"""Hadron collisions: cross-sections against scipy integrals of textbook partonic cross-sections
times the parton luminosity of the same set, and the event records (kinematics, x1 and x2,
colour flow, subprocess choice)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.integrate as si
import sympy

from gen.physics import pdf
from gen.card import parse_card
from gen.errors import CardError
from gen.physics.matrix import qcd
from gen.processes import build_process
from gen.jobs.run import run
from gen.records.store import read_run, read_table

from conftest import card, integrate, within
from references import HBARC2_PB, ew_fermion_pair_sigma

SQRT_S = 13600.0
S = SQRT_S**2
QUARKS = (1, 2, 3, 4, 5)
CHARGE = {1: -1 / 3, 2: 2 / 3, 3: -1 / 3, 4: 2 / 3, 5: -1 / 3}
T3 = {1: -0.5, 2: 0.5, 3: -0.5, 4: 0.5, 5: -0.5}


def luminosity(tau, mu, pairs, n=96):
    """sum over (a, b) of int dy f_a(x1) f_b(x2), x1,2 = sqrt(tau) e^(+-y), |y| <= -ln(tau)/2, by
    Gauss-Legendre quadrature of order n (scipy.integrate.fixed_quad; the integrand is smooth in y)."""
    ylim = -0.5 * math.log(tau)
    s = pdf.load()

    def integrand(y):
        x1, x2 = math.sqrt(tau) * np.exp(y), math.sqrt(tau) * np.exp(-y)
        return sum(s.xfx(a, x1, mu) / x1 * s.xfx(b, x2, mu) / x2 for a, b in pairs)

    return si.fixed_quad(integrand, -ylim, ylim, n=n)[0]


def hadron_card(model, outgoing, extra="", sampling="", collider=f"sqrt_s = {SQRT_S}"):
    return card(model, ["p", "p"], outgoing, collider, extra, sampling)


# --- Drell-Yan ---------------------------------------------------------------------------------

def dy_partonic(shat, q, par):
    """sigma(q qbar -> gamma*/Z -> e- e+) in pb: the e+e- -> q qbar formula of Ellis, Stirling &
    Webber (1996) sec. 3.1 (`references.ew_fermion_pair_sigma`) with the colour factor N_c -> 1/N_c
    (averaged instead of summed; crossing leaves the couplings as they are)."""
    return HBARC2_PB * ew_fermion_pair_sigma(shat, CHARGE[q], T3[q], 1.0 / 3.0, par["alpha"], par["sw2"],
                                             par["m_Z"], par["width_Z"])


def dy_dsigma_dm(m, par):
    """dsigma/dM = (2M/s) sum_q sigma(q qbar)(M^2) L_qqbar(M^2/s), densities at mu_F = M."""
    tau = m * m / S
    return 2.0 * m / S * sum(dy_partonic(m * m, q, par) * luminosity(tau, m, [(q, -q), (-q, q)]) for q in QUARKS)


@pytest.fixture(scope="module")
def drell_yan(tmp_path_factory):
    text = hadron_card("electroweak", ["e-", "e+"], "[cuts]\nmass_min = 66.0\nmass_max = 116.0",
                       "events = 0\nweighted_events = 200000\nseed = 3")
    out = tmp_path_factory.mktemp("dy")
    res = run(parse_card(text, "dy.toml"), out)
    return res, read_run(out / "weighted.parquet"), read_table(out / "weighted.parquet")


def test_drell_yan_mass_spectrum_against_a_scipy_integral(drell_yan):
    """Events binned in M(e+e-) against dsigma/dM of the textbook partonic formula times the
    luminosity of the same set, per bin within 5 sigma, chi2 p > 1e-4."""
    res, rec, table = drell_yan
    par = rec["parameters"]["model"]
    parts = table.column("particles").combine_chunks().flatten()
    p = np.stack([parts.field(c).to_numpy() for c in ("e", "px", "py", "pz")], 1).reshape(-1, 4, 4)
    pair = p[:, 2] + p[:, 3]
    m = np.sqrt(pair[:, 0] ** 2 - (pair[:, 1:] ** 2).sum(1))
    w = table.column("weight").to_numpy()
    edges = np.array([66.0, 76.0, 84.0, 88.0, 90.0, 91.0, 92.0, 94.0, 98.0, 106.0, 116.0])
    h, _ = np.histogram(m, edges, weights=w)
    e2, _ = np.histogram(m, edges, weights=w * w)
    ref = np.array([si.quad(lambda mm: dy_dsigma_dm(mm, par), a, b, epsrel=1e-6)[0] for a, b in zip(edges[:-1], edges[1:])])
    pulls = (h - ref) / np.sqrt(e2)
    assert np.all(np.abs(pulls) < 5), pulls
    from scipy.stats import chi2
    assert chi2.sf((pulls**2).sum(), pulls.size) > 1e-4
    assert within(res.cross_section.value, res.cross_section.error, ref.sum(), k=5, rel_floor=1e-6)


def test_drell_yan_records_partons_and_scales(drell_yan):
    """x1, x2 are the incoming partons' momentum fractions; the scale is the pair mass (auto for a
    colour-singlet final state); momentum is conserved in the laboratory (common practice, no source)."""
    _, rec, table = drell_yan
    parts = table.column("particles").combine_chunks().flatten()
    p = np.stack([parts.field(c).to_numpy() for c in ("e", "px", "py", "pz")], 1).reshape(-1, 4, 4)
    x1, x2 = table.column("x1").to_numpy(), table.column("x2").to_numpy()
    np.testing.assert_allclose(p[:, 0, 0], x1 * SQRT_S / 2, rtol=1e-12)
    np.testing.assert_allclose(p[:, 1, 0], x2 * SQRT_S / 2, rtol=1e-12)
    np.testing.assert_allclose(p[:, 0, 3], p[:, 0, 0], rtol=1e-12)
    np.testing.assert_allclose(p[:, 1, 3], -p[:, 1, 0], rtol=1e-12)
    scale_mass = np.sqrt(x1 * x2) * SQRT_S
    np.testing.assert_allclose(table.column("scale").to_numpy(), scale_mass, rtol=1e-9)
    np.testing.assert_allclose(table.column("factorization_scale").to_numpy(), scale_mass, rtol=1e-9)
    np.testing.assert_allclose(p[:, :2].sum(1), p[:, 2:].sum(1), atol=1e-9 * SQRT_S)
    assert table.column("alpha_s").null_count == table.num_rows  # no strong coupling in Drell-Yan
    pdg = parts.field("pdg").to_numpy().reshape(-1, 4)
    assert np.all(pdg[:, 0] == -pdg[:, 1]) and np.all(np.isin(np.abs(pdg[:, 0]), QUARKS))
    subs = set(table.column("subprocess").to_pylist())
    assert "u ubar -> e- e+" in subs and "ubar u -> e- e+" in subs
    by = rec["cross_section"]["by_subprocess"]
    assert sum(v["value"] for v in by.values()) == pytest.approx(rec["events"]["sum_weights"], rel=1e-9)
    assert by["u ubar -> e- e+"]["value"] > by["d dbar -> e- e+"]["value"]  # two u valence quarks


# --- W, Higgs, top pairs -------------------------------------------------------------------------

def w_partonic(shat, par):
    """sigma(u dbar -> W+ -> e+ nu) in pb for |V_ud| = 1: G_F^2 m_W^4 s / (18 pi D) with G_F^2 m_W^4 =
    g^4/32, D = (s - m_W^2)^2 + m_W^2 Gamma_W^2 (the Breit-Wigner form whose narrow-width limit is
    (pi sqrt2/3) G_F m_W^2 delta(s - m_W^2) BR(W -> e nu); Ellis, Stirling & Webber (1996), from memory)."""
    g2 = 4.0 * math.pi * par["alpha"] / par["sw2"]
    mw2 = par["m_W"] ** 2
    return HBARC2_PB * g2 * g2 / 32.0 * shat / (18.0 * math.pi * ((shat - mw2) ** 2 + mw2 * par["width_W"] ** 2))


def test_w_partonic_reference_has_the_narrow_width_limit():
    """int ds sigma(s) -> (pi sqrt2 / 3) G_F m_W^2 x Gamma(W -> e nu)/Gamma_W, Gamma(W -> e nu) =
    G_F m_W^3 / (6 sqrt2 pi) (Ellis, Stirling & Webber (1996); PDG W review; from memory)."""
    gf, mw, gw = 1.1663787e-5, 80.0, 0.02
    par = {"alpha": math.sqrt(2) * gf * mw * mw * 0.22 / math.pi, "sw2": 0.22, "m_W": mw, "width_W": gw}
    area = si.quad(lambda x: w_partonic(x, par), mw**2 - 400 * mw * gw, mw**2 + 400 * mw * gw, points=[mw**2], limit=400)[0]
    nwa = HBARC2_PB * math.pi * math.sqrt(2) / 3 * gf * mw * mw * (gf * mw**3 / (6 * math.sqrt(2) * math.pi)) / gw
    assert area == pytest.approx(nwa, rel=2e-3)  # the window holds all but 2/(pi 400) of the peak


def test_w_plus_cross_section_against_a_scipy_integral():
    """sigma(p p -> W+ -> e+ nu), 60 < M < 100 GeV, diagonal CKM: vegas within 5 sigma of the
    double integral (scipy.integrate) of the partonic formula times the u dbar + c sbar luminosity."""
    proc, xs = integrate(hadron_card("electroweak", ["e+", "nu_e"], "[cuts]\nmass_min = 60.0\nmass_max = 100.0"))
    par = proc.params

    def dsig_dm(m):
        tau = m * m / S
        return 2 * m / S * w_partonic(m * m, par) * luminosity(tau, m, [(2, -1), (-1, 2), (4, -3), (-3, 4)])

    ref = si.quad(dsig_dm, 60.0, 100.0, points=[par["m_W"]], epsrel=1e-7, limit=200)[0]
    assert within(xs.value, xs.error, ref, k=5, rel_floor=1e-6), (xs.value, xs.error, ref)


def test_gluon_fusion_higgs_against_the_gluon_luminosity():
    """sigma(g g -> H) = sigma_0 tau_H int dy g(x1) g(x2) with sigma_0 m_H^2 derived here from the
    decay width, sigma-hat(g g -> H) = pi^2 Gamma(H -> g g) / (8 m_H) delta(s-hat - m_H^2) (the
    resonance relation with the gluons' 2 x 2 spins and 8 x 8 colours averaged; same paper), and
    Gamma(H -> g g) = G_F alpha_s^2 m_H^3 / (36 sqrt2 pi^3) in the heavy-top limit (Spira, Djouadi,
    Graudenz & Zerwas, Nucl. Phys. B453 (1995) 17, the LO width; from memory): a different formula
    from the library's production |M|^2. Scales at m_H."""
    proc, xs = integrate(hadron_card("electroweak", ["H"]))
    mh = proc.params["m_H"]
    a_s = float(pdf.load().alpha_s(mh)[0])
    width_gg = proc.params["g_fermi"] * a_s**2 * mh**3 / (36 * math.sqrt(2) * math.pi**3)
    sigma0 = HBARC2_PB * math.pi**2 * width_gg / (8 * mh) / mh**2
    tau = mh * mh / S
    ref = sigma0 * tau * luminosity(tau, mh, [(21, 21)])
    assert within(xs.value, xs.error, ref, k=5, rel_floor=1e-6), (xs.value, xs.error, ref)


def heavy_partonic(shat, mt, a_s):
    """sigma(q qbar -> t tbar) = (8 pi a^2 / 27 s) beta (1 + rho/2) and sigma(g g -> t tbar) =
    (pi a^2 / 3 s)[(1 + rho + rho^2/16) ln((1 + beta)/(1 - beta)) - beta (7/4 + 31 rho / 16)],
    rho = 4 m^2/s, beta = sqrt(1 - rho) (Glueck, Owens & Reya, Phys. Rev. D 17 (1978) 2324;
    Combridge, Nucl. Phys. B 151 (1979) 429; from memory). Returns (q qbar, g g) in pb."""
    rho = 4 * mt * mt / shat
    beta = math.sqrt(max(1 - rho, 0.0))
    qq = 8 * math.pi * a_s**2 / (27 * shat) * beta * (1 + rho / 2)
    gg = math.pi * a_s**2 / (3 * shat) * ((1 + rho + rho * rho / 16) * math.log((1 + beta) / (1 - beta))
                                         - beta * (7 / 4 + 31 * rho / 16))
    return HBARC2_PB * qq, HBARC2_PB * gg


@pytest.mark.parametrize("channel,fn", [("qq", qcd.heavy_qqbar), ("gg", qcd.heavy_gg)])
def test_heavy_quark_matrix_elements_integrate_to_the_closed_forms(channel, fn):
    """The |M|^2 of the library integrated over the angle (scipy.integrate.quad) against the
    published total partonic cross-sections."""
    mt, a_s = 172.5, 0.11
    for shat in (4 * mt * mt * 1.01, 4e5, 4e6):
        beta = math.sqrt(1 - 4 * mt * mt / shat)

        def dsig(c):
            t = mt * mt - shat / 2 * (1 - beta * c)
            u = mt * mt - shat / 2 * (1 + beta * c)
            me = fn(np.array([shat]), np.array([t]), np.array([u]), {"alpha_s": a_s, "m3": mt})[0]
            return HBARC2_PB * me * beta / (32 * math.pi * shat)

        ref = heavy_partonic(shat, mt, a_s)[0 if channel == "qq" else 1]
        assert si.quad(dsig, -1, 1, epsrel=1e-10)[0] == pytest.approx(ref, rel=1e-8)


def test_top_pair_cross_section_against_a_scipy_integral():
    """sigma(p p -> t tbar) at a fixed scale m_t: vegas within 5 sigma of int dtau sigma(tau s) L(tau)
    with the closed-form partonic cross-sections above and the set's alpha_s(m_t)."""
    mt = 172.5
    proc, xs = integrate(hadron_card("qcd", ["t", "tbar"], f"[parameters.masses]\nt = {mt}\n"
                                     f"[scales]\nrenormalization = {mt}\nfactorization = {mt}"))
    ref = top_pair_sigma(mt)
    assert within(xs.value, xs.error, ref, k=5, rel_floor=1e-5), (xs.value, xs.error, ref)


def top_pair_sigma(mt: float) -> float:
    """sigma(p p -> t tbar) (pb) at mu = m_t: int dtau sigma-hat(tau s) L(tau) with the closed forms
    of `heavy_partonic`, the set's alpha_s(m_t), by scipy.integrate.quad in log tau."""
    a_s = float(pdf.load().alpha_s(mt)[0])
    pairs_q = [(q, -q) for q in QUARKS] + [(-q, q) for q in QUARKS]

    def dsig_dlogtau(lt):
        tau = math.exp(lt)
        qq, gg = heavy_partonic(tau * S, mt, a_s)
        return tau * (qq * luminosity(tau, mt, pairs_q) + gg * luminosity(tau, mt, [(21, 21)]))

    return si.quad(dsig_dlogtau, math.log(4 * mt * mt / S), 0.0, epsrel=1e-6, limit=200)[0]


# --- prompt photons, jets ---------------------------------------------------------------------------

esw = pytest.importorskip("equation_database.isbn_9780511628788")


def test_prompt_photon_matrix_elements_against_equation_database():
    """ESW Table 7.2 (`equation-database`), q qbar -> gamma* g at s + t + u = 0 and N = 3, times
    e^2 e_q^2 g_s^2; the table's q qbar channel has the photon as p3, ours the gluon, the same by
    t <-> u symmetry. g q -> gamma q is its crossing (s, t, u) -> (t, u, s) with the fermion sign
    and the colour averages 1/9 -> 1/24, i.e. a factor -3/8 (crossing: common practice, no source;
    the table's own g q entry is not used: its printed form has a misplaced bracket)."""
    rng = np.random.default_rng(11)
    s = 10 ** rng.uniform(1, 6, 200)
    c = rng.uniform(-0.98, 0.98, 200)
    t, u = -0.5 * s * (1 - c), -0.5 * s * (1 + c)
    table = sympy.lambdify((esw.s, esw.t, esw.u), esw.table_7_2["quark_quarkbar_to_gammastar_gluon"].subs(esw.N, 3),
                           "numpy")
    par = {"alpha": 1 / 137.0, "alpha_s": 0.12}
    coupling = (4 * math.pi) ** 2 * par["alpha"] * par["alpha_s"] * (2 / 3) ** 2
    np.testing.assert_allclose(qcd.make_photon_annihilation("u")(s, t, u, par), coupling * table(s, t, u), rtol=1e-12)
    np.testing.assert_allclose(qcd.make_photon_compton("u")(s, t, u, par), -3 / 8 * coupling * table(t, u, s), rtol=1e-12)


@pytest.fixture(scope="module")
def dijets(tmp_path_factory):
    text = hadron_card("qcd", ["jet", "jet"], "[cuts]\npt_min = 100.0\neta_max = 2.5", "events = 20000\nweighted_events = 0")
    out = tmp_path_factory.mktemp("jj")
    run(parse_card(text, "jj.toml"), out)
    return read_run(out / "unweighted.parquet"), read_table(out / "unweighted.parquet")


def _colour_conserved(col, anti, n_in=2):
    """Every tag is used twice, and its net flow into the event equals its net flow out
    (common practice, no source)."""
    for c, a in zip(col, anti):
        for tag in set(c) | set(a):
            if tag == 0:
                continue
            if (c == tag).sum() + (a == tag).sum() != 2:
                return False
            if (c[:n_in] == tag).sum() - (a[:n_in] == tag).sum() != (c[n_in:] == tag).sum() - (a[n_in:] == tag).sum():
                return False
    return True


def test_dijet_events(dijets):
    """Cuts hold, colour is conserved with every parton connected, alpha_s is the set's at the
    event's scale, both jet slots carry the same mix of partons, and gluons dominate at this x
    (common practice, no source)."""
    rec, table = dijets
    parts = table.column("particles").combine_chunks().flatten()
    p = np.stack([parts.field(c).to_numpy() for c in ("e", "px", "py", "pz")], 1).reshape(-1, 4, 4)
    pt = np.hypot(p[:, 2:, 1], p[:, 2:, 2])
    eta = np.arcsinh(p[:, 2:, 3] / pt)
    assert pt.min() >= 100.0 * (1 - 1e-12) and np.abs(eta).max() <= 2.5
    np.testing.assert_allclose(p[:, :2].sum(1), p[:, 2:].sum(1), atol=1e-9 * SQRT_S)
    col = parts.field("colour").to_numpy().reshape(-1, 4)
    anti = parts.field("anticolour").to_numpy().reshape(-1, 4)
    assert np.all((col > 0) | (anti > 0))
    assert _colour_conserved(col[:3000], anti[:3000])
    np.testing.assert_allclose(table.column("alpha_s").to_numpy(), pdf.load().alpha_s(table.column("scale").to_numpy()),
                               rtol=1e-6)
    pdg = parts.field("pdg").to_numpy().reshape(-1, 4)
    g3, g4 = (pdg[:, 2] == 21).mean(), (pdg[:, 3] == 21).mean()
    n = pdg.shape[0]
    assert abs(g3 - g4) < 5 * math.sqrt(g3 * (1 - g3) * 2 / n)
    assert len(rec["cross_section"]["by_subprocess"]) > 50


def test_leading_colour_weights_choose_the_flows():
    """q qbar -> g g: the flow connecting the quark to the gluon it is collinear with is chosen in
    proportion u/t : t/u (the colour-ordered amplitudes at large N_c; Ellis, Stirling & Webber (1996)
    chapter 7, the colour decomposition behind Table 7.1; from memory)."""
    flows = qcd._FLOWS["qqbar->gg"]
    s, t, u = 1.0, -0.2, -0.8
    w = np.array([f.weight(s, t, u, {}) for f in flows])
    assert w[0] / w[1] == pytest.approx((u / t) / (t / u))
    # the first flow passes the quark's colour (tag of p1) to the gluon p3
    assert flows[0].tags[0][0] == flows[0].tags[2][0]


# --- card errors ----------------------------------------------------------------------------------

@pytest.mark.parametrize("outgoing,extra,key", [
    (["jet", "jet"], "", "cuts.pt_min"),
    (["jet", "jet"], "[partons]\nset = \"no-such-set\"\n[cuts]\npt_min = 20.0", "partons.set"),
    (["e-", "e+"], "[scales]\nrenormalization = \"largest\"", "scales.renormalization"),
    (["e-", "mu+"], "", "process"),
])
def test_hadron_card_errors_name_the_key(outgoing, extra, key):
    with pytest.raises(CardError) as err:
        build_process(parse_card(hadron_card("qcd" if "jet" in outgoing else "electroweak", outgoing, extra), "bad.toml"))
    assert f": {key}:" in str(err.value) or str(err.value).startswith(f"bad.toml: {key}")


def test_groups_need_hadron_beams():
    with pytest.raises(CardError, match="needs hadron beams"):
        parse_card(card("qed", ["e-", "e+"], ["l-", "l+"], "sqrt_s = 10.0"), "bad.toml")


def test_hadron_parts_merge_with_subprocess_counts(tmp_path):
    """Three batch parts of a W card merge into one sample whose per-subprocess event counts add up
    and whose sigma agrees with the single-run grid (book-keeping; common practice, no source)."""
    from gen.jobs.batch import merge
    from gen.sampling.grid import make_grid

    cfg = parse_card(hadron_card("electroweak", ["l+", "nu"], "[cuts]\nmass_min = 60.0",
                                 "events = 3000\nweighted_events = 0\nseed = 5"), "w.toml")
    grid = make_grid(build_process(cfg), cfg)
    for j in range(3):
        run(cfg, tmp_path / "parts", grid=grid, job=j, jobs=3)
    merge([tmp_path / "parts"], tmp_path / "merged")
    rec = read_run(tmp_path / "merged" / "unweighted.parquet")
    table = read_table(tmp_path / "merged" / "unweighted.parquet", columns=["subprocess"])
    by = rec["cross_section"]["by_subprocess"]
    assert sum(v["events"] for v in by.values()) == 3000 == table.num_rows
    counts = {k: v for k, v in zip(*np.unique(table.column("subprocess").to_numpy(zero_copy_only=False), return_counts=True))}
    assert {k: v["events"] for k, v in by.items()} == counts
    assert sum(v["value"] for v in by.values()) == pytest.approx(rec["cross_section"]["total"]["value"], rel=1e-12)
    assert within(rec["cross_section"]["total"]["value"], rec["cross_section"]["total"]["error"],
                  grid.cross_section.value, k=5)


# --- dijets and prompt photons against an independent sum ---------------------------------------

def _esw(name, table="table_7_1"):
    expr = getattr(esw, table)[name]
    if table == "table_7_2":
        expr = expr.subs(esw.N, 3)
    return sympy.lambdify((esw.s, esw.t, esw.u), expr, "numpy")


def _final_states(a, b):
    """For partons a (beam 1), b (beam 2) (PDG ids, 21 = g): every massless QCD final state {c, d} once,
    c at rapidity y3, with |M|^2 / g^4 from ESW Table 7.1 as a function of (s, t, u) and the factor
    1/2 for identical partons (integrating over all y3 and y4 covers both orders of a distinct pair);
    written out by hand from the table's channel names."""
    f = {k: _esw(v) for k, v in {
        "qq'": "quark_quarkprime_to_quark_quarkprime", "qq": "quark_quark_to_quark_quark",
        "qqb'": "quark_quarkbar_to_quarkprime_quarkprimebar", "qqb": "quark_quarkbar_to_quark_quarkbar",
        "qqb_gg": "quark_quarkbar_to_gluon_gluon", "gg_qqb": "gluon_gluon_to_quark_quarkbar",
        "gq": "gluon_quark_to_gluon_quark", "gg": "gluon_gluon_to_gluon_gluon"}.items()}
    if a == b == 21:
        return [(f["gg"], 0.5)] + [(f["gg_qqb"], 1.0)] * 5
    if a == 21 or b == 21:
        return [(f["gq"], 1.0)]  # g q -> g q, or q g -> q g (the beam-1 parton's kind at y3): the same (s, t, u)
    if a == b:
        return [(f["qq"], 0.5)]
    if a == -b:
        return [(f["qqb_gg"], 0.5), (f["qqb"], 1.0)] + [(f["qqb'"], 1.0)] * 4
    return [(f["qq'"], 1.0)]


def _photon_states(a, b):
    """Prompt photons, photon at y3: q qbar -> gamma g from ESW Table 7.2 at N = 3 (photon as p3);
    g q -> gamma q as -(1/N)(s^2 + u^2)/(s u), the table's g q entry at s + t + u = 0 with its bracket
    restored (Owens, Rev. Mod. Phys. 59 (1987) 465; from memory); q g -> gamma q with t <-> u. In units
    of e^2 e_q^2 g_s^2 / g_s^4 = alpha e_q^2 / alpha_s, applied by the caller."""
    if a == 21 and b == 21:
        return []
    if a == 21:
        return [(lambda s, t, u: -(s * s + u * u) / (3 * s * u), CHARGE[abs(b)] ** 2)]
    if b == 21:
        return [(lambda s, t, u: -(s * s + t * t) / (3 * s * t), CHARGE[abs(a)] ** 2)]
    if a == -b:
        return [(_esw("quark_quarkbar_to_gammastar_gluon", "table_7_2"), CHARGE[abs(a)] ** 2)]
    return []


def _dijet_reference(pt_min, eta_max, n=400_000, seed=4, states=None, alpha=None):
    """sigma = int dy3 dy4 dpT^2 (1/(16 pi s^2)) sum x1 f(x1) x2 f(x2) |M|^2 (Ellis, Stirling & Webber
    (1996), the two-jet cross-section of chapter 7; from memory), by plain Monte Carlo in (1/pT^2, y3, y4) with
    alpha_s and the densities at mu = pT (the card's auto scale); returns (sigma, error) in pb."""
    s_pdf = pdf.load()
    rng = np.random.default_rng(seed)
    u1 = rng.random(n)
    inv = 1 / pt_min**2 * (1 - u1) + u1 * 4 / S  # uniform in 1/pT^2 down to pT = sqrt(s)/2
    pt2 = 1 / inv
    jac = (1 / pt_min**2 - 4 / S) * pt2 * pt2  # dpT^2 / du
    y3, y4 = rng.uniform(-eta_max, eta_max, (2, n))
    jac = jac * (2 * eta_max) ** 2
    pt = np.sqrt(pt2)
    x1 = pt / SQRT_S * (np.exp(y3) + np.exp(y4))
    x2 = pt / SQRT_S * (np.exp(-y3) + np.exp(-y4))
    ok = (x1 < 1) & (x2 < 1)
    shat = x1 * x2 * S
    t = -pt2 * (1 + np.exp(y4 - y3))
    u = -pt2 * (1 + np.exp(y3 - y4))
    pids = [-5, -4, -3, -2, -1, 21, 1, 2, 3, 4, 5]
    xf1 = {p: s_pdf.xfx(p, np.where(ok, x1, 0.5), pt) for p in pids}
    xf2 = {p: s_pdf.xfx(p, np.where(ok, x2, 0.5), pt) for p in pids}
    a_s = s_pdf.alpha_s(pt)
    me = np.zeros(n)
    for a in pids:
        for b in pids:
            lum = xf1[a] * xf2[b]
            for fn, sym in (states or _final_states)(a, b):
                me += lum * sym * fn(shat, t, u)
    couplings = (4 * math.pi * a_s) ** 2 if alpha is None else (4 * math.pi) ** 2 * alpha * a_s
    w = np.where(ok, HBARC2_PB * jac * couplings * me / (16 * math.pi * shat * shat), 0.0)
    return w.mean(), w.std() / math.sqrt(n)


@pytest.mark.slow
def test_dijet_cross_section_against_an_independent_sum():
    """p p -> jet jet, pT > 250 GeV, |eta| < 2.8 (the demo card): vegas against the plain Monte Carlo
    above, which shares only the parton densities: its own channel list from ESW Table 7.1
    (`equation-database`), its own variables (pT, y3, y4), within 5 combined sigma."""
    _, xs = integrate(hadron_card("qcd", ["jet", "jet"], "[cuts]\npt_min = 250.0\neta_max = 2.8"))
    ref, err = _dijet_reference(250.0, 2.8)
    assert abs(xs.value - ref) <= 5 * math.hypot(xs.error, err), (xs.value, xs.error, ref, err)


@pytest.mark.slow
def test_prompt_photon_cross_section_against_an_independent_sum():
    """p p -> gamma jet, pT > 60 GeV, |eta| < 2.4, Delta R > 0.4 (the demo card; back to back, Delta R
    is always pi or more): vegas against the same plain Monte Carlo with the photon channels above."""
    proc, xs = integrate(hadron_card("qcd", ["gamma", "jet"], "[cuts]\npt_min = 60.0\neta_max = 2.4\ndelta_r_min = 0.4"))
    ref, err = _dijet_reference(60.0, 2.4, states=_photon_states, alpha=proc.params["alpha"])
    assert abs(xs.value - ref) <= 5 * math.hypot(xs.error, err), (xs.value, xs.error, ref, err)


def test_parton_beams_at_fixed_energy_choose_colour_flows(tmp_path):
    """A parton process run at fixed beam energies (u g -> u g at 100 GeV, 20-160 degrees) also
    draws its colour flow per event: colour is conserved, and both flows of the channel occur
    (common practice, no source)."""
    text = card("qcd", ["u", "g"], ["u", "g"], "sqrt_s = 100.0", "[cuts]\ntheta_min_deg = 20\ntheta_max_deg = 160",
                "events = 3000\nweighted_events = 0")
    run(parse_card(text, "ug.toml"), tmp_path)
    parts = read_table(tmp_path / "unweighted.parquet").column("particles").combine_chunks().flatten()
    col = parts.field("colour").to_numpy().reshape(-1, 4)
    anti = parts.field("anticolour").to_numpy().reshape(-1, 4)
    assert _colour_conserved(col, anti)
    assert len({tuple(c) + tuple(a) for c, a in zip(col, anti)}) == 2


def test_alpha_s_of_a_hadron_card_is_set_under_partons():
    with pytest.raises(CardError, match="partons.alpha_s"):
        build_process(parse_card(hadron_card("qcd", ["jet", "jet"], "[parameters]\nalpha_s = 0.1\n[cuts]\npt_min = 50.0"),
                                 "bad.toml"))


@pytest.mark.slow
def test_gen_validate_checks_drell_yan_samples(drell_yan, tmp_path):
    """`gen validate` on the Drell-Yan sample passes against its reference (the same textbook partonic
    formula times the luminosity, on a Gauss-Legendre grid in M and y), and fails when the file's
    record claims a Z mass 1 GeV off, the size of shift an analysis would care about."""
    import json

    import pyarrow.parquet as pq

    from gen.validate import validate

    res, rec, _ = drell_yan
    path = next(f for f in res.files if f.name == "weighted.parquet")
    report = validate(path, out=tmp_path / "v", plots=False)
    assert report["verdict"] == "pass", report["observables"]
    assert report["reference"]["name"] == "hadron.drell_yan"
    shifted = json.loads(json.dumps(rec))
    shifted["parameters"]["model"]["m_Z"] += 1.0
    table = pq.read_table(path)
    target = tmp_path / "shifted.parquet"
    pq.write_table(table.replace_schema_metadata({**table.schema.metadata, b"gen.run": json.dumps(shifted).encode()}),
                   target)
    bad = validate(target, out=tmp_path / "v", plots=False)
    mass = next(o for o in bad["observables"] if o["name"] == "pair_mass")
    assert bad["verdict"] == "fail" and mass["p_value"] < 1e-10
