"""Batch parts, merging, resume after a kill, and the Dask route."""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

import gen
from gen.jobs.batch import MergeError, PartFile, check_parts, collect_parts, combine, merge
from gen.card import parse_card
from gen.sampling.grid import Grid, GridError, make_grid
from gen.processes import build_process
from gen.jobs.run import part_name

from conftest import card

TEXT = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0",
            "[integration]\nwarmup_iterations = 3\niterations = 4\npoints_per_iteration = 5000",
            "events = 9000\nweighted_events = 3000\nseed = 21\nchunk = 2000")


@pytest.fixture(scope="module")
def grid_file(tmp_path_factory):
    cfg = parse_card(TEXT, "batch.toml")
    return make_grid(build_process(cfg), cfg).save(tmp_path_factory.mktemp("grid") / "grid.json")


def _parts(folder, grid_file, jobs=3, text=TEXT, only=None):
    cfg = parse_card(text, "batch.toml")
    grid = Grid.load(grid_file)
    for j in range(jobs) if only is None else only:
        gen.run(cfg, folder=folder, grid=grid, job=j, jobs=jobs)
    return cfg


def test_combination_against_a_hand_calculation():
    """Pooled sampling mean, then inverse-variance combination with the grid estimate (gen.batch docstring)."""
    def part(job, trials, sw, sw2):
        return PartFile(Path(f"p{job}"), {"cross_section": {"total": {"value": 10.0, "error": 0.02}},
                                          "unweighting": {"trials": trials, "sum_w": sw, "sum_w2": sw2,
                                                          "accepted": trials // 2, "overflow_events": 0,
                                                          "overflow_share": 0.0}, "measure": {"unit": "pb"}})
    parts = [part(0, 100, 1000.0, 10100.0), part(1, 300, 3030.0, 30900.0)]
    c = combine(parts)
    # by hand: n = 400, sum w = 4030, sum w^2 = 41000 -> mean 10.075, var = 41000/400 - 10.075^2
    s = 4030.0 / 400
    ds = math.sqrt((41000.0 / 400 - s * s) / 400)
    assert c["sampling"]["value"] == pytest.approx(10.075) and c["sampling"]["error"] == pytest.approx(ds)
    wg, ws = 1 / 0.02**2, 1 / ds**2
    assert c["value"] == pytest.approx((10.0 * wg + s * ws) / (wg + ws))
    assert c["error"] == pytest.approx(1 / math.sqrt(wg + ws))
    assert c["events"] == 200 and c["efficiency"] == pytest.approx(0.5)


def test_parts_merge_into_one_consistent_sample(tmp_path, grid_file):
    cfg = _parts(tmp_path / "parts", grid_file)
    files, combined = merge([tmp_path / "parts"], tmp_path / "merged")
    unw = gen.read_table(tmp_path / "merged" / "unweighted.parquet")
    assert unw.num_rows == cfg.sampling["events"]
    ids = unw.column("event_id").to_numpy()
    assert np.unique(ids).size == ids.size
    w = unw.column("weight").to_numpy()
    assert w.sum() == pytest.approx(combined["value"], rel=1e-12)
    rec = gen.read_run(tmp_path / "merged" / "unweighted.parquet")
    assert rec["cross_section"]["total"]["value"] == combined["value"]
    assert rec["job"]["merged"] == [0, 1, 2]
    # the merged weighted file: weights rescaled to the total number of trials
    wt = gen.read_table(tmp_path / "merged" / "weighted.parquet").column("weight").to_numpy()
    raw = np.concatenate([gen.read_table(tmp_path / "parts" / part_name("weighted", j)).column("weight").to_numpy()
                          * gen.read_run(tmp_path / "parts" / part_name("weighted", j))["events"]["trials"]
                          for j in range(3)])
    np.testing.assert_allclose(wt, raw / 3000, rtol=1e-14)
    # and the combined sigma agrees with the analytic one (PDG formula with the threshold factor)
    proc = build_process(cfg)
    m = proc.masses[2]
    beta = math.sqrt(1 - 4 * m * m / 100.0)
    expect = 4 * math.pi * proc.params["alpha"] ** 2 / 300.0 * 0.3893793721e9 * beta * (3 - beta**2) / 2
    assert abs(combined["value"] - expect) < 5 * combined["error"] + 1e-6 * expect


def test_same_job_same_bytes_other_job_other_events(tmp_path, grid_file):
    _parts(tmp_path / "a", grid_file, only=[1])
    _parts(tmp_path / "b", grid_file, only=[1, 2])
    name = part_name("unweighted", 1)
    a = pq.read_table(tmp_path / "a" / name)
    b = pq.read_table(tmp_path / "b" / name)
    for col in a.column_names:
        assert a.column(col).equals(b.column(col)), col
    other = pq.read_table(tmp_path / "b" / part_name("unweighted", 2))
    assert not np.array_equal(gen.read_momenta(tmp_path / "b" / name)[:, 2],
                              gen.read_momenta(tmp_path / "b" / part_name("unweighted", 2))[:, 2])
    assert set(a.column("event_id").to_numpy()).isdisjoint(other.column("event_id").to_numpy())


def test_inconsistent_parts_are_refused(tmp_path, grid_file):
    _parts(tmp_path / "p", grid_file, only=[0, 1])
    with pytest.raises(MergeError, match=r"missing job indices \[2\] of 3"):
        merge([tmp_path / "p"], tmp_path / "m")
    # another seed: another grid and card digest
    other = TEXT.replace("seed = 21", "seed = 22")
    cfg2 = parse_card(other, "batch.toml")
    g2 = make_grid(build_process(cfg2), cfg2).save(tmp_path / "g2.json")
    gen.run(cfg2, folder=tmp_path / "q", grid=Grid.load(g2), job=2, jobs=3)
    parts = collect_parts([tmp_path / "p", tmp_path / "q"])
    problems = check_parts(parts)
    assert any(p.startswith("different card (physics settings and seed)") for p in problems)
    assert any(p.startswith("different grid") for p in problems)
    with pytest.raises(MergeError, match="do not form one sample"):
        merge([tmp_path / "p", tmp_path / "q"], tmp_path / "m")
    # a job index given twice
    with pytest.raises(MergeError, match=r"job index repeated: \[0\]"):
        merge([tmp_path / "p", tmp_path / "p" / part_name("unweighted", 0)], tmp_path / "m")
    assert not (tmp_path / "m").exists() or not any((tmp_path / "m").iterdir())


def test_grid_files_are_checked(tmp_path, grid_file):
    doc = json.loads(Path(grid_file).read_text())
    bad = tmp_path / "bad.json"
    doc["nodes"][0][5] += 1e-3
    bad.write_text(json.dumps(doc))
    with pytest.raises(GridError, match="checksum mismatch"):
        Grid.load(bad)
    bad.write_text('{"format": "something else"}')
    with pytest.raises(GridError, match="not a gen grid file"):
        Grid.load(bad)
    bad.write_text("\x80\x04pickle?")
    with pytest.raises(GridError, match="not a gen grid file"):
        Grid.load(bad)
    with pytest.raises(GridError, match="no such grid file"):
        Grid.load(tmp_path / "none.json")
    other = parse_card(TEXT.replace("sqrt_s = 10.0", "sqrt_s = 12.0"), "other.toml")
    with pytest.raises(GridError, match="adapted for another card"):
        gen.run(other, folder=tmp_path / "x", grid=Grid.load(grid_file), job=0, jobs=2)


@pytest.mark.slow
def test_sigkill_during_writing_then_rerun_completes(tmp_path, grid_file):
    """A part killed at any moment leaves nothing that looks complete; a rerun redoes it."""
    big = TEXT.replace("events = 9000", "events = 3000000").replace("chunk = 2000", "chunk = 50000")
    cardfile = tmp_path / "big.toml"
    cardfile.write_text(big)
    gfile = tmp_path / "grid.json"
    assert subprocess.run([sys.executable, "-m", "gen.cli", "adapt", str(cardfile), "-o", str(gfile), "--quiet"]).returncode == 0
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "gen.cli", "run", str(cardfile), "--grid", str(gfile), "--job", "0", "--jobs", "1",
           "-o", str(out), "--quiet"]
    proc = subprocess.Popen(cmd)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        partial = list(out.glob(".unweighted-part00000.parquet.partial-*")) if out.exists() else []
        if partial and partial[0].stat().st_size > 1_000_000:
            break
        time.sleep(0.02)
    else:
        proc.kill()
        pytest.fail("the part never started writing")
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert not (out / part_name("unweighted", 0)).exists()
    assert not (out / part_name("weighted", 0)).exists()
    r = subprocess.run(cmd, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert gen.read_run(out / part_name("unweighted", 0))["events"]["count"] == 3_000_000
    assert [p.name for p in out.iterdir() if p.name.startswith(".")] == [], "the killed run's temporary file is gone"
    # and a third run finds the part complete and skips it
    r = subprocess.run(cmd[:-1], capture_output=True, text=True)
    assert "already complete" in r.stdout


def test_job_without_grid_is_a_user_error(tmp_path):
    cardfile = tmp_path / "c.toml"
    cardfile.write_text(TEXT)
    r = subprocess.run([sys.executable, "-m", "gen.cli", "run", str(cardfile), "--job", "0", "--jobs", "2"],
                       capture_output=True, text=True, cwd=tmp_path)
    assert r.returncode == 2 and "--job needs --grid" in r.stderr


@pytest.mark.slow
def test_dask_route_equals_the_batch_route(tmp_path, grid_file):
    pytest.importorskip("dask.distributed")
    from gen.jobs.distributed import run_parts_on_dask

    cfg = _parts(tmp_path / "batch", grid_file, jobs=4)
    done = run_parts_on_dask(cfg, Path(grid_file), 4, tmp_path / "dask", workers=2)
    assert [d["job"] for d in done] == [0, 1, 2, 3]
    for j in range(4):
        for kind in ("unweighted", "weighted"):
            a = pq.read_table(tmp_path / "batch" / part_name(kind, j))
            b = pq.read_table(tmp_path / "dask" / part_name(kind, j))
            for col in a.column_names:
                assert a.column(col).equals(b.column(col)), (j, kind, col)
    _, c1 = merge([tmp_path / "batch"], tmp_path / "m1")
    _, c2 = merge([tmp_path / "dask"], tmp_path / "m2")
    assert c1["value"] == c2["value"] and c1["error"] == c2["error"]
