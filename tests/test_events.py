"""Event samples: conservation, on-shell masses, weights, angular shape, determinism, atomic output."""

from __future__ import annotations

import math

import numpy as np
import pyarrow.parquet as pq
import pytest
from scipy.stats import chi2 as chi2_dist

import gen
from gen.card import parse_card
from gen.jobs.run import UNWEIGHTED_FILE, WEIGHTED_FILE

from conftest import card

SAMPLING = "events = 20000\nweighted_events = 20000\nseed = 11\nchunk = 8000"
INTEG = "[integration]\nwarmup_iterations = 4\niterations = 6\npoints_per_iteration = 10000\n"

CASES = {
    "mumu-asymmetric": card("qed", ("e-", "e+"), ("mu-", "mu+"), "beam_energies = [7.0, 4.0]", INTEG, SAMPLING),
    "compton-fixed-target": card("qed", ("gamma", "e-"), ("e-", "gamma"), "beam_energy = 0.002", INTEG, SAMPLING),
    "bhabha-cuts": card("qed", ("e+", "e-"), ("e+", "e-"), "sqrt_s = 10.0",
                        INTEG + "[cuts]\ntheta_min_deg = 15\ntheta_max_deg = 165", SAMPLING),
    "zh": card("electroweak", ("e-", "e+"), ("H", "Z"), "sqrt_s = 250.0", INTEG, SAMPLING),
    "bb-z-pole": card("electroweak", ("e-", "e+"), ("b", "bbar"), "sqrt_s = 91.1879", INTEG, SAMPLING),
    "scalar": card("scalar", ("phi", "phi"), ("phi", "phi"), "sqrt_s = 5.0",
                   INTEG + "[parameters]\ncubic = 2.0\nmass = 0.5", SAMPLING),
}


@pytest.fixture(scope="module")
def samples(tmp_path_factory):
    out = {}
    for name, text in CASES.items():
        folder = tmp_path_factory.mktemp(name)
        res = gen.run(parse_card(text, f"{name}.toml"), folder=folder)
        out[name] = (res, folder)
    return out


@pytest.mark.parametrize("name", list(CASES))
def test_momentum_conservation_and_on_shell_masses(samples, name):
    res, folder = samples[name]
    for fname in (UNWEIGHTED_FILE, WEIGHTED_FILE):
        p = gen.read_momenta(folder / fname)
        table = gen.read_table(folder / fname)
        flat = table.column("particles").combine_chunks().flatten()
        n = p.shape[1]
        mass = flat.field("mass").to_numpy().reshape(-1, n)
        scale = p[:, :, 0].sum(axis=1)[:, None]
        diff = p[:, 0] + p[:, 1] - p[:, 2] - p[:, 3]
        assert np.all(np.abs(diff) <= 1e-9 * scale), "four-momentum conservation to 1e-9 relative"
        m2 = p[..., 0] ** 2 - (p[..., 1:] ** 2).sum(axis=-1)
        assert np.all(np.abs(m2 - mass**2) <= 1e-9 * p[..., 0] ** 2), "on shell to 1e-9 relative"


@pytest.mark.parametrize("name", list(CASES))
def test_weights_sum_to_the_cross_section(samples, name):
    res, folder = samples[name]
    xs = res.cross_section
    unw = gen.read_run(folder / UNWEIGHTED_FILE)
    w = gen.read_run(folder / WEIGHTED_FILE)
    assert unw["events"]["count"] == 20000
    assert unw["events"]["sum_weights"] == pytest.approx(xs.value, rel=1e-12)
    # the weighted file is an independent estimate: agree within 5 standard deviations of its own error
    table = gen.read_table(folder / WEIGHTED_FILE, columns=["weight"])
    weights = table.column("weight").to_numpy()
    n_trials = w["events"]["trials"]
    mean = weights.sum()
    err = math.sqrt(max((weights**2).sum() * n_trials - mean**2, 0.0) / n_trials)
    assert abs(mean - xs.value) < 5 * math.hypot(err, xs.error), (mean, err, xs.value)
    st = unw["unweighting"]
    assert abs(st["sampling_estimate"] - xs.value) < 5 * math.hypot(st["sampling_error"], xs.error)


def test_unweighted_angular_distribution_against_the_analytic_shape(samples):
    """cos(theta*) of the mu- in the CM frame against 2 - beta^2 + beta^2 cos^2 (Peskin & Schroeder eq. 5.13)."""
    res, folder = samples["mumu-asymmetric"]
    p = gen.read_momenta(folder / UNWEIGHTED_FILE)
    beta_cm = res.record["collider"]["cm_beta_z"]
    g = 1.0 / math.sqrt(1 - beta_cm**2)
    mu = p[:, 2]
    pz_cm = g * (mu[:, 3] - beta_cm * mu[:, 0])
    pabs = np.sqrt(mu[:, 1] ** 2 + mu[:, 2] ** 2 + pz_cm**2)
    c = pz_cm / pabs
    m = res.record["parameters"]["masses_GeV"]["mu-"]
    beta = math.sqrt(1 - 4 * m * m / res.record["collider"]["sqrt_s_GeV"] ** 2)
    edges = np.linspace(-1, 1, 21)
    counts, _ = np.histogram(c, edges)
    prim = lambda x: (2 - beta**2) * x + beta**2 * x**3 / 3  # noqa: E731
    probs = np.diff(prim(edges)) / (prim(1.0) - prim(-1.0))
    expect = probs * c.size
    chi2 = ((counts - expect) ** 2 / expect).sum()
    assert chi2_dist.sf(chi2, 19) > 1e-3, chi2
    # the check can fail: a flat distribution is rejected by the same test
    flat = np.full(20, c.size / 20)
    assert chi2_dist.sf(((counts - flat) ** 2 / flat).sum(), 19) < 1e-6


def test_unweighting_efficiency_is_high_for_a_smooth_process(samples):
    res, _ = samples["mumu-asymmetric"]
    assert res.unweighting.efficiency > 0.9
    assert res.unweighting.overflow_share < 1e-3


def test_colour_flow_of_a_quark_pair(samples):
    _, folder = samples["bb-z-pole"]
    flat = gen.read_table(folder / UNWEIGHTED_FILE).column("particles").combine_chunks().flatten()
    col = flat.field("colour").to_numpy().reshape(-1, 4)
    acol = flat.field("anticolour").to_numpy().reshape(-1, 4)
    # colour singlet in, a quark carrying colour tag t and an antiquark carrying anticolour t out
    assert np.all(col[:, :2] == 0) and np.all(acol[:, :2] == 0)
    assert np.all(col[:, 2] > 0) and np.all(acol[:, 3] == col[:, 2])
    assert np.all(acol[:, 2] == 0) and np.all(col[:, 3] == 0)


def test_event_ids_are_unique_and_roles_readable(samples):
    _, folder = samples["zh"]
    t = gen.read_table(folder / UNWEIGHTED_FILE)
    ids = t.column("event_id").to_numpy()
    assert np.unique(ids).size == ids.size
    roles = t.column("particles").combine_chunks().flatten().field("role").to_pylist()[:4]
    assert roles == ["incoming", "incoming", "outgoing", "outgoing"]
    pdg = t.column("particles").combine_chunks().flatten().field("pdg").to_pylist()[:4]
    assert pdg == [11, -11, 25, 23]  # card order kept: H before Z


def test_same_card_and_seed_give_identical_events(tmp_path):
    text = CASES["bhabha-cuts"]
    a = gen.run(parse_card(text, "a.toml"), folder=tmp_path / "a")
    b = gen.run(parse_card(text, "a.toml"), folder=tmp_path / "b")
    for fname in (UNWEIGHTED_FILE, WEIGHTED_FILE):
        ta = pq.read_table(a.folder / fname)
        tb = pq.read_table(b.folder / fname)
        assert ta.equals(tb)
    c = gen.run(parse_card(text, "a.toml").with_overrides(seed=12), folder=tmp_path / "c")
    tc = pq.read_table(c.folder / UNWEIGHTED_FILE)
    assert not tc.column("particles").equals(pq.read_table(a.folder / UNWEIGHTED_FILE).column("particles"))


def test_a_failing_run_leaves_no_complete_looking_file(tmp_path, monkeypatch):
    from gen.processes import fixed_beams

    calls = {"n": 0}
    original = fixed_beams.TwoToTwo.events

    def failing(self, x, rng):
        calls["n"] += 1
        if calls["n"] > 1:
            raise RuntimeError("simulated crash while writing")
        return original(self, x, rng)

    monkeypatch.setattr(fixed_beams.TwoToTwo, "events", failing)
    with pytest.raises(RuntimeError):
        gen.run(parse_card(CASES["scalar"], "s.toml"), folder=tmp_path)
    assert list(tmp_path.iterdir()) == [], "nothing, not even a temporary file, is left behind"


def test_readers_of_the_ecosystem_read_the_file_without_our_code(samples):
    pd = pytest.importorskip("pandas")
    pl = pytest.importorskip("polars")
    _, folder = samples["zh"]
    path = folder / UNWEIGHTED_FILE
    df = pd.read_parquet(path)
    assert len(df) == 20000 and set(df.columns) >= {"event_id", "weight", "particles"}
    assert df["particles"].iloc[0][2]["role"] == "outgoing"
    pf = pl.read_parquet(path)
    exploded = pf.select("event_id", "particles").explode("particles").unnest("particles")
    assert exploded.height == 4 * 20000
    assert exploded.filter(pl.col("pdg") == 25)["mass"].mean() == pytest.approx(
        gen.read_run(path)["parameters"]["masses_GeV"]["H"])
    # the run record sits in the file's key-value metadata, which stock readers expose
    assert b"gen.run" in pq.read_metadata(path).metadata
    assert "gen.run" in pl.read_parquet_metadata(path)


def test_a_failure_in_the_weighted_pass_publishes_neither_file(tmp_path, monkeypatch):
    from gen.sampling import sampler

    def failing(self, rng, n):
        raise OSError(28, "No space left on device")
        yield  # pragma: no cover

    monkeypatch.setattr(sampler.MapSampler, "weighted", failing)
    with pytest.raises(OSError):
        gen.run(parse_card(CASES["scalar"], "s.toml"), folder=tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_a_rerun_replaces_the_folder_contents_consistently(tmp_path):
    """A run folder holds one run: a rerun into it is refused unless asked to replace it, and then
    the earlier run's files (the weighted file it no longer makes, its validation folder) go."""
    from gen.errors import OutputError
    from gen.jobs.run import CARD_COPY

    extras = {CARD_COPY, "summary.txt", "summary.json"}
    gen.run(parse_card(CASES["scalar"], "s.toml"), folder=tmp_path)
    assert {p.name for p in tmp_path.iterdir()} == {UNWEIGHTED_FILE, WEIGHTED_FILE} | extras
    (tmp_path / "validation").mkdir()
    (tmp_path / "validation" / "unweighted.validation.json").write_text("{}")
    only_unweighted = CASES["scalar"].replace("weighted_events = 20000", "weighted_events = 0")
    with pytest.raises(OutputError, match="holds the files of an earlier run .*--force"):
        gen.run(parse_card(only_unweighted, "s.toml").with_overrides(seed=99), folder=tmp_path)
    assert gen.read_run(tmp_path / UNWEIGHTED_FILE)["seed"] == 11  # untouched
    gen.run(parse_card(only_unweighted, "s.toml").with_overrides(seed=99), folder=tmp_path, replace=True)
    assert {p.name for p in tmp_path.iterdir()} == {UNWEIGHTED_FILE} | extras
    assert gen.read_run(tmp_path / UNWEIGHTED_FILE)["seed"] == 99


def test_disk_full_is_reported_clearly_and_leaves_nothing(tmp_path, monkeypatch):
    def full(self, *a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(pq.ParquetWriter, "write_table", full)
    with pytest.raises(gen.OutputError, match="unweighted.parquet: writing failed: No space left on device"):
        gen.run(parse_card(CASES["scalar"], "s.toml"), folder=tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_an_unwritable_output_folder_is_reported_clearly(tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    with pytest.raises(gen.OutputError, match="cannot write the event file"):
        gen.run(parse_card(CASES["scalar"], "s.toml"), folder=blocker / "run")
    with pytest.raises(gen.OutputError, match="exists and is not a folder"):
        gen.run(parse_card(CASES["scalar"], "s.toml"), folder=blocker)


def test_read_momenta_across_row_groups_equals_the_table(tmp_path):
    """The column-wise reader against the momenta taken from the whole table with pyarrow, on a
    file of several row groups, with and without a role (common practice, no source)."""
    from gen.records.store import read_momenta

    text = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "[output]\nrow_group_events = 1000",
                "events = 3500\nweighted_events = 0\nseed = 2\nchunk = 1000")
    res = gen.run(parse_card(text, "c.toml"), folder=tmp_path / "out")
    path = res.files[0]
    assert pq.ParquetFile(path).num_row_groups >= 2
    flat = pq.read_table(path).column("particles").combine_chunks().flatten()
    expect = np.stack([flat.field(c).to_numpy() for c in ("e", "px", "py", "pz")], -1).reshape(3500, 4, 4)
    np.testing.assert_array_equal(read_momenta(path), expect)
    np.testing.assert_array_equal(read_momenta(path, role="outgoing"), expect[:, 2:])


def test_zstd_compression_from_the_card_halves_the_file_and_survives_a_merge(tmp_path):
    """output.compression = "zstd": the file's column chunks say ZSTD (pyarrow's metadata), it is
    smaller than the snappy file of the same events, and a merge of zstd parts writes zstd."""
    from gen.jobs.batch import merge
    from gen.records.store import compression_of

    base = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "", "events = 20000\nweighted_events = 0\nseed = 3")
    sizes = {}
    for comp in ("snappy", "zstd"):
        text = base.replace("[sampling]", f'[output]\ncompression = "{comp}"\n[sampling]')
        res = gen.run(parse_card(text, "c.toml"), folder=tmp_path / comp)
        assert compression_of(res.files[0]) == comp
        sizes[comp] = res.files[0].stat().st_size
    assert sizes["zstd"] < 0.8 * sizes["snappy"]
    grid_text = base.replace("[sampling]", '[output]\ncompression = "zstd"\n[sampling]')
    cfg = parse_card(grid_text, "c.toml")
    from gen.processes import build_process
    from gen.sampling.grid import make_grid

    grid = make_grid(build_process(cfg), cfg)
    for j in range(2):
        gen.run(cfg, folder=tmp_path / "parts", grid=grid, job=j, jobs=2)
    _, _ = merge([tmp_path / "parts"], tmp_path / "merged")
    assert compression_of(tmp_path / "merged" / "unweighted.parquet") == "zstd"
