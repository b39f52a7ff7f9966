"""The command line, through the installed `gen` command and in-process."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from gen.cli import main

CARDS = sorted((Path(__file__).parent.parent / "cards").glob("*.toml"))


def _gen(*args, cwd=None):
    exe = [sys.executable, "-m", "gen.cli"]
    return subprocess.run(exe + list(args), capture_output=True, text=True, cwd=cwd,
                          env=dict(os.environ, PYTHONWARNINGS="ignore"))


def test_run_then_info_through_the_command(tmp_path):
    card = Path(__file__).parent.parent / "cards" / "z-pole-muons.toml"
    r = _gen("run", str(card), "-o", str(tmp_path / "run"), "--events", "3000", "--seed", "5")
    assert r.returncode == 0, r.stderr
    assert "σ" in r.stdout and "unweighted.parquet" in r.stdout
    assert "\r" not in r.stderr  # no progress bar when stderr is not a terminal
    info = _gen("info", str(tmp_path / "run"), "--json")
    assert info.returncode == 0, info.stderr
    doc = json.loads(info.stdout)
    kinds = {f["weighting"]: f for f in doc["files"]}
    assert set(kinds) == {"unweighted", "weighted"}
    unw = kinds["unweighted"]
    assert unw["events"]["count"] == 3000 and unw["seed"] == 5
    assert unw["cross_section"]["total"]["value"] > 0
    assert unw["process"]["label"] == "e- e+ -> mu- mu+"
    assert unw["parameters"]["model"]["scheme"] == "fermi"
    text = _gen("info", str(tmp_path / "run" / "unweighted.parquet"))
    assert text.returncode == 0 and "efficiency" in text.stdout


def test_quiet_prints_nothing(tmp_path, capsys):
    card = Path(__file__).parent.parent / "cards" / "scalar-toy.toml"
    assert main(["run", str(card), "-o", str(tmp_path), "--events", "500", "--quiet"]) == 0
    out = capsys.readouterr()
    assert out.out == "" and out.err == ""


def test_processes_lists_the_library(capsys):
    assert main(["processes"]) == 0
    out = capsys.readouterr().out
    for line in ("scalar:", "qed:", "electroweak:", "phi phi -> phi phi", "e- gamma -> e- gamma", "e- e+ -> Z H"):
        assert line in out


@pytest.mark.parametrize("args,needle", [
    (["run", "nonexistent.toml"], "nonexistent.toml: no such card file"),
    (["info", "nowhere.parquet"], "nowhere.parquet: no such file or folder"),
])
def test_user_errors_exit_2_with_one_line(args, needle, tmp_path):
    r = _gen(*args, cwd=tmp_path)
    assert r.returncode == 2
    assert r.stderr.strip() == f"gen: error: {needle}"
    assert "Traceback" not in r.stderr


def test_bad_card_exit_2(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('[process]\nmodel = "qed"\nincoming = ["e-", "e+"]\noutgoing = ["mu-", "mu+"]\n'
                   "[collider]\nsqrtS = 10\n")
    r = _gen("run", str(bad), cwd=tmp_path)
    assert r.returncode == 2 and "Traceback" not in r.stderr
    assert "bad.toml: collider.sqrtS: unknown key (did you mean 'sqrt_s'?)" in r.stderr
    assert not (tmp_path / "gen-runs").exists()


def test_info_on_a_foreign_parquet_file(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    pq.write_table(pa.table({"a": [1, 2]}), tmp_path / "other.parquet")
    r = _gen("info", str(tmp_path / "other.parquet"))
    assert r.returncode == 2 and "not a gen event file" in r.stderr


def test_adapt_parts_info_and_merge_through_the_command(tmp_path):
    card = Path(__file__).parent.parent / "cards" / "scalar-toy.toml"
    grid = tmp_path / "grid.json"
    assert _gen("adapt", str(card), "-o", str(grid), "--quiet").returncode == 0
    for j in (0, 1):
        r = _gen("run", str(card), "--grid", str(grid), "--job", str(j), "--jobs", "2", "--events", "4000",
                 "-o", str(tmp_path / "parts"), "--quiet")
        assert r.returncode == 0, r.stderr
    info = json.loads(_gen("info", str(tmp_path / "parts"), "--json").stdout)
    assert info["problems"] == [] and info["combined"]["events"] == 4000 and info["combined"]["parts"] == 2
    r = _gen("merge", str(tmp_path / "parts"), "-o", str(tmp_path / "merged"))
    assert r.returncode == 0, r.stderr
    merged = json.loads(_gen("info", str(tmp_path / "merged" / "unweighted.parquet"), "--json").stdout)["files"][0]
    assert merged["events"]["count"] == 4000
    assert merged["cross_section"]["total"]["value"] == pytest.approx(info["combined"]["value"])
    # a part made with another event total does not belong: refused, exit 2, one message
    r = _gen("run", str(card), "--grid", str(grid), "--job", "0", "--jobs", "2", "--events", "5000",
             "-o", str(tmp_path / "other"), "--quiet")
    assert r.returncode == 0
    r = _gen("merge", str(tmp_path / "other"), str(tmp_path / "parts" / "unweighted-part00001.parquet"),
             "-o", str(tmp_path / "bad"))
    assert r.returncode == 2 and "different card sampling settings" in r.stderr and "Traceback" not in r.stderr
