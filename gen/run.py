"""One run: card -> process -> vegas adaptation -> unweighted and weighted event files.

`run(cfg)` is the whole path behind `gen run`. Random streams: one `SeedSequence` of the card's
seed and the job index spawns independent generators for adaptation, the maximum-weight
calibration, the unweighted pass and the weighted pass, so that changing one count never changes
the events of another pass.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import __version__
from .card import RunConfig
from .errors import OutputError
from .events import JOB_STRIDE, EventLayout
from .process import TwoToTwo, build_process
from .progress import Progress
from .sampler import CrossSection, MapSampler, UnweightingStats, adapt
from .store import EventWriter, schema_doc

__all__ = ["run", "RunResult", "ConsistencyWarning", "UNWEIGHTED_FILE", "WEIGHTED_FILE", "default_folder"]

UNWEIGHTED_FILE = "unweighted.parquet"
WEIGHTED_FILE = "weighted.parquet"


class ConsistencyWarning(UserWarning):
    """The vegas iterations disagree more than their errors allow."""


@dataclass
class RunResult:
    folder: Path
    cross_section: CrossSection
    unweighting: UnweightingStats | None
    files: list[Path]
    record: dict


def default_folder(cfg: RunConfig) -> Path:
    if "folder" in cfg.output:
        return Path(cfg.output["folder"])
    return Path("gen-runs") / Path(cfg.source).stem


def _layout(proc: TwoToTwo) -> EventLayout:
    sp = proc.species
    colour = np.zeros(4, np.int32)
    anticolour = np.zeros(4, np.int32)
    if proc.spec.colour is not None:
        # canonical tags -> user order
        for user_i, canon_i in enumerate(proc.canonical):
            colour[user_i], anticolour[user_i] = proc.spec.colour.tags[canon_i]
    alpha = float(proc.params.get("alpha", 0.0))
    return EventLayout(
        pdg=np.array([p.pdg for p in sp], np.int32),
        roles=["incoming", "incoming", "outgoing", "outgoing"],
        parent_first=np.array([-1, -1, 0, 0], np.int16),
        parent_last=np.array([-1, -1, 1, 1], np.int16),
        colour=colour, anticolour=anticolour,
        mass=np.array(proc.masses, np.float64),
        subprocess=_label(proc.cfg),
        scale=proc.sqrt_s, alpha_em=alpha)


def _record(proc: TwoToTwo, xs: CrossSection, job: int, jobs: int) -> dict:
    cfg = proc.cfg
    return {
        "schema_version": schema_doc()["version"],
        "program": f"gen {__version__}",
        "card": {"path": cfg.source, "text": cfg.text},
        "process": {"model": cfg.model, "incoming": [p.name for p in cfg.incoming],
                    "outgoing": [p.name for p in cfg.outgoing], "label": _label(cfg),
                    "symmetry_factor": proc.spec.symmetry, "source": " ".join(proc.spec.source.split())},
        "collider": {"sqrt_s_GeV": proc.sqrt_s, "beam1_GeV": proc.beams.p1.tolist(),
                     "beam2_GeV": proc.beams.p2.tolist(), "cm_beta_z": proc.beta},
        "parameters": {"model": dict(proc.params),
                       "masses_GeV": {p.name: m for p, m in zip(proc.species, proc.masses)},
                       "widths_GeV": {p.name: cfg.widths.get(abs(p.pdg), p.width) for p in proc.species}},
        "cross_section": {"total": xs.as_dict(),
                          "by_subprocess": {_label(cfg): {"value_pb": xs.value, "error_pb": xs.error}}},
        "seed": cfg.sampling["seed"],
        "job": {"index": job, "count": jobs},
        "integration": dict(cfg.integration),
    }


def _label(cfg: RunConfig) -> str:
    return f"{' '.join(p.name for p in cfg.incoming)} -> {' '.join(p.name for p in cfg.outgoing)}"


def run(cfg: RunConfig, folder: str | Path | None = None, progress: Progress | None = None,
        job: int = 0, jobs: int = 1) -> RunResult:
    """Integrate the card's process and write its event files; returns what was done."""
    progress = progress or Progress(enabled=False)
    out = Path(folder) if folder is not None else default_folder(cfg)
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: exists and is not a folder; choose another output folder (gen run -o DIR)")
    proc = build_process(cfg)
    seeds = np.random.SeedSequence(cfg.sampling["seed"], spawn_key=(job,)).spawn(4)
    rng_adapt, rng_cal, rng_unw, rng_w = (np.random.default_rng(s) for s in seeds)
    integ = cfg.integration
    n_it = integ["warmup_iterations"] + integ["iterations"]
    progress.stage("adapt", n_it)

    def on_it(i, total, value, error):
        progress.update(i, f"σ = {value:.5e} ± {error:.2e} pb")

    xs, amap = adapt(proc.weights, proc.ndim, rng_adapt, warmup=integ["warmup_iterations"],
                     iterations=integ["iterations"], points=integ["points_per_iteration"], on_iteration=on_it)
    progress.end(f"σ = {xs.value:.5e} ± {xs.error:.2e} pb")
    if not xs.consistent(integ["consistency_min_q"]):
        warnings.warn(f"the vegas iterations disagree (chi2/dof = {xs.chi2_dof:.2f}, Q = {xs.q:.3g} < "
                      f"integration.consistency_min_q = {integ['consistency_min_q']}); raise "
                      "integration.warmup_iterations or points_per_iteration", ConsistencyWarning, stacklevel=2)
    samp = cfg.sampling
    sampler = MapSampler(proc.weights, amap, proc.ndim, samp["chunk"])
    layout = _layout(proc)
    base = _record(proc, xs, job, jobs)
    stats = None
    rg = cfg.output["row_group_events"]
    now = lambda: _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")  # noqa: E731
    finished: list[EventWriter] = []
    with contextlib.ExitStack() as stack:  # any failure removes every unpublished file
        n_unw = samp["events"]
        if n_unw > 0:
            stats = UnweightingStats(max_weight=sampler.max_weight(rng_cal, samp["calibration_points"]))
            weight = xs.value / n_unw
            progress.stage("unweight", n_unw)
            wr = stack.enter_context(EventWriter(out / UNWEIGHTED_FILE, rg))
            serial = job * JOB_STRIDE
            for x in sampler.unweighted(rng_unw, n_unw, stats):
                wr.write(layout.batch(serial, np.full(x.shape[0], weight), proc.momenta(x, rng_unw)))
                serial += x.shape[0]
                progress.update(stats.accepted, f"efficiency {stats.efficiency:.1%}")
            progress.end(f"efficiency {stats.efficiency:.1%}, {stats.overflow_events} above w_max")
            wr.finish(dict(base, created=now(), weighting="unweighted",
                           events={"count": wr.rows, "sum_weights_pb": wr.sum_w, "max_weight_pb": wr.max_w},
                           unweighting=stats.as_dict()))
            finished.append(wr)
        n_w = samp["weighted_events"]
        if n_w > 0:
            progress.stage("weighted", n_w)
            wr = stack.enter_context(EventWriter(out / WEIGHTED_FILE, rg))
            serial = job * JOB_STRIDE
            drawn = 0
            for x, w in sampler.weighted(rng_w, n_w):
                wr.write(layout.batch(serial, w, proc.momenta(x, rng_w)))
                serial += x.shape[0]
                drawn += samp["chunk"]
                progress.update(min(drawn, n_w))
            progress.end(f"{wr.rows} events, sum of weights {wr.sum_w:.5e} pb")
            wr.finish(dict(base, created=now(), weighting="weighted",
                           events={"count": wr.rows, "trials": n_w, "sum_weights_pb": wr.sum_w,
                                   "max_weight_pb": wr.max_w}))
            finished.append(wr)
        # the run's files appear together; a file of a kind this run did not make is stale
        for name in (UNWEIGHTED_FILE, WEIGHTED_FILE):
            if all(w.path.name != name for w in finished):
                (out / name).unlink(missing_ok=True)
        files = [w.publish() for w in finished]
    return RunResult(out, xs, stats, files, base)
