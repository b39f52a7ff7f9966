"""Validate an event file against the analytic reference of its process.

The file's process (rebuilt from the card stored in the file) supplies a `ValidationPlan`: the
reference on a quadrature grid with the card's cuts applied, the observables at the grid's
points, and how to compute the same observables from the file's momenta. The events are
histogrammed with boost-histogram and each bin is compared with the reference's integral over
that bin; the grid made twice as coarse gives the reference's own numerical error.

Statistics. Unweighted files: Pearson chi-square of the counts against N times the reference's
bin fractions (a shape test, bins - 1 degrees of freedom), pulls (n - mu)/sqrt(mu). Weighted
files: bin sums of weights against the reference's bin integrals with the variance sum w^2
(absolute, `bins` degrees of freedom). The total (sum of the file's weights) against the
reference's, in standard deviations of their combined error (the file's reported error, the
reference's numerical error and its stated accuracy). A file passes when every observable's
p-value is at least `p_min`, its largest pull at most `pull_max`, and the total within `sigma_max`.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq

from .card import parse_card
from .errors import CardError, OutputError
from .files import write_atomically
from .processes import build_process
from .records.store import read_run
from .sampling.sampler import chi2_survival

__all__ = ["validate", "Thresholds"]


@dataclass(frozen=True)
class Thresholds:
    p_min: float = 1e-4
    pull_max: float = 6.0
    sigma_max: float = 5.0


def _momenta(batch) -> np.ndarray:
    parts = batch.column(1)
    flat = parts.flatten()
    n = int(parts.offsets[1].as_py() - parts.offsets[0].as_py()) if len(parts) else 0
    comp = np.stack([flat.field(k).to_numpy(zero_copy_only=False) for k in ("e", "px", "py", "pz")], -1)
    return comp.reshape(len(batch), n, 4)


def validate(path: str | Path, out: str | Path | None = None, bins: int = 20,
             thresholds: Thresholds = Thresholds(), plots: bool = True) -> dict:
    """Validate one event file; returns the report (also written as JSON, with PNG plots).
    Raises `CannotValidate` (a UserError) when the process has no reference."""
    import boost_histogram as bh

    path = Path(path)
    rec = read_run(path)
    try:
        proc = build_process(parse_card(rec["card"]["text"], rec["card"]["path"]))
    except CardError as exc:
        raise OutputError(f"{path}: the card stored in the file cannot be used: {exc}") from None
    plan = proc.validation(rec["parameters"])
    unit = rec["measure"]["unit"]
    w_ref, o_ref = plan.reference(2)
    w_coarse, _ = plan.reference(1)
    w_ref, w_coarse = w_ref * plan.scale, w_coarse * plan.scale
    sigma_ref = float(w_ref.sum())
    sigma_ref_num = abs(sigma_ref - float(w_coarse.sum()))
    sigma_ref_acc = plan.accuracy * sigma_ref

    axes = {}
    for name in plan.observables:
        live = o_ref[name][w_ref > 0]
        lo, hi = float(live.min()), float(live.max())
        if hi - lo <= 1e-9 * max(abs(hi), abs(lo), 1.0):
            continue  # constant at fixed beam energies (e.g. the energy in the CM frame)
        pad = 1e-9 * (hi - lo)
        axes[name] = bh.axis.Regular(bins, lo - pad, hi + pad)
    hists = {n: bh.Histogram(ax, storage=bh.storage.Weight()) for n, ax in axes.items()}
    refs = {n: bh.Histogram(ax, storage=bh.storage.Double()).fill(o_ref[n], weight=w_ref).values()
            for n, ax in axes.items()}

    sum_w = sum_w2 = 0.0
    n_events = 0
    for batch in pq.ParquetFile(path).iter_batches(columns=["weight", "particles"], batch_size=200000):
        w = batch.column(0).to_numpy()
        obs = plan.observe(_momenta(batch))
        for name, h in hists.items():
            h.fill(obs[name], weight=w)
        sum_w += float(w.sum())
        sum_w2 += float((w * w).sum())
        n_events += len(w)

    weighted = rec["weighting"] == "weighted"
    if weighted:
        trials = rec["events"]["trials"]
        sigma_err = math.sqrt(max(trials * sum_w2 - sum_w**2, 0.0) / trials)
    else:
        total = rec["cross_section"]["total"]
        sigma_err = total["error"] * (sum_w / total["value"]) if total["value"] else 0.0
    comb = math.sqrt(sigma_err**2 + sigma_ref_num**2 + sigma_ref_acc**2)
    sigma_pull = (sum_w - sigma_ref) / comb if comb > 0 else (0.0 if sum_w == sigma_ref else math.inf)

    results = [_compare(name, h, refs[name], plan.observables[name], weighted, sum_w, n_events, thresholds)
               for name, h in hists.items()]
    verdict = all(r["pass"] for r in results) and abs(sigma_pull) <= thresholds.sigma_max
    report = {
        "file": str(path), "weighting": rec["weighting"], "process": rec["process"]["label"],
        "model": rec["process"]["model"], "events": n_events, "unit": unit,
        "reference": {"name": plan.name, "source": plan.source, "scale": plan.scale, "note": plan.note},
        "thresholds": {"p_min": thresholds.p_min, "pull_max": thresholds.pull_max, "sigma_max": thresholds.sigma_max},
        "cross_section": {"sample": sum_w, "sample_error": sigma_err, "reference": sigma_ref,
                          "reference_numerical_error": sigma_ref_num, "reference_accuracy": sigma_ref_acc,
                          "pull": sigma_pull, "pass": abs(sigma_pull) <= thresholds.sigma_max},
        "observables": results,
        "verdict": "pass" if verdict else "fail",
    }
    out_dir = Path(out) if out is not None else path.parent / "validation"
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
        if plots:
            from .plots import validation_plot

            for item in results:
                item["plot"] = str(validation_plot(report, item, out_dir / f"{path.stem}-{item['name']}.png"))
        report_path = write_atomically(out_dir / f"{path.stem}.validation.json", json.dumps(report, indent=1))
    except OSError as exc:
        raise OutputError(f"{out_dir}: cannot write the validation report: {exc.strerror or exc}") from None
    report["report"] = str(report_path)
    return report


def _compare(name, h, ref, label, weighted: bool, sum_w: float, n_events: int, th: Thresholds) -> dict:
    """One observable's histogram against the reference's bin integrals."""
    view = h.view(flow=True)
    flow_events = float(view.value[0] + view.value[-1])
    val, var = h.values(), h.variances()
    if weighted:
        # absolute test; an empty bin gets the variance of one event of the mean weight
        expect = ref
        mean_w = sum_w / n_events if n_events else 0.0
        err = np.sqrt(np.where(var > 0, var, np.maximum(ref, 0.0) * mean_w))
        dof = int(np.count_nonzero(expect > 0))
    else:
        # shape test on counts, reported per bin in the measure's unit (counts times the common event weight)
        per_event = sum_w / n_events if n_events else 1.0
        expect_counts = n_events * ref / ref.sum()
        expect, err = expect_counts * per_event, np.sqrt(expect_counts) * per_event
        dof = int(np.count_nonzero(expect_counts > 0)) - 1
    ok = err > 0
    pulls = np.zeros_like(val)
    pulls[ok] = (val[ok] - expect[ok]) / err[ok]
    chi2 = float((pulls[ok] ** 2).sum())
    p_value = chi2_survival(chi2, dof)
    max_pull = float(np.abs(pulls).max()) if pulls.size else 0.0
    return {"name": name, "label": label[0], "unit": label[1],
            "edges": h.axes[0].edges.tolist(), "sample": val.tolist(), "sample_error": err.tolist(),
            "reference": expect.tolist(), "pulls": pulls.tolist(),
            "chi2": chi2, "dof": dof, "chi2_per_dof": chi2 / dof if dof > 0 else 0.0,
            "p_value": p_value, "max_pull": max_pull, "events_outside": flow_events,
            "pass": p_value >= th.p_min and max_pull <= th.pull_max}
