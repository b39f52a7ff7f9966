"""Hadron collisions with the automatic amplitudes: cross-sections against scipy integrals of
published partonic cross-sections times the parton luminosity of the same set, the running of
alpha_s through the vertices, shared evaluations of equal amplitudes, and card errors."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.integrate as si

from gen.card import parse_card
from gen.errors import CardError
from gen.physics import tree
from gen.processes import build_process

from conftest import card, integrate, within
from test_hadron import SQRT_S, dy_dsigma_dm, top_pair_sigma


def _pp(outgoing, extra="", sampling=""):
    return card("standard", ["p", "p"], outgoing, f"sqrt_s = {SQRT_S}", extra, sampling)


@pytest.mark.slow
def test_drell_yan_from_the_recursion_against_a_scipy_integral():
    """p p -> gamma*/Z -> e- e+ in 66-116 GeV from the standard model file: vegas within 5 sigma of
    int dM dsigma/dM with the Ellis-Stirling-Webber (1996) sec. 3.1 partonic cross-section
    (`test_hadron.dy_dsigma_dm`) and the luminosity of the same set."""
    proc, xs = integrate(_pp(["e-", "e+"], "[cuts]\nmass_min = 66.0\nmass_max = 116.0"), points=10000)
    par = proc.params
    ref = si.quad(lambda m: dy_dsigma_dm(m, par), 66.0, 116.0, epsrel=1e-7, points=[91.1876], limit=200)[0]
    assert within(xs.value, xs.error, ref, k=5, rel_floor=1e-5), (xs.value, xs.error, ref)
    assert len(proc.amplitudes) == 2  # up-type and down-type quarks: one amplitude each


@pytest.mark.slow
def test_top_pairs_from_the_recursion_against_the_closed_forms():
    """p p -> t tbar at mu = m_t from the standard model file, its electroweak couplings switched off
    (alpha = 1e-6: no q qbar -> gamma*/Z -> t tbar, no W exchange in b bbar -> t tbar), against
    int dtau L(tau) sigma-hat with the Glueck-Owens-Reya / Combridge partonic cross-sections
    (`test_hadron.heavy_partonic`), within 5 sigma."""
    mt = 172.5
    proc, xs = integrate(_pp(["t", "tbar"], f"[parameters]\nscheme = \"thomson\"\nalpha = 1e-6\n"
                             f"[parameters.masses]\nt = {mt}\n[scales]\nrenormalization = {mt}\n"
                             f"factorization = {mt}"), warmup=3, iterations=5, points=5000)
    ref = top_pair_sigma(mt)
    assert within(xs.value, xs.error, ref, k=5, rel_floor=1e-5), (xs.value, xs.error, ref)
    assert xs.error < 0.003 * ref


def test_alpha_s_runs_through_the_vertices():
    """|M|^2 with alpha_s given per point equals the amplitude built at that alpha_s, for a process
    of mixed order (u ubar -> u ubar: gluon, photon and Z exchange interfere; a coupling enters as
    its power, common practice, no source)."""
    ref = tree.build("standard", ["u", "ubar"], ["u", "ubar"])
    p = ref.probe_momenta(3, 6)
    a = np.array([0.09, 0.1, 0.12, 0.15, 0.2, 0.3])
    direct = np.array([tree.build("standard", ["u", "ubar"], ["u", "ubar"], given={"alpha_s": float(x)})
                       .squared(p[i:i + 1])[0] for i, x in enumerate(a)])
    np.testing.assert_allclose(ref.squared(p, alpha_s=a), direct, rtol=1e-12)
    assert not np.allclose(ref.squared(p, alpha_s=a), ref.squared(p), rtol=1e-3)


def _weights_shared_and_apart(monkeypatch, shared, text, n, seed):
    """The weights of `shared` at n random points, checked to 1e-12 against the same card built
    with every amplitude evaluated apart; returns (weights, the process built apart)."""
    from gen.processes.tree_hadron import TreeHadronProcess

    x = np.random.default_rng(seed).random((n, shared.ndim))
    w = shared.weights(x)

    def apart(self, amp, prints):
        prints.append(None)
        return len(prints) - 1

    monkeypatch.setattr(TreeHadronProcess, "_same_as", apart)
    alone = build_process(parse_card(text, "apart.toml"))
    np.testing.assert_allclose(w, alone.weights(x), rtol=1e-12)
    return w, alone


def test_equal_amplitudes_share_one_evaluation(monkeypatch):
    """u ubar and c cbar -> t tbar (and d dbar, s sbar) have equal |M|^2 in the model file: one
    evaluation each, and the weights agree with every amplitude evaluated apart to 1e-12."""
    text = _pp(["t", "tbar"])
    shared = build_process(parse_card(text, "tt.toml"))
    assert len(shared.amplitudes) == 4  # u-type, d-type, b (W exchange), g g
    # each quark amplitude in both beam orders, g g once: 7 evaluations, reported in the record
    assert shared.record_sections()["process"]["evaluations_per_point"] == 7
    w, alone = _weights_shared_and_apart(monkeypatch, shared, text, 300, 2)
    assert len(alone.amplitudes) == 6
    assert np.count_nonzero(w) > 250


def test_every_flavour_of_a_jet_process_shares_its_amplitude(monkeypatch):
    """p p -> e- e+ jet: 30 subprocesses, but u g and c g (d g, s g, b g; and the q qbar and qbar g
    pairs) have equal |M|^2 (the model's couplings are flavour-blind within a family type, common
    practice, no source): 6 amplitudes, each in both beam orders, and the weights agree with every
    amplitude evaluated apart to 1e-12."""
    text = _pp(["e-", "e+", "jet"], "[cuts]\npt_min = 30.0\npair_mass_min = 60.0")
    shared = build_process(parse_card(text, "zj.toml"))
    assert len(shared.subprocesses) == 30 and len(shared.amplitudes) == 6
    assert shared.record_sections()["process"]["evaluations_per_point"] == 12
    w, alone = _weights_shared_and_apart(monkeypatch, shared, text, 200, 3)
    assert len(alone.amplitudes) == 15  # five flavours, each q qbar, q g and qbar g
    assert np.count_nonzero(w) > 50


def test_flavours_the_model_cannot_tell_apart_are_built_once(monkeypatch):
    """p p -> jet jet in the pure-QCD model: every light flavour (b included, massless in the
    five-flavour scheme) is one class, so c s -> c s is built as u d -> u d and u ubar -> g g
    serves every flavour (QCD is flavour-blind, common practice, no source); the standard model,
    whose electroweak charges tell u from d, has no such class. The weights agree to 1e-12 with
    every amplitude built and evaluated apart."""
    from gen.processes.tree_hadron import TreeHadronProcess

    assert tree.interchangeable_quarks("qcd-tree", masses=tree.HADRON_MASSLESS) == [("d", "u", "s", "c", "b")]
    assert tree.interchangeable_quarks("standard", masses=tree.HADRON_MASSLESS) == []
    text = card("qcd-tree", ["p", "p"], ["jet", "jet"], f"sqrt_s = {SQRT_S}", "[cuts]\npt_min = 50.0")
    built = []
    original = tree.build

    def counting(*args, **kw):
        built.append(tuple(args[1]) + tuple(args[2]))
        return original(*args, **kw)

    monkeypatch.setattr(tree, "build", counting)
    shared = build_process(parse_card(text, "jj.toml"))
    n_shared = len(built)
    monkeypatch.setattr(tree, "interchangeable_quarks", lambda *a, **k: [])
    built.clear()
    _weights_shared_and_apart(monkeypatch, shared, text, 400, 5)
    # one build per flavour pattern (q q -> q q, q Q -> q Q, q Q -> Q q, q qbar -> Q Qbar, g g ...):
    # 14 of them, against one per flavour combination without the classes
    assert n_shared == 14 and len(built) > 4 * n_shared, (n_shared, len(built))


@pytest.mark.parametrize("outgoing,extra,key", [
    (["t", "tbar", "g", "g"], "", "process.outgoing"),
    (["e-", "mu+"], "[cuts]\nmass_min = 50.0", "process"),
    (["e-", "e+"], "", "cuts.pt_min"),
    (["jet", "jet"], "[cuts]\nmass_min = 100.0", "cuts.pt_min"),
])
def test_hadron_card_errors_name_the_key(outgoing, extra, key):
    """Too many particles, a final state no parton pair makes (lepton number), no lower bound on
    s-hat, and jets that may go along the beams: each refused naming its key."""
    with pytest.raises(CardError) as err:
        parse_card(_pp(outgoing, extra), "bad.toml")
    assert f": {key}:" in str(err.value)


def test_three_outgoing_with_hadron_beams_integrate():
    """p p -> t tbar g at p_T(g) > 50 GeV builds and gives positive weights whose events conserve
    momentum (common practice, no source)."""
    text = _pp(["t", "tbar", "g"], "[cuts]\nparticles = [\"g\"]\npt_min = 50.0", "events = 10\nweighted_events = 0")
    proc = build_process(parse_card(text, "ttg.toml"))
    x = np.random.default_rng(1).random((400, proc.ndim))
    w = proc.weights(x)
    assert np.count_nonzero(w) > 100 and np.all(w >= 0)
    ev = proc.events(x[w > 0][:50], np.random.default_rng(0))
    p = ev.momenta
    np.testing.assert_allclose(p[:, :2].sum(1), p[:, 2:].sum(1), atol=1e-6 * SQRT_S)


@pytest.mark.parametrize("model, outgoing, cut", [
    ("standard", ["Z", "jet"], "pt_min = 20.0"),
    ("qcd", ["gamma", "jet"], "pt_min = 40.0"),
])
def test_boson_and_jet_scales_follow_their_definitions(model, outgoing, cut):
    """scales boson_mt and jets_pt_mean recorded per event equal sqrt(m^2 + p_T^2) of the colourless
    outgoing particles together and the geometric mean of the jets' p_T, computed from the event's
    laboratory momenta (the definitions: common practice, no source)."""
    sampling = "events = 10\nweighted_events = 0"
    text = card(model, ["p", "p"], outgoing, f"sqrt_s = {SQRT_S}",
                f'[cuts]\n{cut}\n[scales]\nrenormalization = "boson_mt"\nfactorization = "jets_pt_mean"', sampling)
    proc = build_process(parse_card(text, "scales.toml"))
    x = np.random.default_rng(2).random((600, proc.ndim))
    keep = proc.weights(x) > 0
    ev = proc.events(x[keep][:100], np.random.default_rng(1))
    p = ev.momenta[:, 2:]
    boson, jet = p[:, 0], p[:, 1]
    mt = np.sqrt(boson[:, 0] ** 2 - boson[:, 3] ** 2)
    np.testing.assert_allclose(ev.scale, mt, rtol=1e-9)
    np.testing.assert_allclose(ev.factorization_scale, np.hypot(jet[:, 1], jet[:, 2]), rtol=1e-9)
    assert np.ptp(ev.scale) > 1.0  # dynamic, not fixed


@pytest.mark.parametrize("outgoing, choice, needs", [
    (["jet", "jet"], "boson_mt", "colourless"),
    (["e-", "e+"], "jets_pt_mean", "coloured"),
])
def test_a_scale_the_final_state_cannot_give_is_refused(outgoing, choice, needs):
    text = _pp(outgoing, f'[cuts]\npt_min = 30.0\nmass_min = 50.0\n[scales]\nrenormalization = "{choice}"')
    with pytest.raises(CardError, match=f"scales.renormalization: .*{needs}"):
        parse_card(text, "bad.toml")


# --- the batch, merge, Dask and validate routes ------------------------------------------------

ROUTE_CARDS = {
    "radiative muons": card("standard", ["e-", "e+"], ["mu-", "mu+", "gamma"], "sqrt_s = 91.1876",
                            "[cuts]\npt_min = 5.0\npair_mass_min = 5.0"),
    "spin-correlated ZH": card("standard", ["e-", "e+"], ["Z", "H"], "sqrt_s = 240.0",
                               "[decays.Z]\ninto = [\"mu-\", \"mu+\"]\n[decays.H]\ninto = [\"b\", \"bbar\"]"),
    "Drell-Yan at hadron beams": _pp(["e-", "e+"], "[cuts]\nmass_min = 66.0\nmass_max = 116.0"),
}
ROUTE_SAMPLING = """[integration]
warmup_iterations = 3
iterations = 3
points_per_iteration = 3000
[sampling]
events = 3000
weighted_events = 600
seed = 8
calibration_points = 3000
chunk = 2000
"""


@pytest.mark.slow
@pytest.mark.parametrize("name", list(ROUTE_CARDS))
def test_automatic_cards_go_through_batch_merge_dask_and_validate(name, tmp_path, capsys):
    """Batch parts of a card of the automatic amplitudes merge into one sample whose weights sum to
    the combined sigma, equal to the one-process run within errors; the Dask route writes the same
    bytes; gen validate says in one line that it has no analytic reference (common practice, no
    source: the batch contract of the README)."""
    from pathlib import Path

    import pyarrow.parquet as pq

    import gen
    from gen.cli import main
    from gen.jobs.batch import merge
    from gen.jobs.run import part_name
    from gen.sampling.grid import make_grid

    text = ROUTE_CARDS[name].replace("[sampling]\n", "") + ROUTE_SAMPLING
    cfg = parse_card(text, "route.toml")
    one = gen.run(cfg, folder=tmp_path / "one")
    grid = make_grid(build_process(cfg), cfg)
    grid_file = grid.save(tmp_path / "grid.json")
    for j in range(2):
        gen.run(cfg, folder=tmp_path / "parts", grid=grid, job=j, jobs=2)
    _, combined = merge([tmp_path / "parts"], tmp_path / "merged")
    table = gen.read_table(tmp_path / "merged" / "unweighted.parquet")
    assert table.num_rows == 3000
    assert table.column("weight").to_numpy().sum() == pytest.approx(combined["value"], rel=1e-12)
    xs = one.cross_section
    assert within(combined["value"], math.hypot(combined["error"], xs.error), xs.value, k=5)
    pytest.importorskip("dask.distributed")
    from gen.jobs.distributed import run_parts_on_dask

    run_parts_on_dask(cfg, Path(grid_file), 2, tmp_path / "dask", workers=2)
    for j in range(2):
        a = pq.read_table(tmp_path / "parts" / part_name("unweighted", j))
        b = pq.read_table(tmp_path / "dask" / part_name("unweighted", j))
        assert a.equals(b)
    capsys.readouterr()
    assert main(["validate", str(tmp_path / "one"), "--no-plots"]) == 2
    err = capsys.readouterr().err
    assert "gen validate" in err and err.count("\n") == 1


# --- cuts per group: [[cuts.sets]] -------------------------------------------------------------

Z_JET_CUTS = """[cuts]
particles = ["jet"]
pt_min = 30.0
eta_max = 2.5
[[cuts.sets]]
particles = ["e-", "e+"]
pt_min = 20.0
eta_max = 2.5
mass_min = 66.0
mass_max = 116.0
sum_pt_min = 10.0
[[cuts.sets]]
particles = ["e-", "e+", "jet"]
delta_r_min = 0.4
"""


def test_cut_sets_cut_each_group_on_its_own():
    """A Z + jet card's cuts -- jet p_T and |eta|; lepton p_T, |eta|, pair-mass window and pair p_T;
    Delta R between all three -- against the same definitions written out here (common practice,
    no source) on random momenta."""
    from gen.processes.cuts import Cuts

    cfg = parse_card(_pp(["e-", "e+", "jet"], Z_JET_CUTS), "zj.toml")
    rng = np.random.default_rng(4)
    n = 20000
    pt_ = rng.uniform(5.0, 80.0, (n, 3))
    eta = rng.uniform(-3.5, 3.5, (n, 3))
    phi = rng.uniform(-math.pi, math.pi, (n, 3))
    p = np.stack([pt_ * np.cosh(eta), pt_ * np.cos(phi), pt_ * np.sin(phi), pt_ * np.sinh(eta)], axis=-1)
    got = Cuts(cfg).mask(p)
    ll = p[:, 0] + p[:, 1]
    m_ll = np.sqrt(np.clip(ll[:, 0] ** 2 - (ll[:, 1:] ** 2).sum(-1), 0.0, None))
    dphi = lambda a, b: np.abs((phi[:, a] - phi[:, b] + math.pi) % (2 * math.pi) - math.pi)  # noqa: E731
    dr = [np.hypot(eta[:, a] - eta[:, b], dphi(a, b)) for a, b in ((0, 1), (0, 2), (1, 2))]
    want = ((pt_[:, 2] >= 30.0) & (np.abs(eta[:, 2]) <= 2.5)
            & np.all(pt_[:, :2] >= 20.0, axis=1) & np.all(np.abs(eta[:, :2]) <= 2.5, axis=1)
            & (m_ll >= 66.0) & (m_ll <= 116.0) & (np.hypot(ll[:, 1], ll[:, 2]) >= 10.0)
            & np.all([d >= 0.4 for d in dr], axis=0))
    assert np.array_equal(got, want)
    assert 50 < want.sum() < n - 50  # the cuts bind both ways


@pytest.mark.parametrize("extra, key, text", [
    ('[[cuts.sets]]\npt_min = 20.0\n', "cuts.sets[0].particles", "missing; required"),
    ('[[cuts.sets]]\nparticles = ["mu-"]\npt_min = 20.0\n', "cuts.sets[0].particles[0]", "not an outgoing particle"),
    ('[[cuts.sets]]\nparticles = ["jet"]\npt_minimum = 20.0\n', "cuts.sets[0].pt_minimum", "unknown key"),
    ('[cuts]\nparticles = ["e-", "e+"]\nmass_min = 60.0\n[[cuts.sets]]\nparticles = ["e-"]\npt_min = 20.0\n',
     "cuts.pt_min",
     "[[cuts.sets]] table that selects them"),
])
def test_cut_set_errors_name_the_key(extra, key, text):
    """A set without particles, with a particle the process does not make, with a key [cuts] does
    not have; a jet with no p_T cut in [cuts] or any set: each refused naming its key."""
    with pytest.raises(CardError) as err:
        parse_card(_pp(["e-", "e+", "jet"], extra), "bad.toml")
    assert f": {key}:" in str(err.value) and text in str(err.value)


def test_a_jet_cut_in_a_set_keeps_the_process_infrared_safe():
    """The jet's p_T cut may sit in a set rather than in [cuts]: the card is accepted and its
    weights vanish wherever the jet is softer than the cut."""
    text = _pp(["e-", "e+", "jet"], '[cuts]\nparticles = ["e-", "e+"]\nmass_min = 66.0\nmass_max = 116.0\n'
               '[[cuts.sets]]\nparticles = ["jet"]\npt_min = 30.0\n', "events = 10\nweighted_events = 0")
    proc = build_process(parse_card(text, "zj.toml"))
    x = np.random.default_rng(3).random((3000, proc.ndim))
    d = proc._terms(x)
    w = proc.weights(x)
    jet_pt = np.hypot(d.lab[:, 2, 1], d.lab[:, 2, 2])
    assert np.all(w[jet_pt < 30.0] == 0.0) and np.count_nonzero(w) > 20


# --- p p -> Z + 1 jet against a plain Monte Carlo of the published squared amplitudes ----------

def _z_jet_plain_mc(proc, pt_min, eta_max, n=400_000, seed=11):
    """sigma (pb) of p p -> Z jet with the jet above pt_min and inside |eta| < eta_max, by a plain
    Monte Carlo written apart from the library (only the parton densities and alpha_s are the run's):
    the averaged squared amplitudes of q qbar -> V g and q g -> V q, from the textbook
    q qbar -> gamma g = (8/9) e^2 Q^2 g^2 (t^2 + u^2)/(t u) and q g -> q gamma = -(1/3) e^2 Q^2 g^2
    (s^2 + u^2)/(s u) (Ellis, Stirling & Webber (1996), Table 7.1) with a vector mass M:
    (t^2 + u^2 + 2 s M^2)/(t u) and -(s^2 + u^2 + 2 t M^2)/(s u) (t between the incoming and the
    outgoing quark; the same book, sec. 9.2; from memory), and e^2 Q^2 -> g_Z^2 (g_L^2 + g_R^2)/2
    with g_L = T3 - Q sin^2, g_R = -Q sin^2, g_Z = e / (sin cos)."""
    from gen.physics.constants import HBARC2_PB

    par = proc.params
    mz = par["m_Z"]
    e2 = 4.0 * math.pi * par["alpha"]
    sw2 = par["sw2"]
    gz2 = e2 / (sw2 * (1.0 - sw2))
    mu = mz
    gs2 = 4.0 * math.pi * float(proc.alpha_s(np.array([mu]))[0])
    rng = np.random.default_rng(seed)
    s_had = SQRT_S ** 2
    shat_min = (math.sqrt(mz * mz + pt_min * pt_min) + pt_min) ** 2
    lt_min = math.log(shat_min / s_had)
    r = rng.random((3, n))
    tau = np.exp(lt_min * (1.0 - r[0]))  # ln tau flat in [ln tau_min, 0]
    y_max = -0.5 * np.log(tau)
    y = y_max * (2.0 * r[1] - 1.0)
    cos = 2.0 * r[2] - 1.0  # of the jet, against beam 1, in the parton frame
    jac = -lt_min * tau * 2.0 * y_max * 2.0  # dx1 dx2 = dtau dy; d cos
    x1, x2 = np.sqrt(tau) * np.exp(y), np.sqrt(tau) * np.exp(-y)
    shat = tau * s_had
    k = (shat - mz * mz) / (2.0 * np.sqrt(shat))  # jet energy in the parton frame
    pt = k * np.sqrt(1.0 - cos * cos)
    eta = np.arctanh(cos) + y
    keep = (pt > pt_min) & (np.abs(eta) < eta_max)
    # beam 1's parton against the jet: t1 = (p1 - p_jet)^2, t2 = (p2 - p_jet)^2
    t1 = -np.sqrt(shat) * k * (1.0 - cos)
    t2 = -np.sqrt(shat) * k * (1.0 + cos)
    m2 = mz * mz
    qqbar = (8.0 / 9.0) * (t1 * t1 + t2 * t2 + 2.0 * shat * m2) / (t1 * t2)
    # q from beam 1, g from beam 2: t = (p1 - p_jet)^2 (quark in, quark out), u = (p2 - p_jet)^2
    qg_1 = -(1.0 / 3.0) * (shat * shat + t2 * t2 + 2.0 * t1 * m2) / (shat * t2)
    qg_2 = -(1.0 / 3.0) * (shat * shat + t1 * t1 + 2.0 * t2 * m2) / (shat * t1)
    pids = [1, 2, 3, 4, 5]
    f1 = {p: proc.pdf.xfx_many((p, -p), x1, mu) / x1 for p in pids}
    f2 = {p: proc.pdf.xfx_many((p, -p), x2, mu) / x2 for p in pids}
    g1 = proc.pdf.xfx(21, x1, mu) / x1
    g2 = proc.pdf.xfx(21, x2, mu) / x2
    total = np.zeros(n)
    for p in pids:
        t3 = -0.5 if p % 2 else 0.5
        q = -1.0 / 3.0 if p % 2 else 2.0 / 3.0
        c = gz2 * ((t3 - q * sw2) ** 2 + (q * sw2) ** 2) / 2.0
        (q1, qb1), (q2, qb2) = f1[p], f2[p]
        total += c * (qqbar * (q1 * qb2 + qb1 * q2) + qg_1 * (q1 + qb1) * g2 + qg_2 * g1 * (q2 + qb2))
    dsig = gs2 * total / (16.0 * math.pi * shat ** 2) * 2.0 * k * np.sqrt(shat) / 2.0  # dt = 2 k sqrt(s)/2 dcos
    w = np.where(keep, HBARC2_PB * jac * dsig, 0.0)
    return w.mean(), w.std() / math.sqrt(n)


@pytest.mark.slow
def test_z_plus_jet_against_a_plain_monte_carlo_of_the_published_amplitudes():
    """sigma(p p -> Z jet), jet p_T > 40 GeV and |eta| < 4, scales fixed at m_Z: the automatic
    amplitudes through vegas within 5 sigma of the plain Monte Carlo above (its own phase space
    and squared amplitudes; Ellis, Stirling & Webber, Table 7.1 and sec. 9.2)."""
    text = _pp(["Z", "jet"], '[cuts]\nparticles = ["jet"]\npt_min = 40.0\neta_max = 4.0\n'
               "[scales]\nrenormalization = 91.1876\nfactorization = 91.1876")
    proc, xs = integrate(text, points=20000)
    ref, err = _z_jet_plain_mc(proc, 40.0, 4.0)
    assert err < 0.01 * ref  # the check has teeth
    assert within(xs.value, math.hypot(xs.error, err), ref, k=5), (xs.value, xs.error, ref, err)
