"""A user's first day: every command on every demo card, files every stock reader opens, the run
summary, units that follow the measure, and messages that lead to the fix.

Outside references: the readers themselves (pyarrow, pandas, polars, duckdb, awkward, and the
scikit-hep `vector` package for a pair mass); the Standard-Model Higgs branching ratio from CERN
Yellow Report 4 (arXiv:1610.07922; from memory); the rest is common practice, no source.
"""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from gen.card import parse_card
from gen.cli import main, parser
from gen.errors import CardError

from conftest import card

ROOT = Path(__file__).parent.parent
CARDS = sorted((ROOT / "cards").glob("*.toml"))


def _gen(*args, cwd=None, input=None):
    return subprocess.run([sys.executable, "-m", "gen.cli", *args], capture_output=True, text=True, cwd=cwd,
                          input=input, env=dict(os.environ, PYTHONWARNINGS="ignore"))


def _open_with_every_reader(path: Path, n_events: int) -> None:
    import awkward as ak
    import duckdb
    import pandas as pd
    import polars as pl
    import pyarrow.parquet as pq

    assert pq.read_table(path).num_rows == n_events
    assert len(pd.read_parquet(path)) == n_events
    assert pl.read_parquet(path).explode("particles").unnest("particles").height >= 2 * n_events
    assert duckdb.sql(f"select count(*) from read_parquet('{path}')").fetchall()[0][0] == n_events
    events = ak.from_parquet(path)
    assert len(events) == n_events and ak.all(ak.num(events.particles) >= 2)
    assert set(ak.to_list(events.particles.role[0])) <= {"incoming", "outgoing", "intermediate"}


@pytest.mark.slow
@pytest.mark.parametrize("path", CARDS, ids=[c.stem for c in CARDS])
def test_every_command_on_every_demo_card(path, tmp_path, capsys):
    out = tmp_path / "run"
    assert main(["run", str(path), "-o", str(out), "--events", "2000", "--quiet"]) == 0
    files = sorted(out.glob("*.parquet"))
    assert {f.name for f in files} == {"unweighted.parquet", "weighted.parquet"}
    assert {"summary.txt", "summary.json", "card.toml"} <= {p.name for p in out.iterdir()}
    assert (out / "card.toml").read_text(encoding="utf-8") == path.read_text(encoding="utf-8")
    summary = json.loads((out / "summary.json").read_text())
    assert set(summary["files"]) == {f.name for f in files} and summary["result"]["value"] > 0
    capsys.readouterr()
    assert main(["info", str(out)]) == 0
    text = capsys.readouterr().out
    unit = summary["measure"]["unit"]
    assert f" {unit}" in text and "couplings" in text
    record = json.loads(_gen("info", str(out / "unweighted.parquet"), "--json").stdout)["files"][0]["process"]
    if "evaluations_per_point" in record:  # subprocesses sharing amplitudes: gen info says how many are computed
        assert f"{record['evaluations_per_point']} distinct |M|^2 evaluations per point" in text
    # validate: a verdict of pass, or one line saying what it cannot check (exit 2), never a traceback
    status = main(["validate", str(out), "--no-plots"])
    err = capsys.readouterr()
    assert status in (0, 2), err.out + err.err
    assert status == 0 or ("gen validate" in err.err and err.err.count("\n") == 1)
    if status == 0:
        assert err.out.count("PASS") == 2
    assert main(["plot", str(out), "--bins", "12"]) == 0
    pngs = sorted((out / "plots").glob("*.png"))
    n_final = len(json.loads(_gen("info", str(out / "unweighted.parquet"), "--json").stdout)["files"][0]
                  ["process"]["outgoing"])
    assert len(pngs) >= 2 * n_final and all(p.stat().st_size > 5000 for p in pngs)
    for f in files:
        _open_with_every_reader(f, summary["files"][f.name]["events"])


def test_awkward_and_vector_give_the_dimuon_mass(tmp_path):
    """The README's awkward + vector example: the mu+ mu- mass of e+e- -> mu+mu- at sqrt(s) = 10 GeV
    is sqrt(s) (momentum conservation, common practice)."""
    import awkward as ak
    import vector

    vector.register_awkward()
    from gen.jobs.run import run

    text = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "", "events = 500\nweighted_events = 0")
    run(parse_card(text, "mm.toml"), tmp_path)
    events = ak.from_parquet(tmp_path / "unweighted.parquet")
    muons = events.particles[(events.particles.role == "outgoing") & (abs(events.particles.pdg) == 13)]
    p4 = ak.zip({"E": muons.e, "px": muons.px, "py": muons.py, "pz": muons.pz}, with_name="Momentum4D")
    mass = (p4[:, 0] + p4[:, 1]).mass
    np.testing.assert_allclose(ak.to_numpy(mass), 10.0, rtol=1e-9)


def test_broken_pipe_is_quiet():
    r = subprocess.run(f"{sys.executable} -m gen.cli processes | head -n 1", shell=True, capture_output=True, text=True)
    assert r.returncode == 0 and "Traceback" not in r.stderr and r.stderr == ""
    assert r.stdout.startswith("scalar:")


def test_every_option_and_argument_has_help():
    missing = []
    top = parser()
    for action in top._actions:
        if hasattr(action, "choices") and isinstance(action.choices, dict):
            for name, sub in action.choices.items():
                missing += [f"{name} {a.dest}" for a in sub._actions if not a.help and a.dest != "help"]
    assert not missing, missing
    assert subprocess.run([sys.executable, "-m", "gen.docs", "--help"], capture_output=True).returncode == 0


def test_processes_can_be_filtered_and_list_hadron_processes(capsys):
    assert main(["processes", "--model", "electroweak"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("electroweak:") and "qed:" not in out
    assert "with hadron beams" in out and "l- l+" in out
    assert main(["processes", "--particle", "tau-"]) == 0
    out = capsys.readouterr().out
    assert "e- e+ -> tau- tau+" in out and "phi phi" not in out
    assert main(["processes", "--model", "qcdd"]) == 2
    assert "'qcd'" in capsys.readouterr().err


@pytest.mark.parametrize("text,key,hint", [
    (card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "[integration]\nseed = 5"), "integration.seed",
     "seed belongs in [sampling]"),
    (card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "", "events = 1e6"), "sampling.events",
     "1_000_000"),
    (card("qed", ("e-", "e+"), ("b", "bbar"), "sqrt_s = 10.0"), "process", "the 'electroweak' model has it"),
    (card("qcd", ("p", "p"), ("mu-", "mu+"), "sqrt_s = 13600.0", "[cuts]\nmass_min = 60.0"), "process",
     "the 'electroweak' model has it"),
    (card("electroweak", ("p", "p"), ("mu-", "mu+"), "sqrt_s = 13600.0"), "cuts.mass_min", "massless s-channel"),
    (card("electroweak", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 91.0", "[parameters]\nsw2 = 0.23"),
     "parameters.sw2", "zpole"),
    (card("electroweak", ("e-", "e+"), ("Z", "H"), "sqrt_s = 250.0", "[parameters.widths]\nZ = 3.0"),
     "parameters.widths.Z", "width_Z"),
    (card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "[parameters.masses]\nt = 170.0"),
     "parameters.masses.t", "no particle"),
    (card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "[cuts]\nparticles = []"), "cuts.particles", "empty"),
    (card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "", "events = 0\nweighted_events = 0"),
     "sampling.events", "nothing"),
])
def test_messages_lead_to_the_fix(text, key, hint):
    with pytest.raises(CardError) as err:
        parse_card(text, "bad.toml")
    assert f"bad.toml: {key}" in str(err.value) and hint in str(err.value), str(err.value)


def test_errors_come_before_the_banner(tmp_path):
    bad = tmp_path / "empty.toml"
    bad.write_text(card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "[cuts]\nenergy_min = 6.0"))
    r = _gen("run", str(bad), "-o", str(tmp_path / "out"))
    assert r.returncode == 2 and r.stdout == "" and "cuts: the cuts reject every event" in r.stderr


def test_the_default_higgs_branching_ratio_is_the_standard_model_one():
    """BR(H -> b bbar) = 0.5809 at m_H = 125.09 GeV (CERN Yellow Report 4; from memory), not the 0.867
    of tree-level f fbar widths alone."""
    text = card("electroweak", ("e-", "e+"), ("Z", "H"), "sqrt_s = 240.0", '[decays.H]\ninto = ["b", "bbar"]')
    step = parse_card(text, "zh.toml").resolved.decays[0]
    assert step.branching_ratio == pytest.approx(0.5809, abs=0.01) and "Yellow Report" in step.branching_ratio_source
    far = text.replace("[decays.H]", "[parameters]\nm_H = 130.0\n[decays.H]")
    with pytest.raises(CardError, match="decays.H.branching_ratio: gen's Higgs branching ratios"):
        parse_card(far, "zh.toml")
    gg = text.replace('into = ["b", "bbar"]', 'into = ["g", "g"]')
    assert parse_card(gg, "zh.toml").resolved.decays[0].branching_ratio == pytest.approx(0.0818, rel=0.05)


def test_the_run_prints_its_couplings_time_and_rate(tmp_path):
    r = _gen("run", str(ROOT / "cards" / "tau-threshold-scan.toml"), "-o", str(tmp_path / "t"), "--events", "1000")
    assert r.returncode == 0, r.stderr
    assert "couplings   alpha = 0.00729735" in r.stdout
    assert "events/s" in r.stdout and "summary" in r.stdout
    r = _gen("run", str(ROOT / "cards" / "compton-source.toml"), "-o", str(tmp_path / "c"), "--events", "1000")
    assert " pb " in r.stdout and " b" in r.stdout.split("σ", 1)[1].splitlines()[0]  # 2.56e11 pb = 0.256 b


@pytest.mark.slow
def test_widths_say_gev_in_every_command(tmp_path):
    muon = ROOT / "cards" / "muon-decay-at-rest.toml"
    grid = tmp_path / "grid.json"
    r = _gen("adapt", str(muon), "-o", str(grid))
    assert r.returncode == 0 and "GeV" in r.stdout and "pb" not in r.stdout
    for j in (0, 1):
        r = _gen("run", str(muon), "--grid", str(grid), "--job", str(j), "--jobs", "2", "--events", "2000",
                 "-o", str(tmp_path / "parts"), "--quiet")
        assert r.returncode == 0, r.stderr
    info = _gen("info", str(tmp_path / "parts"))
    assert "GeV" in info.stdout and " pb" not in info.stdout
    r = _gen("merge", str(tmp_path / "parts"), "-o", str(tmp_path / "merged"))
    assert r.returncode == 0 and "GeV" in r.stdout and " pb" not in r.stdout
    import pyarrow.parquet as pq

    from gen.records.store import read_run

    merged = read_run(tmp_path / "merged" / "unweighted.parquet")
    assert pq.read_schema(tmp_path / "merged" / "unweighted.parquet").field("weight").metadata[b"unit"] == b"GeV"
    width = merged["cross_section"]["total"]["value"]
    # the merged lifetime is that of the merged width (hbar from scipy.constants)
    import scipy.constants as sc

    assert merged["measure"]["lifetime_s"] == pytest.approx(sc.hbar / sc.e * 1e-9 / width, rel=1e-12, abs=0)
    part = read_run(tmp_path / "parts" / "unweighted-part00000.parquet")
    assert merged["measure"]["lifetime_s"] != part["measure"]["lifetime_s"]


def test_a_low_unweighting_efficiency_warns_with_advice(tmp_path):
    # three partons with a pair-mass cut far below the demo's: the soft and collinear peaks leave
    # an efficiency of about 0.1 %
    text = (ROOT / "cards" / "three-jets-30gev.toml").read_text().replace("pair_mass_min = 6.7082", "pair_mass_min = 0.5")
    card = tmp_path / "soft-three-jets.toml"
    card.write_text(text.replace("weighted_events = 5000", "weighted_events = 0"))
    r = _gen("run", str(card), "-o", str(tmp_path / "out"), "--events", "300")
    assert r.returncode == 0
    assert "gen: warning: the unweighting efficiency is" in r.stderr and "weighted_events" in r.stderr


def test_progress_lines_in_a_log():
    from gen.progress import Progress

    log = io.StringIO()
    p = Progress(stream=log, log_every=0.0)  # a log, not a terminal: plain lines
    p.stage("unweight", 100)
    p.update(25, "efficiency 10%")
    p.update(50)
    out = log.getvalue()
    assert "\r" not in out and out.count("\n") == 2 and "25.0%" in out and "left" in out


def test_a_folder_of_parts_only_is_not_validated_silently(tmp_path):
    scalar = ROOT / "cards" / "scalar-toy.toml"
    grid = tmp_path / "g.json"
    assert _gen("adapt", str(scalar), "-o", str(grid), "--quiet").returncode == 0
    assert _gen("run", str(scalar), "--grid", str(grid), "--job", "0", "--jobs", "1", "-o", str(tmp_path / "p"),
                "--events", "500", "--quiet").returncode == 0
    r = _gen("validate", str(tmp_path / "p"))
    assert r.returncode == 2 and "holds only batch parts; merge them first" in r.stderr


def test_the_maximum_weight_calibration_shows_its_progress():
    """The calibration of w_max is a stage of its own in the progress (it takes minutes where one
    point costs milliseconds, p p -> 3 jets), with lines in a log as the points are drawn."""
    from gen.card import parse_card
    from gen.processes import build_process
    from gen.progress import Progress
    from gen.sampling.grid import make_grid

    text = (ROOT / "cards" / "scalar-toy.toml").read_text()
    cfg = parse_card(text.replace("[sampling]", "[sampling]\ncalibration_points = 4000\nchunk = 1000"), "toy.toml")
    log = io.StringIO()
    make_grid(build_process(cfg), cfg, Progress(stream=log, log_every=0.0))
    lines = [line for line in log.getvalue().splitlines() if line.strip().startswith("calibrate")]
    assert len(lines) >= 4 and "of 4000 points for w_max" in lines[0] and "done" in lines[-1]
