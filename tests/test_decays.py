"""Decay chains in the narrow-width approximation: sigma x BR, the links and the kinematics of
every step, the Breit-Wigner masses, and card errors."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import chi2

import references as ref
from conftest import card, integrate, within
from gen.card import parse_card
from gen.errors import CardError
from gen.jobs.run import run
from gen.records.store import read_run, read_table

#: PDG branching ratios (from memory): BR(Z -> mu mu) = 3.3662%, and the SM value BR(H -> b bbar) =
#: 0.582 for m_H = 125 GeV (LHC Higgs cross-section working group); used as card overrides.
BR_Z_MUMU_PDG = 0.033662
BR_H_BB_SM = 0.582

ZH = """
[decays.Z]
into = ["mu-", "mu+"]
{z_br}
[decays.H]
into = ["b", "bbar"]
{h_br}
"""


def _zh_card(z_br="", h_br="", sampling=""):
    return card("electroweak", ["e-", "e+"], ["Z", "H"], "sqrt_s = 240.0", ZH.format(z_br=z_br, h_br=h_br), sampling)


def test_zh_to_muons_and_b_quarks_is_sigma_times_the_branching_ratios():
    """sigma(e+e- -> Z H -> mu mu b bbar) = sigma(Z H) x BR(Z -> mu mu) x BR(H -> b bbar) with the card's
    branching ratios; sigma(Z H) from Djouadi's formula (`references.zh_sigma`), tolerance 1e-4 for
    the Z width the formula neglects (as in the undecayed test)."""
    proc, xs = integrate(_zh_card(f"branching_ratio = {BR_Z_MUMU_PDG}", f"branching_ratio = {BR_H_BB_SM}"))
    par = proc.params
    expect = ref.HBARC2_PB * ref.zh_sigma(240.0**2, par["g_fermi"], par["m_Z"], par["m_H"], par["sw2"])
    assert xs.value == pytest.approx(expect * BR_Z_MUMU_PDG * BR_H_BB_SM, rel=1e-4)


def test_default_branching_ratio_of_the_z_is_close_to_pdg():
    """Without an override BR(Z -> mu mu) comes from the tree-level partial widths: within 3% of the
    PDG value (the missing (1 + alpha_s/pi) of the hadronic widths makes it about 2.5% high)."""
    proc, _ = integrate(_zh_card(), iterations=2, warmup=1, points=2000)
    br = proc.chain.steps[0].branching_ratio
    assert br == pytest.approx(BR_Z_MUMU_PDG, rel=0.03) and br > BR_Z_MUMU_PDG


def _particles(table):
    parts = table.column("particles").combine_chunks().flatten()
    n = len(table.column("particles")[0])
    p = np.stack([parts.field(c).to_numpy() for c in ("e", "px", "py", "pz")], 1).reshape(-1, n, 4)
    cols = {k: parts.field(k).to_numpy().reshape(-1, n) for k in ("pdg", "parent_first", "parent_last", "colour",
                                                                   "anticolour", "mass")}
    cols["role"] = np.array(parts.field("role").to_pylist()).reshape(-1, n)
    return p, cols


def _check_chain(p, c, scale):
    """Every intermediate particle's momentum is the sum of its children's; incoming = final
    outgoing; every particle is on its mass shell (common practice, no source)."""
    roles = c["role"][0]
    n = p.shape[1]
    for i in range(n):
        kids = [k for k in range(n) if c["parent_first"][0, k] == i and roles[k] != "incoming"]
        if roles[i] == "intermediate":
            assert len(kids) == 2
            np.testing.assert_allclose(p[:, kids].sum(1), p[:, i], atol=1e-9 * scale)
    final = [k for k in range(n) if roles[k] == "outgoing"]
    np.testing.assert_allclose(p[:, :2].sum(1), p[:, final].sum(1), atol=1e-9 * scale)
    m2 = p[..., 0] ** 2 - (p[..., 1:] ** 2).sum(-1)
    np.testing.assert_allclose(m2, c["mass"] ** 2, atol=1e-7 * scale**2)


@pytest.fixture(scope="module")
def zh_sample(tmp_path_factory):
    out = tmp_path_factory.mktemp("zh")
    run(parse_card(_zh_card(sampling="events = 20000\nweighted_events = 0"), "zh.toml"), out)
    return read_run(out / "unweighted.parquet"), read_table(out / "unweighted.parquet")


def test_zh_chain_links_and_kinematics(zh_sample):
    rec, table = zh_sample
    p, c = _particles(table)
    assert list(c["role"][0]) == ["incoming", "incoming", "intermediate", "intermediate"] + ["outgoing"] * 4
    assert list(c["pdg"][0]) == [11, -11, 23, 25, 13, -13, 5, -5]
    assert list(c["parent_first"][0]) == [-1, -1, 0, 0, 2, 2, 3, 3]
    assert list(c["parent_last"][0]) == [-1, -1, 1, 1, 2, 2, 3, 3]
    _check_chain(p, c, 240.0)
    # the b pair from the colour-singlet H shares one colour line
    assert np.all(c["colour"][:, 6] == c["anticolour"][:, 7]) and np.all(c["colour"][:, 6] > 0)
    assert rec["decays"]["total_branching_ratio"] == pytest.approx(
        rec["decays"]["chain"][0]["branching_ratio"] * rec["decays"]["chain"][1]["branching_ratio"])


def test_z_masses_follow_the_truncated_breit_wigner(zh_sample):
    """The Z mass of each event against the fixed-width Breit-Wigner in s truncated to m_Z +- 10 Gamma_Z
    (its cumulative distribution is an arctangent; common practice, no source), chi2 p > 1e-4."""
    rec, table = zh_sample
    _, c = _particles(table)
    m = c["mass"][:, 2]
    st = rec["decays"]["chain"][0]
    mz, gz = st["mass_GeV"], st["width_GeV"]
    lo, hi = mz - 10 * gz, mz + 10 * gz
    assert m.min() >= lo and m.max() <= hi

    def cdf(x):
        return np.arctan((x * x - mz * mz) / (mz * gz))

    edges = np.linspace(lo, hi, 21)
    expect = np.diff(cdf(edges)) / (cdf(hi) - cdf(lo)) * m.size
    h, _ = np.histogram(m, edges)
    assert chi2.sf((((h - expect) ** 2) / expect).sum(), edges.size - 2) > 1e-4


def test_decays_are_isotropic_in_the_rest_frame(zh_sample):
    """cos theta of the mu- in the Z rest frame (against the Z direction) is flat: the README states
    that spin correlations of production and decay are not kept. chi2 p > 1e-4."""
    from gen.physics.kinematics import to_rest_frame

    _, table = zh_sample
    p, _ = _particles(table)
    z, mu = p[:, 2], p[:, 4]
    rest = to_rest_frame(mu, z)
    cos = (rest[:, 1:] * z[:, 1:]).sum(1) / np.linalg.norm(rest[:, 1:], axis=1) / np.linalg.norm(z[:, 1:], axis=1)
    h, _ = np.histogram(cos, np.linspace(-1, 1, 11))
    expect = cos.size / 10
    assert chi2.sf((((h - expect) ** 2) / expect).sum(), 9) > 1e-4


TOP = """
[parameters.masses]
t = 172.5
[scales]
renormalization = 172.5
factorization = 172.5
[decays.t]
into = ["b", "W+"]
[decays.tbar]
into = ["bbar", "W-"]
[decays."W+"]
into = ["e+", "nu_e"]
[decays."W-"]
into = ["d", "ubar"]
"""


def test_top_pair_chain_through_two_levels(tmp_path):
    """p p -> t tbar -> b (W+ -> e+ nu) bbar (W- -> d ubar): sigma x 1 x 1 x 1/9 x 1/3 (LO W branching
    ratios without the QCD factor: three lepton and two times three quark channels; common
    practice), the chain's momenta, and colour passed from the tops to the b quarks."""
    text = card("qcd", ["p", "p"], ["t", "tbar"], "sqrt_s = 13600.0", TOP, "events = 5000\nweighted_events = 0")
    res = run(parse_card(text, "tt.toml"), tmp_path)
    rec = read_run(tmp_path / "unweighted.parquet")
    assert rec["decays"]["total_branching_ratio"] == pytest.approx(1 / 27, rel=1e-12)
    undecayed = card("qcd", ["p", "p"], ["t", "tbar"], "sqrt_s = 13600.0", TOP.split("[decays.t]")[0])
    _, xs0 = integrate(undecayed, seed=3)
    assert within(res.cross_section.value * 27, res.cross_section.error * 27 + xs0.error, xs0.value, k=5)
    p, c = _particles(read_table(tmp_path / "unweighted.parquet"))
    assert list(c["pdg"][0, 2:]) == [6, -6, 5, 24, -5, -24, -11, 12, 1, -2]
    _check_chain(p, c, 13600.0)
    np.testing.assert_array_equal(c["colour"][:, 4], c["colour"][:, 2])  # b carries the t colour
    np.testing.assert_array_equal(c["anticolour"][:, 6], c["anticolour"][:, 3])
    w_mass = c["mass"][:, 5]
    assert abs(np.median(w_mass) - rec["decays"]["chain"][2]["mass_GeV"]) < 0.3


@pytest.mark.parametrize("decays,key", [
    ('[decays.W+]\ninto = ["e+", "nu_e"]', "decays.W+"),
    ('[decays.Z]\ninto = ["mu-", "e+"]', "decays.Z.into"),
    ('[decays.Z]\ninto = ["mu-", "mu+"]\nwindow = -1', "decays.Z.window"),
    ('[decays.H]\ninto = ["e-", "e+"]', "decays.H.into"),  # not in the Standard-Model table
    ('[decays.H]\ninto = ["t", "tbar"]\nbranching_ratio = 0.1', "decays.H.into"),
])
def test_decay_card_errors_name_the_key(decays, key):
    text = card("electroweak", ["e-", "e+"], ["Z", "H"], "sqrt_s = 240.0", decays.replace("W+", '"W+"', 1))
    from gen.processes import build_process

    with pytest.raises(CardError) as err:
        build_process(parse_card(text, "bad.toml"))
    assert f"bad.toml: {key}" in str(err.value)


# --- a particle decaying at rest --------------------------------------------------------------------

#: PDG muon lifetime (MuLan, PRL 106 (2011) 041803), s; confirmed in the shared check values.
MUON_LIFETIME_PDG = 2.1969811e-6
MUON_CARD = """[process]
model = "electroweak"
incoming = ["mu-"]
outgoing = ["e-", "nu_ebar", "nu_mu"]
[sampling]
events = 0
weighted_events = 200000
seed = 11
"""


@pytest.fixture(scope="module")
def muon_sample(tmp_path_factory):
    out = tmp_path_factory.mktemp("mu")
    res = run(parse_card(MUON_CARD, "mu.toml"), out)
    return res, read_run(out / "weighted.parquet"), read_table(out / "weighted.parquet")


def test_muon_width_and_lifetime(muon_sample):
    """Gamma(mu -> e nu nu) from vegas against G_F^2 m^5/(192 pi^3) f(m_e^2/m^2) (PDG review, from memory)
    within 5 sigma; the implied lifetime 0.44% short of the PDG value (the known QED correction;
    tolerance 0.5%, shared check values)."""
    res, rec, _ = muon_sample
    gf = rec["parameters"]["model"]["g_fermi"]
    m, me = rec["parameters"]["masses_GeV"]["mu-"], rec["parameters"]["masses_GeV"]["e-"]
    x = (me / m) ** 2
    f = 1 - 8 * x + 8 * x**3 - x**4 - 12 * x * x * math.log(x)
    expect = gf**2 * m**5 / (192 * math.pi**3) * f
    xs = res.cross_section
    assert within(xs.value, xs.error, expect, k=5)
    assert rec["measure"]["quantity"] == "partial width" and rec["measure"]["unit"] == "GeV"
    life = rec["measure"]["lifetime_s"]
    assert life == pytest.approx(MUON_LIFETIME_PDG, rel=0.005) and life < MUON_LIFETIME_PDG


def test_michel_electron_spectrum(muon_sample):
    """The electron energy fraction x = 2E/m_mu of weighted events against the Michel spectrum
    dGamma/dx = Gamma x^2 (3 - 2x) for m_e -> 0 (Michel, Proc. Phys. Soc. A 63 (1950) 514; from
    memory), above x = 0.1 where m_e does not matter; chi2 p > 1e-4. Momentum conservation at rest."""
    res, rec, table = muon_sample
    p, c = _particles(table)
    np.testing.assert_allclose(p[:, 1:].sum(1), p[:, 0], atol=1e-12)
    m = rec["parameters"]["masses_GeV"]["mu-"]
    x = 2 * p[:, 1, 0] / m
    w = table.column("weight").to_numpy()
    edges = np.linspace(0.1, 1.0, 19)
    h, _ = np.histogram(x, edges, weights=w)
    e2, _ = np.histogram(x, edges, weights=w * w)
    prim = lambda t: t**3 - t**4 / 2  # noqa: E731  primitive of x^2 (3 - 2x); 1/2 over [0, 1]
    expect = res.cross_section.value * 2 * (prim(edges[1:]) - prim(edges[:-1]))
    pulls = (h - expect) / np.sqrt(e2)
    assert chi2.sf((pulls**2).sum(), pulls.size) > 1e-4, pulls


def test_a_resonance_made_alone_keeps_its_mass(tmp_path):
    """g g -> H -> b bbar: the Higgs of a 2 -> 1 production stays at the mass the production gave it,
    and the chain conserves momentum (common practice, no source); sigma is sigma(g g -> H) x BR."""
    text = card("electroweak", ["p", "p"], ["H"], "sqrt_s = 13600.0", '[decays.H]\ninto = ["b", "bbar"]\nbranching_ratio = 0.5',
                "events = 2000\nweighted_events = 0")
    res = run(parse_card(text, "hbb.toml"), tmp_path)
    p, c = _particles(read_table(tmp_path / "unweighted.parquet"))
    _check_chain(p, c, 13600.0)
    m_h = read_run(tmp_path / "unweighted.parquet")["parameters"]["model"]["m_H"]
    np.testing.assert_allclose(c["mass"][:, 2], m_h, rtol=1e-9)
    _, xs0 = integrate(card("electroweak", ["p", "p"], ["H"], "sqrt_s = 13600.0"))
    assert within(res.cross_section.value, res.cross_section.error + 0.5 * xs0.error, 0.5 * xs0.value, k=5)
