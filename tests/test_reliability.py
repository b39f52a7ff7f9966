"""Reliability under bad input and faults: every bad card, file or argument ends in one line and
exit 2 with nothing left behind; tampered grids, corrupt parton densities and damaged run records
are refused; runs and merges killed at random moments leave nothing that looks complete and rerun
to bit-identical files; concurrent runs are refused; write failures are reported; the local Dask
cluster accepts only our own credentials.

These are properties of the tool, not physics: the reference is the contract stated in the
README's reliability section (common practice, no source).

The card fuzzer is bounded for CI (`GEN_FUZZ_EXAMPLES`, default 40 per strategy, a fixed
sequence); set it higher for a longer, randomized campaign, e.g. `GEN_FUZZ_EXAMPLES=2000`.
"""

from __future__ import annotations

import contextlib
import gzip
import hashlib
import io
import json
import math
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from gen.cli import main
from gen.files import FolderLock
from gen.records.store import metadata_key, read_run

from conftest import card

FAST = ("[integration]\nwarmup_iterations = 2\niterations = 3\npoints_per_iteration = 2000",
        "events = 300\nweighted_events = 200\nseed = 5\ncalibration_points = 2000\nchunk = 1000")
EE_MUMU = card("electroweak", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 91.1879",
               "[cuts]\ntheta_min_deg = 10\ntheta_max_deg = 170\n" + FAST[0], FAST[1])
QED = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", FAST[0], FAST[1])
DRELL_YAN = card("electroweak", ("p", "p"), ("e-", "e+"), "sqrt_s = 13600.0",
                 "[cuts]\nmass_min = 66.0\nmass_max = 116.0\n" + FAST[0], FAST[1])
ZH_DECAYS = card("electroweak", ("e-", "e+"), ("Z", "H"), "sqrt_s = 240.0",
                 '[decays.Z]\ninto = ["mu-", "mu+"]\n[decays.H]\ninto = ["b", "bbar"]\n' + FAST[0], FAST[1])


def _gen(*args, cwd=None, timeout=120):
    return subprocess.run([sys.executable, "-m", "gen.cli", *map(str, args)], capture_output=True, text=True,
                          cwd=cwd, timeout=timeout, env=dict(os.environ, PYTHONWARNINGS="ignore"))


def _in_process(*args) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            rc = main([str(a) for a in args])
        except SystemExit as exc:  # argparse
            rc = exc.code
    return rc, out.getvalue(), err.getvalue()


def _one_line_error(rc: int, err: str) -> None:
    errors = [ln for ln in err.splitlines() if ln.startswith("gen: ")]
    assert rc == 2, f"exit {rc}: {err[-600:]}"
    assert len(errors) == 1 and errors[0].startswith("gen: error: "), err
    assert "Traceback" not in err


def _tables_equal(a: Path, b: Path) -> None:
    ta, tb = pq.read_table(a), pq.read_table(b)
    assert ta.column_names == tb.column_names
    for col in ta.column_names:
        if col != "run_id":
            assert ta.column(col).equals(tb.column(col)), (a, col)


# ---------------------------------------------------------------------------------------------
# cards with nothing to integrate, and accepted keys that would have no effect

NOTHING_TO_INTEGRATE = {
    "sqrt_s = 0": (EE_MUMU.replace("sqrt_s = 91.1879", "sqrt_s = 0"), "collider.sqrt_s"),
    "hadron sqrt_s = 0": (DRELL_YAN.replace("sqrt_s = 13600.0", "sqrt_s = 0"), "collider.sqrt_s"),
    "sqrt_s = inf": (EE_MUMU.replace("sqrt_s = 91.1879", "sqrt_s = inf"), "collider.sqrt_s"),
    "beam energy inf": (DRELL_YAN.replace("sqrt_s = 13600.0", "beam_energies = [inf, 6800]"),
                        "collider.beam_energies"),
    "beam energy nan": (DRELL_YAN.replace("sqrt_s = 13600.0", "beam_energies = [nan, 6800]"),
                        "collider.beam_energies"),
    "Z width 0 on the pole": (EE_MUMU.replace("[cuts]", "[parameters]\nwidth_Z = 0\n[cuts]"), "width_Z"),
    "alpha = 0": (QED.replace("[collider]", "[parameters]\nalpha = 0\n[collider]"), "parameters.alpha"),
    "pt_min = 1e300": (DRELL_YAN.replace("mass_min = 66.0", "mass_min = 66.0\npt_min = 1e300"), "cuts.pt_min"),
    "negative gluon at a fixed scale": (DRELL_YAN.replace("[cuts]", "[scales]\nfactorization = 1.0\n[cuts]"),
                                        "scales.factorization"),
    "factorization scale inf": (DRELL_YAN.replace("[cuts]", "[scales]\nfactorization = inf\n[cuts]"),
                                "scales.factorization"),
    "renormalization scale 1e-300": (DRELL_YAN.replace("[cuts]", "[scales]\nrenormalization = 1e-300\n[cuts]"),
                                     "scales.renormalization"),
    "widths table for a model-set width": (EE_MUMU.replace("[cuts]", "[parameters.widths]\nZ = 3\n[cuts]"),
                                           "parameters.widths.Z"),
    "cuts.particles = []": (EE_MUMU.replace("[cuts]", "[cuts]\nparticles = []"), "cuts.particles"),
    "Z -> g g": (ZH_DECAYS.replace('into = ["mu-", "mu+"]', 'into = ["g", "g"]'), "decays.Z.into"),
    "Z -> mu- e+": (ZH_DECAYS.replace('into = ["mu-", "mu+"]', 'into = ["mu-", "e+"]'), "decays.Z.into"),
    "Z -> mu- mu- (charge)": (ZH_DECAYS.replace('into = ["mu-", "mu+"]', 'into = ["mu-", "mu-"]'), "decays.Z.into"),
    "window = inf": (ZH_DECAYS.replace('into = ["mu-", "mu+"]', 'into = ["mu-", "mu+"]\nwindow = inf'),
                     "decays.Z.window"),
    "both event counts 0": (QED.replace("events = 300\nweighted_events = 200", "events = 0\nweighted_events = 0"),
                            "sampling.events"),
    "deeply nested array": (QED.replace('outgoing = ["mu-", "mu+"]', "outgoing = " + "[" * 100_000 + "]" * 100_000),
                            "nested too deeply"),
}


@pytest.mark.parametrize("name", list(NOTHING_TO_INTEGRATE))
def test_a_card_with_nothing_to_integrate_or_no_effect_is_refused(name, tmp_path):
    text, key = NOTHING_TO_INTEGRATE[name]
    path = tmp_path / "c.toml"
    path.write_text(text)
    rc, _, err = _in_process("run", path, "-o", tmp_path / "out", "--quiet")
    _one_line_error(rc, err)
    assert key in err, err
    assert not (tmp_path / "out").exists(), "a refused card leaves nothing behind"


def test_control_characters_in_card_keys_are_escaped(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(QED.replace("[collider]", '"bad\\u001b[31mkey" = 3\n[collider]', 1))
    rc, _, err = _in_process("run", path, "-o", tmp_path / "out")
    _one_line_error(rc, err)
    assert "\x1b" not in err and "\\x1b" in err


def test_rounding_below_zero_is_zero_but_a_negative_density_is_refused():
    """Densities interpolated towards x -> 1 came out at -1e-30 beside weights of order 0.1 (top
    pairs at the sqrt_shat scale, seed 1): a rounding error, set to zero; a weight that is
    negative at the size of the others is a negative density and refused."""
    import numpy as np

    from gen.card import parse_card
    from gen.processes import build_process
    from gen.processes.guard import IntegrandError, guarded

    text = card("qcd", ("p", "p"), ("t", "tbar"), "sqrt_s = 13600.0", '[scales]\nrenormalization = "sqrt_shat"\n'
                'factorization = "sqrt_shat"', "seed = 1")
    proc = build_process(parse_card(text, "c.toml"))  # the probe met -1.3e-30 and accepted it

    class Fake:
        cfg = proc.cfg

        def __init__(self, w):
            self.w = w

        def weights(self, x):
            return self.w.copy()

    assert guarded(Fake(np.array([0.2, -1e-30, 0.1])))(None).tolist() == [0.2, 0.0, 0.1]
    with pytest.raises(IntegrandError, match="negative"):
        guarded(Fake(np.array([0.2, -1e-3, 0.1])))(None)


# ---------------------------------------------------------------------------------------------
# grids: checked against the process, every number validated, a sample that contradicts them refused

@pytest.fixture(scope="module")
def adapted(tmp_path_factory):
    d = tmp_path_factory.mktemp("grid")
    (d / "c.toml").write_text(EE_MUMU)
    rc, _, err = _in_process("adapt", d / "c.toml", "-o", d / "grid.json", "--quiet")
    assert rc == 0, err
    return d


def _tamper(src: Path, dst: Path, edit) -> Path:
    """Edit a grid and recompute its checksum, as anyone can (it is unkeyed, not a signature)."""
    doc = json.loads(src.read_text())
    edit(doc)
    payload = {k: doc[k] for k in ("format", "version", "digest", "card", "channels", "nodes", "result", "max_weight")}
    doc["checksum"] = hashlib.sha256(json.dumps(payload, sort_keys=True).encode()).hexdigest()[:32]
    dst.write_text(json.dumps(doc))
    return dst


def _add_dimension(doc):
    doc["channels"][0]["ndim"] += 1
    doc["nodes"].append(doc["nodes"][0])


TAMPERED = {
    "one dimension more": (_add_dimension, "phase-space channels"),
    "maximum weight / 100": (lambda d: d.__setitem__("max_weight", d["max_weight"] / 100), "maximum weight"),
    "maximum weight nan": (lambda d: d.__setitem__("max_weight", float("nan")), "maximum weight"),
    "maximum weight -1": (lambda d: d.__setitem__("max_weight", -1.0), "maximum weight"),
    "cross-section x 2": (lambda d: d["result"].__setitem__("value", 2 * d["result"]["value"]), "standard deviations"),
    "cross-section inf": (lambda d: d["result"].__setitem__("value", float("inf")), "not a finite"),
    "nodes decreasing": (lambda d: d["nodes"][0].reverse(), "not increasing"),
    "nodes outside [0, 1]": (lambda d: d["nodes"][0].__setitem__(-1, 2.0), "not increasing inside [0, 1]"),
}


@pytest.mark.parametrize("name", list(TAMPERED))
def test_a_tampered_grid_is_refused_before_anything_is_published(name, adapted, tmp_path):
    edit, needle = TAMPERED[name]
    grid = _tamper(adapted / "grid.json", tmp_path / "grid.json", edit)
    out = tmp_path / "out"
    rc, _, err = _in_process("run", adapted / "c.toml", "--grid", grid, "--job", "0", "--jobs", "2", "-o", out)
    _one_line_error(rc, err)
    assert needle in err, err
    assert not out.exists()


def test_the_untampered_grid_runs(adapted, tmp_path):
    """The control of the test above: the same command on the grid as written succeeds."""
    rc, _, err = _in_process("run", adapted / "c.toml", "--grid", adapted / "grid.json", "--job", "0", "--jobs", "2",
                             "-o", tmp_path / "out", "--quiet")
    assert rc == 0, err
    assert read_run(tmp_path / "out" / "unweighted-part00000.parquet")["events"]["count"] == 150


def test_a_small_overflow_warns_and_a_large_one_is_refused():
    """Weights above w_max: a 2 % share warns, a 20 % share is refused (the unweighting limits)."""
    from gen.jobs.run import OverflowWarning, SamplingError, check_unweighting
    from gen.sampling.sampler import CrossSection, UnweightingStats

    xs = CrossSection(10.0, 0.01, ((10.0, 0.01),), ())

    def stats(excess):
        return UnweightingStats(max_weight=1.0, trials=10_000, accepted=1000, sum_w=1000.0, sum_w2=1000.0,
                                overflow_events=5, overflow_excess=excess)

    with pytest.warns(OverflowWarning, match="2.00%"):
        check_unweighting(stats(20.0), CrossSection(0.1, 0.01, ((0.1, 0.01),), ()), 1.0, "pb")
    with pytest.raises(SamplingError, match="20.0%"):
        check_unweighting(stats(200.0), xs, 1.0, "pb")


# ---------------------------------------------------------------------------------------------
# parton-density files read defensively

def _pdf_variants(base: Path) -> dict[str, tuple[Path, str]]:
    import re

    from gen.physics import pdf

    src = Path(pdf.__file__).parent / "pdfsets" / "genbench-lo"
    info = (src / "genbench-lo.info").read_text()
    dat = (src / "genbench-lo_0000.dat.gz").read_bytes()
    text = gzip.decompress(dat).decode()
    qs = re.search(r"AlphaS_Vals: \[([^\]]*)\]", info)
    head, rest = text.split("\n---", 1)
    lines = rest.split("\n")
    first_values = next(i for i, ln in enumerate(lines) if ln.strip()) + 3  # after the x, Q and flavour lines
    lines[first_values] = " nan " + lines[first_values].split(None, 1)[1]
    with_nan = head + "\n---" + "\n".join(lines)
    variants = {
        "truncated member": (None, dat[: len(dat) // 2], "cannot read the member file"),
        "garbage member": (None, bytes(range(256)) * 20, "cannot read the member file"),
        "gzipped garbage": (None, gzip.compress(bytes(range(128, 256)) * 20), "cannot read the member file"),
        "nan in the grid": (None, gzip.compress(with_nan.encode()), "non-finite"),
        "non-UTF-8 info": (info.encode() + b"\xff\xfe\n", None, "not UTF-8"),
        "non-numeric member count": (info.replace("NumMembers: 1", "NumMembers: one").encode(), None, "NumMembers"),
        "alpha_s tables of unequal length": (info.replace(qs.group(0), "AlphaS_Vals: [" + ",".join(
            qs.group(1).split(",")[:-3]) + "]").encode(), None, "equal length"),
    }
    out = {}
    for i, (name, (info_b, dat_b, needle)) in enumerate(variants.items()):
        d = base / f"broken{i}"
        d.mkdir()
        (d / f"broken{i}.info").write_bytes(info_b if info_b is not None else info.encode())
        (d / f"broken{i}_0000.dat.gz").write_bytes(dat_b if dat_b is not None else dat)
        out[name] = (d, needle)
    return out


def test_corrupt_parton_density_files_give_one_clear_line(tmp_path, monkeypatch):
    from gen.physics import pdf

    monkeypatch.setenv(pdf.SEARCH_PATH_VARIABLE, str(tmp_path))
    variants = _pdf_variants(tmp_path)
    for name, (folder, needle) in variants.items():
        pdf._load_cached.cache_clear()
        path = tmp_path / f"{folder.name}.toml"
        path.write_text(DRELL_YAN.replace("[cuts]", f'[partons]\nset = "{folder.name}"\n[cuts]'))
        rc, _, err = _in_process("run", path, "-o", tmp_path / "out", "--quiet")
        _one_line_error(rc, err)
        assert needle in err and folder.name in err, (name, err)
        assert not (tmp_path / "out").exists(), name
    pdf._load_cached.cache_clear()


# ---------------------------------------------------------------------------------------------
# run records read defensively, by every command that reads them

@pytest.fixture(scope="module")
def finished_run(tmp_path_factory):
    d = tmp_path_factory.mktemp("run")
    (d / "c.toml").write_text(QED)
    rc, _, err = _in_process("run", d / "c.toml", "-o", d / "out", "--quiet")
    assert rc == 0, err
    return d / "out"


def _with_record(src: Path, dst: Path, raw: bytes) -> Path:
    table = pq.read_table(src)
    meta = dict(table.schema.metadata or {})
    meta[metadata_key().encode()] = raw
    pq.write_table(table.replace_schema_metadata(meta), dst)
    return dst


def _edited(record: dict, edit) -> bytes:
    rec = json.loads(json.dumps(record))
    edit(rec)
    return json.dumps(rec).encode()


DAMAGED = {
    "truncated JSON": lambda raw, rec: raw[: len(raw) // 2],
    "not JSON at all": lambda raw, rec: b"\xff\x00garbage",
    "a JSON list": lambda raw, rec: b"[1, 2, 3]",
    "job = null": lambda raw, rec: _edited(rec, lambda r: r.__setitem__("job", None)),
    "no cross-section": lambda raw, rec: _edited(rec, lambda r: r.pop("cross_section")),
    "cross-section a string": lambda raw, rec: _edited(rec, lambda r: r["cross_section"]["total"].__setitem__(
        "value", "big")),
    "events.count missing": lambda raw, rec: _edited(rec, lambda r: r["events"].pop("count")),
    "weighting unknown": lambda raw, rec: _edited(rec, lambda r: r.__setitem__("weighting", "half")),
    "no unweighting block": lambda raw, rec: _edited(rec, lambda r: r.pop("unweighting")),
    "a damaged subprocess entry": lambda raw, rec: _edited(rec, lambda r: r["cross_section"].__setitem__(
        "by_subprocess", {"x": 3})),
}


@pytest.mark.parametrize("command", ["info", "validate", "plot", "merge"])
def test_damaged_run_records_give_one_clear_line_in_every_reader(command, finished_run, tmp_path):
    pytest.importorskip("matplotlib")
    src = finished_run / "unweighted.parquet"
    raw = pq.read_metadata(src).metadata[metadata_key().encode()]
    rec = json.loads(raw)
    for name, damage in DAMAGED.items():
        bad = _with_record(src, tmp_path / "unweighted-part00000.parquet", damage(raw, rec))
        args = {"info": ["info", bad], "validate": ["validate", bad, "--out", tmp_path / "v"],
                "plot": ["plot", bad, "--out", tmp_path / "p"], "merge": ["merge", bad, "-o", tmp_path / "m"]}[command]
        rc, _, err = _in_process(*args)
        _one_line_error(rc, err)
        assert str(bad) in err, (name, err)
        for left in ("v", "p", "m"):
            assert not (tmp_path / left).exists(), (name, left)


def test_a_foreign_or_truncated_parquet_file_is_refused(finished_run, tmp_path):
    foreign = tmp_path / "foreign.parquet"
    pq.write_table(pa.table({"x": [1, 2]}), foreign)
    cut = tmp_path / "cut.parquet"
    data = (finished_run / "unweighted.parquet").read_bytes()
    cut.write_bytes(data[: len(data) // 3])
    for path, needle in ((foreign, "not a gen event file"), (cut, "not a readable Parquet file")):
        for args in (["info", path], ["merge", path, "-o", tmp_path / "m"]):
            rc, _, err = _in_process(*args)
            _one_line_error(rc, err)
            assert needle in err


# ---------------------------------------------------------------------------------------------
# no lost data: earlier runs kept, concurrent runs refused, both files published as one unit

def test_a_second_run_into_a_finished_run_folder_deletes_nothing(finished_run, tmp_path):
    before = {p.name: p.read_bytes() for p in finished_run.iterdir() if p.is_file()}
    path = tmp_path / "zero.toml"
    path.write_text(QED.replace("events = 300", "events = 0"))
    rc, _, err = _in_process("run", path, "-o", finished_run)
    _one_line_error(rc, err)
    assert "--force" in err
    assert {p.name: p.read_bytes() for p in finished_run.iterdir() if p.is_file()} == before


def test_a_concurrent_run_is_refused_naming_the_holder_and_a_stale_lock_is_taken_over(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(QED)
    out = tmp_path / "out"
    with FolderLock(out, "run"):
        rc, _, err = _in_process("run", path, "-o", out)
        _one_line_error(rc, err)
        assert f"process {os.getpid()}" in err and "is writing here" in err
    assert list(out.iterdir()) == [], "the refused run wrote nothing"
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    import socket

    (out / ".gen-lock-run").write_text(json.dumps({"host": socket.gethostname(), "pid": dead.pid, "started": "x"}))
    rc, _, err = _in_process("run", path, "-o", out, "--quiet")
    assert rc == 0, err
    assert not (out / ".gen-lock-run").exists()


@pytest.mark.slow
def test_two_runs_started_together_do_not_both_succeed_silently(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(QED.replace("events = 300", "events = 200000"))
    out = tmp_path / "out"
    procs = [subprocess.Popen([sys.executable, "-m", "gen.cli", "run", str(path), "-o", str(out), "--quiet"],
                              stderr=subprocess.PIPE, text=True) for _ in range(2)]
    results = [(p.wait(timeout=120), p.stderr.read()) for p in procs]
    codes = sorted(rc for rc, _ in results)
    assert codes == [0, 2], results
    loser = next(err for rc, err in results if rc == 2)
    assert "is writing here" in loser or "earlier run" in loser, loser
    summary = json.loads((out / "summary.json").read_text())
    for name in summary["files"]:
        assert read_run(out / name)["run_id"] == summary["run_id"], "both files come from one run"


def test_files_without_a_summary_are_not_taken_for_a_finished_run(finished_run, tmp_path):
    """What a kill between the publication of the files and of the summary leaves."""
    import shutil

    out = tmp_path / "cut"
    shutil.copytree(finished_run, out)
    (out / "summary.json").unlink()
    rc, _, err = _in_process("info", out)
    _one_line_error(rc, err)
    assert "no finished run here" in err
    rc, _, err = _in_process("merge", out, "-o", tmp_path / "m")
    _one_line_error(rc, err)
    # and a run from another card beside it is refused, with its files listed
    other = _with_record(finished_run / "weighted.parquet", out / "weighted.parquet",
                         _edited(read_run(finished_run / "weighted.parquet"), lambda r: r.__setitem__("run_id", "other")))
    (out / "summary.json").write_bytes((finished_run / "summary.json").read_bytes())
    rc, _, err = _in_process("info", out)
    assert other.name in err and "left out" in err, err


KILL_CARD = QED.replace("events = 300\nweighted_events = 200", "events = 400000\nweighted_events = 100000").replace(
    "chunk = 1000", "chunk = 20000")


@pytest.fixture(scope="module")
def kill_reference(tmp_path_factory):
    d = tmp_path_factory.mktemp("kill")
    (d / "c.toml").write_text(KILL_CARD)
    r = _gen("run", d / "c.toml", "-o", d / "ref", "--quiet")
    assert r.returncode == 0, r.stderr
    return d


def _kill_after(cmd: list, delay: float) -> None:
    proc = subprocess.Popen([sys.executable, "-m", "gen.cli", *map(str, cmd)], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    time.sleep(delay)
    proc.send_signal(signal.SIGKILL)
    proc.wait()


def _no_partial_files(folder: Path) -> None:
    if folder.exists():
        assert [p.name for p in folder.iterdir() if ".partial-" in p.name] == []


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_a_run_killed_at_a_random_moment_reruns_to_identical_files(seed, kill_reference, tmp_path):
    delay = random.Random(seed).uniform(0.3, 3.0)
    out = tmp_path / "out"
    _kill_after(["run", kill_reference / "c.toml", "-o", out, "--quiet"], delay)
    if out.exists() and not (out / "summary.json").exists():
        rc, _, err = _in_process("info", out)
        assert rc == 2, "a killed run's files are not taken for a finished run"
    r = _gen("run", kill_reference / "c.toml", "-o", out, "--quiet", "--force")
    assert r.returncode == 0, r.stderr
    _no_partial_files(out)
    assert not list(out.glob(".gen-lock-*"))
    for name in ("unweighted.parquet", "weighted.parquet"):
        _tables_equal(out / name, kill_reference / "ref" / name)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2])
def test_a_merge_killed_at_a_random_moment_reruns_to_identical_files(seed, kill_reference, tmp_path):
    parts = kill_reference / "parts"
    if not parts.exists():
        assert _gen("adapt", kill_reference / "c.toml", "-o", kill_reference / "grid.json", "--quiet").returncode == 0
        for j in range(2):
            r = _gen("run", kill_reference / "c.toml", "--grid", kill_reference / "grid.json", "--job", j, "--jobs", 2,
                     "-o", parts, "--quiet")
            assert r.returncode == 0, r.stderr
        assert _gen("merge", parts, "-o", kill_reference / "merged", "--quiet").returncode == 0
    out = tmp_path / "m"
    _kill_after(["merge", parts, "-o", out, "--quiet"], random.Random(seed).uniform(0.5, 2.0))
    r = _gen("merge", parts, "-o", out, "--quiet", "--force")
    assert r.returncode == 0, r.stderr
    _no_partial_files(out)
    for name in ("unweighted.parquet", "weighted.parquet"):
        _tables_equal(out / name, kill_reference / "merged" / name)


# ---------------------------------------------------------------------------------------------
# write failures, paths and temporaries

def test_write_failures_in_plot_adapt_and_merge_are_one_line_and_leave_nothing(finished_run, tmp_path):
    pytest.importorskip("matplotlib")
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    cases = [["plot", finished_run, "--out", blocker / "plots"],
             ["plot", finished_run, "--out", blocker],
             ["adapt", finished_run / "card.toml", "-o", blocker / "grid.json"],
             ["merge", finished_run, "-o", blocker / "m"],
             ["validate", finished_run, "--out", blocker / "v"],
             ["plot", finished_run, "--bins", "0"],
             ["validate", finished_run, "--bins", "0"]]
    for args in cases:
        rc, _, err = _in_process(*args)
        _one_line_error(rc, err)
    assert blocker.read_text() == "not a folder"
    assert not (finished_run / "plots").exists()


def test_disk_full_while_plotting_leaves_no_empty_png(finished_run, tmp_path, monkeypatch):
    pytest.importorskip("matplotlib")
    import errno

    import matplotlib.figure

    def full(self, *a, **k):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", full)
    rc, _, err = _in_process("plot", finished_run, "--out", tmp_path / "p")
    _one_line_error(rc, err)
    assert "No space left" in err
    assert not list((tmp_path / "p").glob("*.png")) if (tmp_path / "p").exists() else True


def test_a_symbolic_link_in_the_output_folder_is_replaced_not_followed(tmp_path):
    victim = tmp_path / "victim.txt"
    victim.write_text("someone else's file")
    out = tmp_path / "out"
    out.mkdir()
    (out / "unweighted.parquet").symlink_to(victim)
    path = tmp_path / "c.toml"
    path.write_text(QED)
    rc, _, err = _in_process("run", path, "-o", out, "--quiet", "--force")
    assert rc == 0, err
    assert victim.read_text() == "someone else's file"
    assert not (out / "unweighted.parquet").is_symlink()


def test_a_tilde_is_expanded_the_same_way_on_the_command_line_and_in_the_card(tmp_path, monkeypatch):
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    path = tmp_path / "c.toml"
    path.write_text(QED.replace("[sampling]", '[output]\nfolder = "~/from-card"\n[sampling]'))
    rc, _, err = _in_process("run", path, "--quiet")
    assert rc == 0, err
    assert (tmp_path / "home" / "from-card" / "summary.json").exists()
    rc, _, err = _in_process("run", path, "-o", "~/from-option", "--quiet")
    assert rc == 0, err
    assert (tmp_path / "home" / "from-option" / "summary.json").exists()
    rc, out, err = _in_process("info", "~/from-option")
    assert rc == 0, err
    assert not Path("~").exists()


# ---------------------------------------------------------------------------------------------
# Dask: a bad address is refused before anything is written; the local cluster needs our credentials

def test_a_bad_scheduler_address_is_refused_before_anything_is_written(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(QED)
    for address in ("not a url", "8786", "tcp://", "ftp://host:21", "tcp://host:99999"):
        rc, _, err = _in_process("run", path, "--scheduler", address, "--jobs", "2", "-o", tmp_path / "out")
        _one_line_error(rc, err)
        assert "--scheduler" in err
        assert not (tmp_path / "out").exists()


@pytest.mark.slow
def test_the_local_dask_cluster_is_unreachable_without_its_credentials():
    pytest.importorskip("dask.distributed")
    pytest.importorskip("cryptography")
    from distributed import Client
    from distributed.security import Security

    from gen.jobs.distributed import local_cluster

    with local_cluster(1) as client:
        address = client.scheduler.address
        assert address.startswith("tls://127.0.0.1:")
        assert client.submit(math.sqrt, 16.0).result() == 4.0
        import urllib.error
        import urllib.request

        port = next(iter(client.cluster.scheduler.http_server._sockets.values())).getsockname()[1]
        for page in ("/status", "/health", "/info/main/workers.html", "/json/identity.json", "/metrics"):
            with pytest.raises(urllib.error.HTTPError, match="404"):
                urllib.request.urlopen(f"http://127.0.0.1:{port}{page}", timeout=3)
        for attempt in (lambda: Client(address.replace("tls://", "tcp://"), timeout="3s"),
                        lambda: Client(address, timeout="3s"),
                        lambda: Client(address, security=Security.temporary(), timeout="3s")):
            with pytest.raises(Exception):
                other = attempt()
                other.close()  # reached only if it connected


# ---------------------------------------------------------------------------------------------
# every model parameter a card sets has an effect, or the card is refused

def _with_parameters(text: str, lines: str) -> str:
    return text.replace("[integration]", f"[parameters]\n{lines}\n[integration]", 1)


PP_W = card("electroweak", ("p", "pbar"), ("l+", "nu"), "sqrt_s = 1960.0",
            "[cuts]\nmass_min = 50.0\nmass_max = 110.0\n" + FAST[0], FAST[1])
JETS = card("qcd", ("p", "p"), ("jet", "jet"), "sqrt_s = 13600.0", "[cuts]\npt_min = 250.0\n" + FAST[0], FAST[1])
PHOTONS = card("qcd", ("p", "p"), ("gamma", "jet"), "sqrt_s = 13600.0", "[cuts]\npt_min = 100.0\n" + FAST[0], FAST[1])
EE_QQG = card("qcd", ("e-", "e+"), ("u", "ubar", "g"), "sqrt_s = 30.0", "[cuts]\npair_mass_min = 5.0\n" + FAST[0],
              FAST[1])
SCALAR = card("scalar", ("phi", "phi"), ("phi", "phi"), "sqrt_s = 10.0", FAST[0], FAST[1])
# the automatic amplitudes
SM_MUMU = card("standard", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 91.1879", FAST[0], FAST[1])
SM_ZH = card("standard", ("e-", "e+"), ("Z", "H"), "sqrt_s = 240.0", FAST[0], FAST[1])
SM_W = card("standard", ("u", "dbar"), ("e+", "nu_e"), "sqrt_s = 80.0", FAST[0], FAST[1])
SM_WS = card("standard", ("u", "sbar"), ("e+", "nu_e"), "sqrt_s = 80.0", FAST[0], FAST[1])
SM_H = card("standard", ("b", "bbar"), ("tau-", "tau+"), "sqrt_s = 125.0", FAST[0], FAST[1])
SM_QQG = card("standard", ("e-", "e+"), ("u", "ubar", "g"), "sqrt_s = 30.0",
              "[cuts]\npair_mass_min = 5.0\npt_min = 1.0\nenergy_min = 1.0\n" + FAST[0], FAST[1])
QED_TREE = card("qed-tree", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", FAST[0], FAST[1])
QCD_TREE = card("qcd-tree", ("u", "ubar"), ("g", "g"), "sqrt_s = 100.0", "[cuts]\npt_min = 10.0\n" + FAST[0], FAST[1])
SCALAR_TREE = card("scalar-tree", ("phi", "phi"), ("phi", "phi"), "sqrt_s = 10.0", FAST[0], FAST[1])

#: (model, parameter) -> a card where it must be accepted (it has an effect there)
EFFECTIVE = {
    ("electroweak", "scheme"): _with_parameters(EE_MUMU, 'scheme = "thomson"'),
    ("electroweak", "m_Z"): _with_parameters(EE_MUMU, "m_Z = 91.0"),
    ("electroweak", "width_Z"): _with_parameters(EE_MUMU, "width_Z = 2.6"),
    ("electroweak", "m_W"): _with_parameters(EE_MUMU, "m_W = 80.5"),
    ("electroweak", "m_H"): _with_parameters(ZH_DECAYS.replace("[decays.H]", "[decays.Hx]").replace(
        '[decays.Hx]\ninto = ["b", "bbar"]\n', ""), "m_H = 126.0"),
    ("electroweak", "width_W"): _with_parameters(PP_W, "width_W = 2.2"),
    ("electroweak", "width_H"): _with_parameters(ZH_DECAYS, "width_H = 0.0045"),
    ("electroweak", "cabibbo_angle"): _with_parameters(PP_W, "cabibbo_angle = 0.227"),
    ("electroweak", "g_fermi"): _with_parameters(EE_MUMU, "g_fermi = 1.2e-5"),
    ("electroweak", "alpha"): _with_parameters(EE_MUMU, 'scheme = "thomson"\nalpha = 0.0075'),
    ("electroweak", "sw2"): _with_parameters(EE_MUMU, 'scheme = "zpole"\nsw2 = 0.232'),
    ("qed", "alpha"): _with_parameters(QED, "alpha = 0.0078"),
    ("qcd", "alpha_s"): _with_parameters(EE_QQG, "alpha_s = 0.14"),
    ("qcd", "alpha"): _with_parameters(PHOTONS, "alpha = 0.0078"),
    ("scalar", "mass"): _with_parameters(SCALAR, "mass = 2.0"),
    ("scalar", "quartic"): _with_parameters(SCALAR, "quartic = 0.5"),
    ("scalar", "cubic"): _with_parameters(SCALAR, "cubic = 1.5"),
    ("standard", "scheme"): _with_parameters(SM_MUMU, 'scheme = "thomson"'),
    ("standard", "m_Z"): _with_parameters(SM_MUMU, "m_Z = 91.0"),
    ("standard", "width_Z"): _with_parameters(SM_MUMU, "width_Z = 2.6"),
    ("standard", "m_W"): _with_parameters(SM_MUMU, "m_W = 80.5"),
    ("standard", "m_H"): _with_parameters(SM_ZH, "m_H = 126.0"),
    ("standard", "width_W"): _with_parameters(SM_W, "width_W = 2.2"),
    ("standard", "width_H"): _with_parameters(SM_H, "width_H = 0.0045"),
    ("standard", "cabibbo_angle"): _with_parameters(SM_WS, "cabibbo_angle = 0.227"),
    ("standard", "g_fermi"): _with_parameters(SM_MUMU, "g_fermi = 1.2e-5"),
    ("standard", "alpha"): _with_parameters(SM_MUMU, 'scheme = "thomson"\nalpha = 0.0075'),
    ("standard", "sw2"): _with_parameters(SM_MUMU, 'scheme = "zpole"\nsw2 = 0.232'),
    ("standard", "alpha_s"): _with_parameters(SM_QQG, "alpha_s = 0.14"),
    ("standard", "width_scheme"): _with_parameters(SM_MUMU, 'width_scheme = "complex_mass"'),
    ("qed-tree", "alpha"): _with_parameters(QED_TREE, "alpha = 0.0078"),
    ("qcd-tree", "alpha_s"): _with_parameters(QCD_TREE, "alpha_s = 0.14"),
    ("scalar-tree", "mass"): _with_parameters(SCALAR_TREE, "mass = 2.0"),
    ("scalar-tree", "quartic"): _with_parameters(SCALAR_TREE, "quartic = 0.5"),
    ("scalar-tree", "cubic"): _with_parameters(SCALAR_TREE, "cubic = 1.5"),
}
# the standard model file with the effective Higgs-gluon vertices has the standard file's parameters
EFFECTIVE.update({("standard-gluon-higgs", k): text.replace('model = "standard"', 'model = "standard-gluon-higgs"')
                  for (m, k), text in list(EFFECTIVE.items()) if m == "standard"})

INEFFECTIVE = {
    "a W width in e+e- -> mu+mu-": (_with_parameters(EE_MUMU, "width_W = 3"), "parameters.width_W"),
    "a Higgs mass in e+e- -> mu+mu-": (_with_parameters(EE_MUMU, "m_H = 200"), "parameters.m_H"),
    "a Cabibbo angle in Drell-Yan": (_with_parameters(DRELL_YAN, "cabibbo_angle = 0.2"), "parameters.cabibbo_angle"),
    "alpha in pure-QCD dijets": (_with_parameters(JETS, "alpha = 0.0078"), "parameters.alpha"),
    "a fixed alpha_s at a hadron collider": (_with_parameters(JETS, "alpha_s = 0.2"), "parameters.alpha_s"),
    "a top mass in e+e- -> mu+mu-": (_with_parameters(EE_MUMU, "[parameters.masses]\nt = 175.0"),
                                     "parameters.masses.t"),
    "a Cabibbo angle in automatic e+e- -> mu+mu-": (_with_parameters(SM_MUMU, "cabibbo_angle = 0.2"),
                                                    "parameters.cabibbo_angle"),
}


def test_every_model_parameter_has_a_card_where_it_is_effective():
    from gen.physics.matrix import MODELS

    assert set(EFFECTIVE) == {(m, k) for m, model in MODELS.items() for k in model.params}


@pytest.mark.parametrize("model, key", list(EFFECTIVE))
def test_an_effective_parameter_is_accepted(model, key):
    from gen.card import parse_card
    from gen.processes import build_process

    proc = build_process(parse_card(EFFECTIVE[(model, key)], "c.toml"))  # a refusal raises CardError
    assert key in proc.cfg.parameters


@pytest.mark.parametrize("name", list(INEFFECTIVE))
def test_a_parameter_without_effect_on_the_process_is_refused(name, tmp_path):
    text, key = INEFFECTIVE[name]
    path = tmp_path / "c.toml"
    path.write_text(text)
    rc, _, err = _in_process("run", path, "-o", tmp_path / "out", "--quiet")
    _one_line_error(rc, err)
    assert key in err, err  # by the generic effect check or by a rule that says what to set instead
    assert not (tmp_path / "out").exists()


# ---------------------------------------------------------------------------------------------
# the allocator setting that keeps memory flat (its figures come from the benchmark, not a test)

@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc only")
def test_the_allocator_is_tuned_for_long_runs_only_and_as_the_user_asks():
    code = "import sys; from gen.memory import tune_allocator; print(tune_allocator(int(sys.argv[1])))"

    def tuned(events, **env):
        e = {k: v for k, v in os.environ.items() if k not in ("GEN_ALLOCATOR", "MALLOC_MMAP_THRESHOLD_")}
        r = subprocess.run([sys.executable, "-c", code, str(events)], capture_output=True, text=True,
                           env=dict(e, **env), check=True)
        return r.stdout.strip()

    import platform

    if platform.libc_ver()[0] != "glibc":
        pytest.skip("not glibc")
    assert tuned(1_000_000) == "False"
    assert tuned(3_000_000) == "True"
    assert tuned(1_000, GEN_ALLOCATOR="tuned") == "True"
    assert tuned(3_000_000, GEN_ALLOCATOR="system") == "False"
    assert tuned(3_000_000, MALLOC_MMAP_THRESHOLD_="131072") == "False"


# ---------------------------------------------------------------------------------------------
# the card fuzzer: "exit 0 with valid files, or exit 2 with one line and nothing left"

hypothesis = pytest.importorskip("hypothesis")
st = hypothesis.strategies
EXAMPLES = int(os.environ.get("GEN_FUZZ_EXAMPLES", "40"))
FUZZ = hypothesis.settings(max_examples=EXAMPLES, deadline=None, derandomize="GEN_FUZZ_EXAMPLES" not in os.environ,
                           suppress_health_check=list(hypothesis.HealthCheck), database=None)
BASES = [EE_MUMU, QED, DRELL_YAN, ZH_DECAYS,
         card("qcd", ("p", "p"), ("t", "tbar"), "sqrt_s = 13600.0", FAST[0], FAST[1]),
         card("qed", ("gamma", "e-"), ("gamma", "e-"), "beam_energies = [0.01, 0.0]", FAST[0], FAST[1])]
#: keys whose large values would make a valid but slow run: fuzzed only with small or invalid values
SIZE_KEYS = {"events", "weighted_events", "calibration_points", "chunk", "points_per_iteration", "iterations",
             "warmup_iterations", "row_group_events"}


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(v)


def _toml(doc: dict) -> str:
    """A card as TOML text: top-level sections as tables, anything nested in them inline."""
    head = [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in doc.items() if not isinstance(v, dict)]
    body = []
    for section, table in doc.items():
        if isinstance(table, dict):
            body.append(f"[{json.dumps(section)}]")
            body += [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in table.items()]
    return "\n".join(head + body) + "\n"


def _leaves(doc: dict, prefix=()):
    for k, v in doc.items():
        if isinstance(v, dict):
            yield from _leaves(v, prefix + (k,))
        yield prefix + (k,)


VALUES = st.one_of(
    st.integers(-10, 10), st.integers(-(2 ** 70), 2 ** 70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1e-300, 1e300, 5e-324, 91.1879, 13600.0, 0.5, 1.0, 180.0, -1.0]),
    st.text(max_size=12), st.sampled_from(["e-", "e+", "mu-", "g", "gamma", "p", "Z", "H", "t", "nu_e", "b", "auto",
                                           "pt", "fermi", "zpole", "genbench-lo", "", "\x00", "\x1b[2J"]),
    st.booleans(), st.lists(st.sampled_from(["e-", "mu+", "b", "bbar", "g", 1, 2.5, "Z"]), max_size=4),
    st.dictionaries(st.sampled_from(["a", "into", "Z", "value"]), st.integers(0, 3), max_size=2),
)
SMALL_OR_BAD = st.sampled_from([-1, 0, 1, 2, 3, 999, 0.5, 1e30, float("nan"), float("inf"), "ten", True, [], {}])


def _key_names() -> list[str]:
    from gen.card import SPEC

    return sorted({k for table in SPEC.values() if isinstance(table, dict) for k in table})


def _perturbed(draw, value):
    """A value of the same kind as the card's, moved to places a user or a script might put it."""
    if isinstance(value, bool):
        return not value
    if isinstance(value, (int, float)):
        return draw(st.sampled_from([value * 1e-9, value * 0.999, value * 1.001, value * 1e9, -value, 0, value + 1,
                                     value / 3, float("nan"), float("inf"), -float("inf"), 1e300, 1e-300]))
    if isinstance(value, str):
        return draw(st.sampled_from(["e-", "e+", "mu-", "mu+", "g", "gamma", "p", "pbar", "Z", "H", "W+", "t", "nu_e",
                                     "b", "bbar", "u", "qcd", "qed", "electroweak", "scalar", "fermi", "zpole",
                                     "thomson", "auto", "pt", "half_ht", "sqrt_shat", "set", "one_loop", value.upper(),
                                     value + " ", ""]))
    if isinstance(value, list):
        out = list(value)
        op = draw(st.sampled_from(["drop", "add", "swap", "element"]))
        if op == "drop" and out:
            out.pop(draw(st.integers(0, len(out) - 1)))
        elif op == "add":
            out.append(draw(st.sampled_from(["g", "gamma", "mu-", "e+", "Z", "b", 0.0])))
        elif op == "swap":
            out.reverse()
        elif out:
            i = draw(st.integers(0, len(out) - 1))
            out[i] = _perturbed(draw, out[i])
        return out
    return draw(VALUES)


@st.composite
def mutated_cards(draw):
    """A demo-like card with one to three mutations: values moved in type (most), replaced by
    anything, keys deleted, or keys of other sections added."""
    import tomllib

    doc = tomllib.loads(draw(st.sampled_from(BASES)))
    for _ in range(draw(st.integers(1, 3))):
        leaves = [p for p in _leaves(doc) if len(p) >= 2]
        op = draw(st.sampled_from(["perturb"] * 4 + ["replace", "delete", "add", "section"]))
        path = draw(st.sampled_from(leaves))
        parent = doc
        for k in path[:-1]:
            parent = parent[k]
        size = path[-1] in SIZE_KEYS
        if op == "section":
            doc[draw(st.sampled_from(["partons", "scales", "output", "parameters", "decays", "extra"]))] = {
                draw(st.sampled_from(_key_names())): draw(VALUES)}
        elif op == "delete":
            parent.pop(path[-1])
        elif op == "add":
            name = draw(st.sampled_from(_key_names()))
            parent[name] = draw(SMALL_OR_BAD if name in SIZE_KEYS else VALUES)
        elif op == "replace" or size:
            parent[path[-1]] = draw(SMALL_OR_BAD if size else VALUES)
        else:
            parent[path[-1]] = _perturbed(draw, parent[path[-1]])
    return _toml(doc)


class _Slow(BaseException):
    pass


def _run_fuzzed(text: str | bytes, folder: Path) -> str:
    """Run one fuzzed card; returns the outcome, fails on a broken contract."""
    path = folder / "c.toml"
    (path.write_bytes if isinstance(text, bytes) else path.write_text)(text)
    out = folder / "out"

    def alarm(*_):
        raise _Slow

    old = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(30)
    try:
        rc, _, err = _in_process("run", path, "-o", out, "--quiet")
    except _Slow:
        hypothesis.reject()  # valid but slow (a thin cut at a low efficiency): not what this fuzzer judges
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    assert rc in (0, 2), f"exit {rc}: {err[-800:]}\n--- card ---\n{text!r:.2000}"
    if rc == 2:
        _one_line_error(rc, err)
        assert not out.exists(), f"a refused card left {list(out.iterdir())}"
        return "exit 2, one line, nothing left"
    summary = json.loads((out / "summary.json").read_text())
    assert summary["files"], "a finished run wrote files"
    for name, entry in summary["files"].items():
        rec = read_run(out / name)
        table = pq.read_table(out / name, columns=["weight"])
        assert rec["run_id"] == summary["run_id"] and table.num_rows == entry["events"]
        w = table.column("weight").to_numpy()
        assert all(math.isfinite(x) for x in w[:1000]) and math.isfinite(rec["cross_section"]["total"]["value"])
    return "exit 0, valid files"


@FUZZ
@hypothesis.given(text=mutated_cards())
def test_fuzzed_cards_exit_0_with_valid_files_or_2_with_one_line(text, tmp_path_factory):
    _run_fuzzed(text, tmp_path_factory.mktemp("fuzz"))


BYTE_EDITS = st.lists(st.tuples(st.floats(0, 1), st.integers(0, 255), st.sampled_from(["set", "insert", "delete"])),
                      min_size=1, max_size=4)


def _byte_edited(base: str, edits) -> bytes:
    data = bytearray(base.encode())
    for where, byte, op in edits:
        i = min(int(where * len(data)), len(data) - 1)
        if op == "set":
            data[i] = byte
        elif op == "insert":
            data.insert(i, byte)
        else:
            del data[i]
    return bytes(data)


@FUZZ
@hypothesis.given(base=st.sampled_from(BASES), edits=BYTE_EDITS)
def test_byte_edited_cards_exit_0_with_valid_files_or_2_with_one_line(base, edits, tmp_path_factory):
    _run_fuzzed(_byte_edited(base, edits), tmp_path_factory.mktemp("bytes"))


def campaign(n: int) -> dict:
    """A longer campaign than CI's: n cards per strategy, tallied by outcome (run as
    `python tests/test_reliability.py N`); a card that breaks the contract is printed and counted."""
    import collections
    import tempfile

    tally = {"mutated": collections.Counter(), "byte-edited": collections.Counter()}

    def judge(label, text):
        with tempfile.TemporaryDirectory() as tmp:
            try:
                tally[label][_run_fuzzed(text, Path(tmp))] += 1
            except hypothesis.errors.UnsatisfiedAssumption:
                tally[label]["valid, slower than 30 s (stopped)"] += 1
            except AssertionError as exc:
                tally[label]["broke the contract"] += 1
                print(f"--- {label}: {exc}", file=sys.stderr)

    run = hypothesis.settings(max_examples=n, deadline=None, database=None,
                              suppress_health_check=list(hypothesis.HealthCheck))
    run(hypothesis.given(text=mutated_cards())(lambda text: judge("mutated", text)))()
    run(hypothesis.given(base=st.sampled_from(BASES), edits=BYTE_EDITS)(
        lambda base, edits: judge("byte-edited", _byte_edited(base, edits))))()
    return {k: dict(v) for k, v in tally.items()}


if __name__ == "__main__":
    print(json.dumps(campaign(int(sys.argv[1]) if len(sys.argv) > 1 else 500), indent=1))
