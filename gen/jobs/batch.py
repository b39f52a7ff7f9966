"""Batch parts: finding them, checking they belong together, combining and merging them.

Combination rule (stated in every merged file): all parts sample one frozen grid, so their
unweighting trials are draws from one distribution. Their pooled mean
sigma_s = (sum of all trial weights) / (number of all trials), with error
sqrt((sum w^2 / n - sigma_s^2) / n), is what one job with all those trials would give; pooling,
not averaging the parts, keeps parts of different sizes right. It is independent of the grid's
vegas estimate sigma_g (different random streams), and the two are combined by inverse-variance
weighting: sigma = (sigma_g / d_g^2 + sigma_s / d_s^2) / (1/d_g^2 + 1/d_s^2). Unweighted events of
the merged sample carry sigma / N each; weighted events are rescaled from their part's number of
trials to the total, so that each file's weights sum to its estimate.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
import time
import uuid
from collections import defaultdict
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from ..errors import OutputError, UserError
from ..files import stale_temporaries
from ..progress import Progress
from ..records.schema import arrow_schema
from ..records.store import EventWriter, compression_of, event_files, read_run
from .run import by_subprocess, claim_folder, clear_earlier_run, lifetime_s, refuse_occupied, write_summary

__all__ = ["MergeError", "collect_parts", "check_parts", "combine", "merge"]


class MergeError(UserError):
    """Parts that do not form one sample."""


@dataclass(frozen=True)
class PartFile:
    path: Path
    record: dict

    @property
    def kind(self) -> str:
        return self.record["weighting"]

    @property
    def job(self) -> int:
        return self.record["job"]["index"]


def collect_parts(paths: list[str | Path]) -> dict[str, list[PartFile]]:
    """Event files of the given files and folders, by weighting kind, sorted by job index."""
    out: dict[str, list[PartFile]] = defaultdict(list)
    for p in paths:
        for f in event_files(p):
            rec = read_run(f)
            if "merged" in rec["job"]:
                continue  # a merged file lying beside its parts is not a part
            out[rec["weighting"]].append(PartFile(f, rec))
    if not out:
        raise MergeError("no parts found in " + ", ".join(map(str, paths)))
    for kind in out:
        out[kind].sort(key=lambda pf: pf.job)
    return dict(out)


def check_parts(parts: dict[str, list[PartFile]]) -> list[str]:
    """Every reason these parts are not one consistent sample (empty when they are)."""
    problems: list[str] = []
    everything = [pf for kind in parts.values() for pf in kind]
    first = everything[0]
    fields = {
        "schema version": lambda r: r["schema_version"],
        "card (physics settings and seed)": lambda r: r["card"]["digest"],
        "card sampling settings": lambda r: r["card"]["sampling"],
        "grid": lambda r: r["grid"]["checksum"],
        "parameters": lambda r: r["parameters"],
        "job count": lambda r: r["job"]["count"],
    }
    for what, get in fields.items():
        seen: dict[str, list[str]] = defaultdict(list)
        for pf in everything:
            seen[repr(get(pf.record))].append(pf.path.name)
        if len(seen) > 1:
            groups = "; ".join(f"{', '.join(names[:3])}{' ...' if len(names) > 3 else ''}" for names in seen.values())
            problems.append(f"different {what}: {groups}")
    jobs = first.record["job"]["count"]
    run_of: dict[int, set] = defaultdict(set)
    for pf in everything:
        run_of[pf.job].add(pf.record.get("run_id"))
    mixed = sorted(j for j, ids in run_of.items() if len(ids) > 1)
    if mixed:
        problems.append(f"the unweighted and weighted files of job(s) {mixed[:10]} come from different runs (an "
                        "interrupted rerun?); rerun those parts")
    for kind, files in parts.items():
        idx = [pf.job for pf in files]
        dup = sorted({i for i in idx if idx.count(i) > 1})
        if dup:
            where = [pf.path.name for pf in files if pf.job in dup]
            problems.append(f"{kind}: job index repeated: {dup} ({', '.join(where)})")
        missing = sorted(set(range(jobs)) - set(idx))
        expected = first.record["card"]["sampling"]["events" if kind == "unweighted" else "weighted_events"]
        if missing and expected > 0:
            problems.append(f"{kind}: missing job indices {missing[:10]}{' ...' if len(missing) > 10 else ''} of {jobs}")
    return problems


def combine(unweighted: list[PartFile]) -> dict:
    """Combined cross-section of unweighted parts (see the module docstring for the rule)."""
    grid = unweighted[0].record["cross_section"]["total"]
    g, dg = grid["value"], grid["error"]
    n = sum(pf.record["unweighting"]["trials"] for pf in unweighted)
    sw = sum(pf.record["unweighting"]["sum_w"] for pf in unweighted)
    sw2 = sum(pf.record["unweighting"]["sum_w2"] for pf in unweighted)
    s = sw / n
    ds = math.sqrt(max(sw2 / n - s * s, 0.0) / n)
    if dg == 0.0 or ds == 0.0:
        value, error = (g, dg) if dg == 0.0 else (s, ds)
    else:
        wg, ws = 1.0 / dg**2, 1.0 / ds**2
        value, error = (g * wg + s * ws) / (wg + ws), 1.0 / math.sqrt(wg + ws)
    accepted = sum(pf.record["unweighting"]["accepted"] for pf in unweighted)
    excess = sum(pf.record["unweighting"]["overflow_share"] * pf.record["unweighting"]["sum_w"] for pf in unweighted)
    return {
        "value": value, "error": error,
        "method": "inverse-variance combination of the grid's vegas estimate and the pooled mean of all parts' unweighting trials",
        "adaptation": {"value": g, "error": dg},
        "sampling": {"value": s, "error": ds, "trials": n, "sum_w": sw, "sum_w2": sw2},
        "events": accepted, "efficiency": accepted / n if n else 0.0,
        "overflow_events": sum(pf.record["unweighting"]["overflow_events"] for pf in unweighted),
        "overflow_share": excess / sw if sw > 0 else 0.0,
        "parts": len(unweighted),
        "unit": unweighted[0].record["measure"]["unit"],
    }


def _rescaled(batch: pa.RecordBatch, weights: np.ndarray) -> pa.RecordBatch:
    i = batch.schema.get_field_index("weight")
    return batch.set_column(i, batch.schema.field(i), pa.array(weights, pa.float64()))


def merge(paths: list[str | Path], out: str | Path, progress: Progress | None = None,
          row_group_events: int = 200000, replace: bool = False) -> tuple[list[Path], dict]:
    """Merge parts into `out`/unweighted.parquet and weighted.parquet (with the folder's summary);
    returns (files, combined). An output folder that holds another run's files is refused unless
    `replace`."""
    progress = progress or Progress(enabled=False)
    parts = collect_parts(paths)
    problems = check_parts(parts)
    if problems:
        raise MergeError("the parts do not form one sample:\n  " + "\n  ".join(problems))
    out = Path(out).expanduser()
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: exists and is not a folder")
    with claim_folder(out, None):
        refuse_occupied(out, None, replace)
        for name in ("unweighted.parquet", "weighted.parquet", "summary.json", "summary.txt"):
            for tmp in stale_temporaries(out, name):  # leftovers of a killed merge
                tmp.unlink(missing_ok=True)
        return _merge(parts, out, progress, row_group_events)


def _merge(parts: dict[str, list[PartFile]], out: Path, progress: Progress, row_group_events: int):
    t_start = time.monotonic()
    combined = combine(parts["unweighted"]) if "unweighted" in parts else None
    run_id = uuid.uuid4().hex[:16]
    written: list[EventWriter] = []
    with contextlib.ExitStack() as stack:
        for kind, files in sorted(parts.items()):
            total = sum(pf.record["events"]["count"] for pf in files)
            unit = files[0].record["measure"]["unit"]
            wr = stack.enter_context(EventWriter(out / f"{kind}.parquet", row_group_events, arrow_schema(unit),
                                                 compression_of(files[0].path)))  # as the parts were written
            progress.stage(f"merge {kind[:2]}", total)
            if kind == "unweighted":
                w_event = combined["value"] / total
                scale = None
            else:
                trials_all = sum(pf.record["events"]["trials"] for pf in files)
            last_id = -1
            for pf in files:
                if kind == "weighted":
                    scale = pf.record["events"]["trials"] / trials_all
                for batch in pq.ParquetFile(pf.path).iter_batches(batch_size=row_group_events):
                    ids = batch.column(0).to_numpy()
                    if ids.size and ids[0] <= last_id:
                        raise MergeError(f"{pf.path}: event ids overlap those of an earlier part")
                    last_id = int(ids[-1]) if ids.size else last_id
                    w = (np.full(batch.num_rows, w_event) if kind == "unweighted"
                         else batch.column(1).to_numpy() * scale)
                    wr.write(_rescaled(batch, w))
                    progress.update(wr.rows)
            progress.end(f"{wr.rows} events")
            rec = dict(files[0].record, run_id=run_id)
            rec["job"] = {"index": None, "count": files[0].record["job"]["count"], "merged": [pf.job for pf in files]}
            if combined:  # both files of the merged sample state the one combined result
                rec["cross_section"] = dict(rec["cross_section"], total=dict(rec["cross_section"]["total"], **{
                    k: combined[k] for k in ("value", "error")}), combination=combined, method=combined["method"])
                if unit == "GeV" and combined["value"] > 0:
                    rec["measure"] = dict(rec["measure"], **lifetime_s(combined["value"], combined["error"]))
            if kind == "unweighted":
                labels = sorted({k for pf in files for k in pf.record["cross_section"]["by_subprocess"]})
                counts = np.array([sum(pf.record["cross_section"]["by_subprocess"].get(k, {}).get("events", 0)
                                       for pf in files) for k in labels])
                rec["cross_section"]["by_subprocess"] = by_subprocess(labels, counts, combined["value"])
                rec["unweighting"] = {k: combined[k] for k in ("efficiency", "overflow_events", "overflow_share")}
                rec["unweighting"].update(trials=combined["sampling"]["trials"], accepted=combined["events"],
                                          sum_w=combined["sampling"]["sum_w"], sum_w2=combined["sampling"]["sum_w2"],
                                          max_weight=files[0].record["unweighting"]["max_weight"])
                rec["events"] = {"count": wr.rows, "sum_weights": wr.sum_w, "max_weight": wr.max_w}
            else:
                merged: dict[str, dict] = {}
                for pf in files:  # each part's weights were rescaled by its share of the trials
                    share = pf.record["events"]["trials"] / trials_all
                    for label, v in pf.record["cross_section"]["by_subprocess"].items():
                        m = merged.setdefault(label, {"value": 0.0, "events": 0})
                        m["value"] += share * v["value"]
                        m["events"] += v["events"]
                rec["cross_section"] = dict(rec["cross_section"], by_subprocess=merged)
                rec["events"] = {"count": wr.rows, "trials": trials_all, "sum_weights": wr.sum_w,
                                 "max_weight": wr.max_w}
            rec["created"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
            wr.finish(rec)
            written.append(wr)
        files_out = [w.publish() for w in written]
        clear_earlier_run(out, None, keep={w.path.name for w in written})
    first = next(iter(parts.values()))[0].record
    total = combined or first["cross_section"]["total"]
    doc = {"run_id": run_id, "program": first["program"], "kind": "merge",
           "job": {"index": 0, "count": first["job"]["count"]}, "card": first["card"]["path"],
           "process": first["process"]["label"], "model": first["process"]["model"],
           "sqrt_s_GeV": first["collider"]["sqrt_s_GeV"], "measure": rec["measure"],
           "result": {"value": total["value"], "error": total["error"],
                      "chi2_per_dof": first["cross_section"]["total"].get("chi2_per_dof", 0.0),
                      "q": first["cross_section"]["total"].get("q", 1.0), "iterations": []},
           "couplings": first["parameters"].get("couplings", {}), "seed": first["seed"],
           "merged_from": {kind: [str(pf.path) for pf in files] for kind, files in parts.items()},
           "files": {w.path.name: {"events": w.rows, "bytes": w.path.stat().st_size} for w in written},
           "timing": {"total_s": round(time.monotonic() - t_start, 3)}, "events_per_s": None,
           "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")}
    if combined:
        doc["unweighting"] = {"events": combined["events"], "trials": combined["sampling"]["trials"],
                              "efficiency": combined["efficiency"], "overflow_events": combined["overflow_events"],
                              "overflow_share": combined["overflow_share"],
                              "sampling_estimate": combined["sampling"]["value"],
                              "sampling_error": combined["sampling"]["error"]}
    write_summary(out, None, doc, first["card"]["text"])
    return files_out, combined or {}
