"""One run or one part of a batch: card -> process -> grid -> unweighted and weighted event files.

`run(cfg)` is the whole path behind `gen run`: it adapts a grid (or takes the one it is given),
then samples it. A batch part (`job` = I of `jobs` = N) samples its share of the card's events
from a shared grid without re-adapting, with random streams derived from the card's seed and I
(`grid.streams`), and writes files named with its index. Files of a run appear together, only
once every pass has succeeded.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..card import CARD_SCHEMA_VERSION, RunConfig
from ..errors import OutputError
from ..files import stale_temporaries
from ..physics.constants import hbar_gev_s
from ..processes import Process, build_process
from ..progress import Progress
from ..records.events import JOB_STRIDE, RecordBuilder
from ..records.schema import schema_doc
from ..records.store import EventWriter, read_run
from ..sampling.grid import ConsistencyWarning, Grid, make_grid, physics_digest, streams
from ..sampling.sampler import CrossSection, MapSampler, UnweightingStats
from ..version import __version__

__all__ = ["run", "RunResult", "ConsistencyWarning", "UNWEIGHTED_FILE", "WEIGHTED_FILE", "default_folder",
           "part_name", "part_sizes", "part_complete"]

UNWEIGHTED_FILE = "unweighted.parquet"
WEIGHTED_FILE = "weighted.parquet"


@dataclass
class RunResult:
    folder: Path
    cross_section: CrossSection
    unweighting: UnweightingStats | None
    files: list[Path]
    record: dict
    skipped: bool = False


def default_folder(cfg: RunConfig) -> Path:
    if "folder" in cfg.output:
        return Path(cfg.output["folder"])
    return Path("gen-runs") / Path(cfg.source).stem


def part_name(kind: str, job: int | None) -> str:
    """File name of a run's ('unweighted' or 'weighted') file; parts carry their index."""
    return f"{kind}.parquet" if job is None else f"{kind}-part{job:05d}.parquet"


def part_sizes(total: int, jobs: int) -> list[int]:
    """Events of each part: the card's total split as evenly as possible, earlier parts first."""
    base, extra = divmod(total, jobs)
    return [base + (1 if i < extra else 0) for i in range(jobs)]


def _record(proc: Process, grid: Grid, job: int | None, jobs: int) -> dict:
    cfg = proc.cfg
    xs = grid.cross_section
    sections = proc.record_sections()
    sections["parameters"]["couplings"] = proc.couplings()
    return {
        "schema_version": schema_doc()["version"],
        "program": f"gen {__version__}",
        "card": {"path": cfg.source, "text": cfg.text, "digest": physics_digest(cfg), "sampling": dict(cfg.sampling),
                 "schema_version": CARD_SCHEMA_VERSION},
        **sections,
        "measure": measure_section(proc, xs),
        "cross_section": {"total": xs.as_dict(), "method": "vegas adaptation of the grid"},
        "grid": {"checksum": grid.checksum, "max_weight": grid.max_weight},
        "seed": cfg.sampling["seed"],
        "job": {"index": 0 if job is None else job, "count": jobs},
        "integration": dict(cfg.integration),
    }


def measure_section(proc: Process, xs: CrossSection) -> dict:
    """What the integral is: a cross-section in pb, or for a particle decaying at rest its partial
    width in GeV (then with the lifetime hbar / Gamma it implies)."""
    m = {"quantity": proc.measure.quantity, "unit": proc.measure.unit}
    if proc.measure.unit == "GeV" and xs.value > 0:
        m.update(lifetime_s(xs.value, xs.error))
    return m


def lifetime_s(width: float, error: float) -> dict:
    """The lifetime hbar / Gamma (s) of a partial width Gamma +- error (GeV) and its error."""
    life = hbar_gev_s() / width
    return {"lifetime_s": life, "lifetime_error_s": life * error / width}


def by_subprocess(labels, counts: np.ndarray, total: float, sums: np.ndarray | None = None) -> dict:
    """The integral per subprocess: for unweighted events (no sums) the total times the share of
    events, with its binomial error; for weighted events the sum of the subprocess's weights."""
    n = counts.sum()
    out = {}
    for i, (label, k) in enumerate(zip(labels, counts)):
        if k == 0:
            continue
        if sums is None:
            share = k / n
            out[label] = {"value": total * share, "error": total * math.sqrt(share * (1 - share) / n), "events": int(k)}
        else:
            out[label] = {"value": float(sums[i]), "events": int(k)}
    return out


def part_complete(folder: Path, cfg: RunConfig, grid: Grid, job: int, jobs: int) -> bool:
    """True when part `job` of `jobs` is in `folder`, complete and made from this card and grid."""
    for kind, total in (("unweighted", cfg.sampling["events"]), ("weighted", cfg.sampling["weighted_events"])):
        path = folder / part_name(kind, job)
        if total == 0:
            continue
        if not path.exists():
            return False
        try:
            rec = read_run(path)
        except OutputError:
            return False
        if (rec.get("card", {}).get("digest") != physics_digest(cfg) or rec.get("grid", {}).get("checksum") != grid.checksum
                or rec.get("job") != {"index": job, "count": jobs} or rec.get("card", {}).get("sampling") != cfg.sampling):
            return False
    return True


def _remove_stale_partials(folder: Path, names: list[str]) -> None:
    """Remove temporary files of these names left by processes that no longer run (a killed job)."""
    for name in names:
        for tmp in stale_temporaries(folder, name):
            tmp.unlink(missing_ok=True)


def _stream(writer: EventWriter, builder: RecordBuilder, proc: Process, rng, chunks, first_id: int, on_chunk):
    """Write (points, weights) chunks as events with consecutive ids from first_id; returns the
    number of events and the sum of weights per subprocess."""
    serial = first_id
    n_sub = len(builder.layout.subprocesses)
    counts, sums = np.zeros(n_sub, np.int64), np.zeros(n_sub)
    for x, w in chunks:
        data = proc.events(x, rng)
        writer.write(builder.batch(serial, w, data))
        if data.subprocess is None:
            counts[0] += w.size
            sums[0] += w.sum()
        else:
            counts += np.bincount(data.subprocess, minlength=n_sub)
            sums += np.bincount(data.subprocess, weights=w, minlength=n_sub)
        serial += x.shape[0]
        on_chunk(x.shape[0])
    return counts, sums


def run(cfg: RunConfig, folder: str | Path | None = None, progress: Progress | None = None,
        grid: Grid | None = None, job: int | None = None, jobs: int = 1, process: Process | None = None) -> RunResult:
    """Integrate the card's process (or take `grid`) and write its event files.

    With `job` given, write part `job` of `jobs` from the grid, skipping it when it is already
    complete in the folder. `process` is the card's process when the caller has built it already.
    """
    progress = progress or Progress(enabled=False)
    out = Path(folder) if folder is not None else default_folder(cfg)
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: exists and is not a folder; choose another output folder (gen run -o DIR)")
    proc = process or build_process(cfg)
    if grid is None:
        grid = make_grid(proc, cfg, progress)
    else:
        grid.check_card(cfg, cfg.source)
        grid.check_process(proc, cfg.source)
    xs = grid.cross_section
    if job is not None and part_complete(out, cfg, grid, job, jobs):
        return RunResult(out, xs, None, [], {}, skipped=True)
    samp = cfg.sampling
    index = 0 if job is None else job
    rng_unw, rng_w = streams(samp["seed"], index)
    sampler = MapSampler(proc.weights, grid.adaptive_map(), proc.ndim, samp["chunk"])
    builder = RecordBuilder(proc.particle_layout(), proc.measure.unit)
    labels = builder.layout.subprocesses
    unit = proc.measure.unit
    base = _record(proc, grid, job, jobs)
    names = {kind: part_name(kind, job) for kind in ("unweighted", "weighted")}
    if out.is_dir():
        _remove_stale_partials(out, list(names.values()))
    stats = None
    rg = cfg.output["row_group_events"]
    now = lambda: _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")  # noqa: E731
    finished: list[EventWriter] = []
    n_unw = part_sizes(samp["events"], jobs)[index]
    n_w = part_sizes(samp["weighted_events"], jobs)[index]
    with contextlib.ExitStack() as stack:  # any failure removes every unpublished file
        if n_unw > 0:
            stats = UnweightingStats(max_weight=grid.max_weight)
            weight = xs.value / samp["events"]
            progress.stage("unweight", n_unw)
            wr = stack.enter_context(EventWriter(out / names["unweighted"], rg, builder.schema))
            chunks = ((x, np.full(x.shape[0], weight)) for x in sampler.unweighted(rng_unw, n_unw, stats))
            counts, sums = _stream(wr, builder, proc, rng_unw, chunks, index * JOB_STRIDE,
                                   lambda n: progress.update(stats.accepted, f"efficiency {stats.efficiency:.1%}"))
            progress.end(f"efficiency {stats.efficiency:.1%}, {stats.overflow_events} above w_max")
            xs_rec = dict(base["cross_section"], by_subprocess=by_subprocess(labels, counts, xs.value))
            wr.finish(dict(base, created=now(), weighting="unweighted", cross_section=xs_rec,
                           events={"count": wr.rows, "sum_weights": wr.sum_w, "max_weight": wr.max_w},
                           unweighting=stats.as_dict()))
            finished.append(wr)
        if n_w > 0:
            progress.stage("weighted", n_w)
            wr = stack.enter_context(EventWriter(out / names["weighted"], rg, builder.schema))
            drawn = [0]

            def step(n):
                drawn[0] += samp["chunk"]
                progress.update(min(drawn[0], n_w))

            counts, sums = _stream(wr, builder, proc, rng_w, sampler.weighted(rng_w, n_w), index * JOB_STRIDE, step)
            progress.end(f"{wr.rows} events, sum of weights {wr.sum_w:.5e} {unit}")
            xs_rec = dict(base["cross_section"], by_subprocess=by_subprocess(labels, counts, xs.value, sums))
            wr.finish(dict(base, created=now(), weighting="weighted", cross_section=xs_rec,
                           events={"count": wr.rows, "trials": n_w, "sum_weights": wr.sum_w,
                                   "max_weight": wr.max_w}))
            finished.append(wr)
        # the run's files appear together; a file of a kind this run did not make is stale
        for name in names.values():
            if all(w.path.name != name for w in finished):
                (out / name).unlink(missing_ok=True)
        files = [w.publish() for w in finished]
    return RunResult(out, xs, stats, files, base)
