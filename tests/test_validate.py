"""gen validate: passes on good samples, and fails on deliberately broken ones (proof it can fail)."""

from __future__ import annotations

import dataclasses
import json
import struct
import subprocess
import sys

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import gen
from gen.card import parse_card
from gen.physics.matrix import MODELS
from gen.physics.matrix.registry import ProcessSpec
from gen.validate import validate

from conftest import card

pytest.importorskip("boost_histogram")
pytest.importorskip("matplotlib")

SAMPLING = "events = 40000\nweighted_events = 20000\nseed = 3"
INTEG = "[integration]\nwarmup_iterations = 4\niterations = 6\npoints_per_iteration = 10000\n"
GOOD = {
    "mumu-asymmetric": card("qed", ("e-", "e+"), ("mu-", "mu+"), "beam_energies = [7.0, 4.0]",
                            INTEG + "[cuts]\ntheta_min_deg = 20\ntheta_max_deg = 150", SAMPLING),
    "compton-fixed-target": card("qed", ("gamma", "e-"), ("gamma", "e-"), "beam_energy = 0.002", INTEG, SAMPLING),
    "moller": card("qed", ("e-", "e-"), ("e-", "e-"), "sqrt_s = 1.0",
                   INTEG + "[cuts]\ntheta_min_deg = 20\ntheta_max_deg = 160", SAMPLING),
    "z-bbbar": card("electroweak", ("e-", "e+"), ("b", "bbar"), "sqrt_s = 70.0", INTEG, SAMPLING),
    "zh": card("electroweak", ("e-", "e+"), ("Z", "H"), "sqrt_s = 350.0", INTEG, SAMPLING),
    "three-jets": card("qcd", ("e-", "e+"), ("g", "d", "dbar"), "sqrt_s = 40.0", INTEG + "[cuts]\npair_mass_min = 8.0",
                       "events = 20000\nweighted_events = 20000\nseed = 3"),
}
MUMU = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", INTEG, SAMPLING)


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore::gen.jobs.run.LowEfficiencyWarning")  # the three-parton card's small grid
@pytest.mark.parametrize("name", list(GOOD))
def test_validation_passes_on_good_samples(name, tmp_path):
    res = gen.run(parse_card(GOOD[name], f"{name}.toml"), folder=tmp_path)
    for f in res.files:
        report = validate(f, plots=False)
        assert report["verdict"] == "pass", json.dumps(
            {k: report[k] for k in ("cross_section",)} | {"obs": [(o["name"], o["p_value"], o["max_pull"])
                                                                     for o in report["observables"]]})
        names = {o["name"] for o in report["observables"]}
        assert names >= ({"x_quark", "x_gluon"} if name == "three-jets" else {"cos_theta_cm", "pt"})


def test_a_distorted_matrix_element_fails(tmp_path, monkeypatch):
    """A test-only process: e+e- -> mu+mu- with its angular distribution tilted by (1 + 0.3 (u - t)/s)."""
    qed = MODELS["qed"]
    good = qed.processes[0]
    assert good.label == "e- e+ -> mu- mu+"

    def tilted(s, t, u, par):
        return good.matrix(s, t, u, par) * (1.0 + 0.3 * (u - t) / s)

    bad = dataclasses.replace(good, matrix=tilted)
    monkeypatch.setitem(MODELS, "qed", dataclasses.replace(qed, processes=(bad,) + qed.processes[1:]))
    res = gen.run(parse_card(MUMU, "tilted.toml"), folder=tmp_path)
    monkeypatch.undo()
    report = validate(res.files[0], plots=False)
    assert report["verdict"] == "fail"
    cos = next(o for o in report["observables"] if o["name"] == "cos_theta_cm")
    assert cos["p_value"] < 1e-10 and not cos["pass"]


def test_weights_scaled_by_two_fail(tmp_path):
    res = gen.run(parse_card(MUMU, "mumu.toml"), folder=tmp_path / "run")
    for f in res.files:
        table = pq.read_table(f)
        i = table.schema.get_field_index("weight")
        doubled = table.set_column(i, table.schema.field(i), pa.compute.multiply(table.column(i), 2.0))
        meta = pq.read_metadata(f).metadata
        target = tmp_path / "doubled" / f.name
        target.parent.mkdir(exist_ok=True)
        pq.write_table(doubled.replace_schema_metadata({**doubled.schema.metadata, b"gen.run": meta[b"gen.run"]}), target)
        report = validate(target, plots=False)
        assert report["verdict"] == "fail" and not report["cross_section"]["pass"]
        assert report["cross_section"]["sample"] == pytest.approx(2 * report["cross_section"]["reference"], rel=1e-2)
        # the same file unscaled passes: the failure is the factor 2
        assert validate(f, plots=False)["verdict"] == "pass"


def test_a_wrong_symmetry_factor_fails(tmp_path, monkeypatch):
    """Moller scattering generated as if the two electrons were distinguishable (factor 1 instead of 1/2)."""
    monkeypatch.setattr(ProcessSpec, "symmetry", property(lambda self: 1.0))
    res = gen.run(parse_card(GOOD["moller"], "moller.toml"), folder=tmp_path)
    monkeypatch.undo()
    report = validate(res.files[0], plots=False)
    assert report["verdict"] == "fail"
    assert report["cross_section"]["pull"] > 100


def _png_size(path):
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = struct.unpack(">II", data[16:24])
    return len(data), width, height


@pytest.mark.slow
def test_plots_are_valid_pngs_and_the_command_reports(tmp_path):
    res = gen.run(parse_card(GOOD["mumu-asymmetric"], "m.toml"), folder=tmp_path / "run")
    r = subprocess.run([sys.executable, "-m", "gen.cli", "validate", str(tmp_path / "run"), "--out",
                        str(tmp_path / "val")], capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr
    assert r.stdout.count("PASS") == 2
    pngs = sorted((tmp_path / "val").glob("*.png"))
    assert len(pngs) == 2 * 4  # two files, four observables (the lab energy varies for asymmetric beams)
    for png in pngs:
        size, w, h = _png_size(png)
        assert 10_000 < size < 1_000_000 and 500 < w < 2000 and 400 < h < 2000
    report = json.loads((tmp_path / "val" / "unweighted.validation.json").read_text())
    assert report["verdict"] == "pass" and report["observables"][0]["plot"].endswith(".png")
    q = subprocess.run([sys.executable, "-m", "gen.cli", "plot", str(res.files[0]), "--out", str(tmp_path / "look")],
                       capture_output=True, text=True)
    assert q.returncode == 0, q.stderr
    looks = sorted((tmp_path / "look").glob("*.png"))
    assert len(looks) == 2 and all(_png_size(p)[0] > 10_000 for p in looks)


def test_the_command_exits_1_on_a_failing_sample(tmp_path, monkeypatch):
    monkeypatch.setattr(ProcessSpec, "symmetry", property(lambda self: 1.0))
    gen.run(parse_card(GOOD["moller"], "moller.toml"), folder=tmp_path)
    monkeypatch.undo()
    r = subprocess.run([sys.executable, "-m", "gen.cli", "validate", str(tmp_path / "unweighted.parquet"), "--no-plots"],
                       capture_output=True, text=True)
    assert r.returncode == 1 and "FAIL" in r.stdout
