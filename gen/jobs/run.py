"""One run or one part of a batch: card -> process -> grid -> unweighted and weighted event files.

`run(cfg)` is the whole path behind `gen run`: it adapts a grid (or takes the one it is given),
then samples it. A batch part (`job` = I of `jobs` = N) samples its share of the card's events
from a shared grid without re-adapting, with random streams derived from the card's seed and I
(`grid.streams`), and writes files named with its index.

A run folder. Each run (or part) holds a lock while it writes (`.gen-lock-run`, or
`.gen-lock-partIIIII`), so a second run into the same place is refused, not mixed in. Its event
files are written under hidden temporary names and renamed into place only once every pass has
succeeded; its summary (`summary.json`, or `summary-partIIIII.json`, with a human-readable
`.txt` twin) is written last and lists the files with the run's id: it is the run's manifest,
and `info`, `validate`, `plot` and `merge` take a folder's files only from such summaries. A run
into a folder that holds another run's files is refused unless `replace` (`gen run --force`);
then the earlier run's files, its summary and its validation and plot folders are removed, and
nothing else. A rerun of a complete part is skipped.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
import shutil
import time
import uuid
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..card import CARD_SCHEMA_VERSION, RunConfig
from ..errors import GenWarning, OutputError, UserError
from ..memory import tune_allocator
from ..files import FolderLock, LockHeld, stale_temporaries, write_atomically
from ..physics.constants import hbar_gev_s
from ..processes import Process, build_process, guarded
from ..progress import Progress
from ..records.events import JOB_STRIDE, RecordBuilder
from ..records.schema import schema_doc
from ..records.store import EventWriter, folder_contents, manifest_name, read_manifests, read_run, write_manifest
from ..sampling.grid import ConsistencyWarning, Grid, make_grid, physics_digest, streams
from ..sampling.sampler import CrossSection, MapSampler, UnweightingStats
from ..version import __version__

__all__ = ["run", "RunResult", "ConsistencyWarning", "LowEfficiencyWarning", "UNWEIGHTED_FILE", "WEIGHTED_FILE",
           "default_folder", "part_name", "part_sizes", "part_complete", "CARD_COPY", "claim_folder",
           "refuse_occupied", "clear_earlier_run", "write_summary", "summary_text"]

UNWEIGHTED_FILE = "unweighted.parquet"
WEIGHTED_FILE = "weighted.parquet"
#: the card as given, copied into every run folder
CARD_COPY = "card.toml"
#: below this unweighting efficiency a run warns and says what helps
LOW_EFFICIENCY = 0.01
#: share of the total carried by weights above w_max: warn above the first, refuse above the second
OVERFLOW_WARN, OVERFLOW_REFUSE = 0.01, 0.10
#: a sampling estimate this many standard deviations and this far (relative) from the grid's is refused
MISMATCH_PULL, MISMATCH_REL = 10.0, 0.01


class LowEfficiencyWarning(GenWarning):
    """Most trials of the unweighting pass were rejected."""


class OverflowWarning(GenWarning):
    """Some weights exceeded the maximum weight used for unweighting."""


class SamplingError(UserError):
    """The sample contradicts the grid it was drawn from; nothing was published."""


@dataclass
class RunResult:
    folder: Path
    cross_section: CrossSection
    unweighting: UnweightingStats | None
    files: list[Path]
    record: dict
    skipped: bool = False
    summary: dict = field(default_factory=dict)


def default_folder(cfg: RunConfig) -> Path:
    if "folder" in cfg.output:
        return Path(cfg.output["folder"]).expanduser()
    return Path("gen-runs") / Path(cfg.source).stem


def part_name(kind: str, job: int | None) -> str:
    """File name of a run's ('unweighted' or 'weighted') file; parts carry their index."""
    return f"{kind}.parquet" if job is None else f"{kind}-part{job:05d}.parquet"


def part_sizes(total: int, jobs: int) -> list[int]:
    """Events of each part: the card's total split as evenly as possible, earlier parts first."""
    base, extra = divmod(total, jobs)
    return [base + (1 if i < extra else 0) for i in range(jobs)]


def _record(proc: Process, grid: Grid, job: int | None, jobs: int, run_id: str) -> dict:
    cfg = proc.cfg
    xs = grid.cross_section
    sections = proc.record_sections()
    sections["parameters"]["couplings"] = proc.couplings()
    return {
        "schema_version": schema_doc()["version"],
        "program": f"gen {__version__}",
        "run_id": run_id,
        "card": {"path": cfg.source, "text": cfg.text, "digest": physics_digest(cfg), "sampling": dict(cfg.sampling),
                 "schema_version": CARD_SCHEMA_VERSION},
        **sections,
        "measure": measure_section(proc, xs),
        "cross_section": {"total": xs.as_dict(), "method": "vegas adaptation of the grid"},
        "grid": _grid_section(proc, grid),
        "seed": cfg.sampling["seed"],
        "job": {"index": 0 if job is None else job, "count": jobs},
        "integration": dict(cfg.integration),
    }


def _grid_section(proc: Process, grid: Grid) -> dict:
    """The grid's checksum and maximum weight, and for a multi-channel phase space each channel's
    adapted weight and share of the cross-section (worked out once per process and grid)."""
    out = {"checksum": grid.checksum, "max_weight": grid.max_weight}
    cached = getattr(proc, "_channel_report", None)
    if cached is None or cached[0] != grid.checksum:
        cached = (grid.checksum, proc.channel_report(grid.nodes))
        proc._channel_report = cached
    if cached[1]:
        out["channels"] = cached[1]
    return out


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
    """True when part `job` of `jobs` is in `folder`, finished (its summary lists its files) and
    made from this card and grid."""
    listed = {p.name for p in folder_contents(folder).files} if folder.is_dir() else set()
    for kind, total in (("unweighted", cfg.sampling["events"]), ("weighted", cfg.sampling["weighted_events"])):
        name = part_name(kind, job)
        if total == 0:
            continue
        if name not in listed:
            return False
        try:
            rec = read_run(folder / name)
        except OutputError:
            return False
        if (rec["card"].get("digest") != physics_digest(cfg) or rec.get("grid", {}).get("checksum") != grid.checksum
                or rec["job"] != {"index": job, "count": jobs} or rec["card"].get("sampling") != cfg.sampling):
            return False
    return True


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


def _earlier_run(out: Path, job: int | None) -> list[Path]:
    """What an earlier run left in this unit's place: its event files (finished or not) and summary."""
    names = [part_name(kind, job) for kind in ("unweighted", "weighted")]
    base = manifest_name(job)
    names += [base, base[:-5] + ".txt"]
    return [out / n for n in names if (out / n).exists()]


def _occupant(out: Path, job: int | None) -> list[Path]:
    """What replacing needs --force for: a finished earlier run of this unit (its summary and the
    files it lists), and files of these names that are not gen's. The files of an interrupted run
    (no summary lists them) are not an occupant: a rerun replaces them."""
    summary = out / manifest_name(job)
    listed: set[str] = set()
    if summary.exists():
        found = [doc for path, doc in read_manifests(out) if path.name == summary.name]
        listed = set(found[0]["files"]) if found else set()
    occupant = [p for p in _earlier_run(out, job) if p.suffix != ".parquet" or p.name in listed]
    for path in _earlier_run(out, job):
        if path.suffix == ".parquet" and path.name not in listed:
            try:
                read_run(path)
            except OutputError:
                occupant.append(path)  # not a gen event file: never replaced without being asked
    return occupant if any(p.suffix == ".parquet" or p.name == summary.name for p in occupant) else []


def clear_earlier_run(out: Path, job: int | None, keep: set[str]) -> None:
    """Remove the earlier run's files of this unit that this run does not replace by name, and for
    a whole run its validation and plot folders (their outputs described the earlier files)."""
    for path in _earlier_run(out, job):
        if path.name not in keep:
            path.unlink(missing_ok=True)
    if job is None:
        for sub in ("validation", "plots"):
            if (out / sub).is_dir():
                shutil.rmtree(out / sub, ignore_errors=True)


def run(cfg: RunConfig, folder: str | Path | None = None, progress: Progress | None = None,
        grid: Grid | None = None, job: int | None = None, jobs: int = 1, process: Process | None = None,
        replace: bool = False) -> RunResult:
    """Integrate the card's process (or take `grid`) and write its event files and summary.

    With `job` given, write part `job` of `jobs` from the grid, skipping it when it is already
    complete in the folder. `process` is the card's process when the caller has built it already.
    `replace` allows replacing another run's files in the folder (they are refused otherwise).
    """
    t_start = time.monotonic()
    progress = progress or Progress(enabled=False)
    out = Path(folder).expanduser() if folder is not None else default_folder(cfg)
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: exists and is not a folder; choose another output folder (gen run -o DIR)")
    proc = process or build_process(cfg)
    if grid is not None:
        grid.check_card(cfg, cfg.source)
        grid.check_process(proc, cfg.source)
    with claim_folder(out, job):
        if job is not None and grid is not None and part_complete(out, cfg, grid, job, jobs):
            return RunResult(out, grid.cross_section, None, [], {}, skipped=True)
        refuse_occupied(out, job, replace)
        if grid is None:
            grid = make_grid(proc, cfg, progress)
        t_adapted = time.monotonic()
        return _sample(cfg, proc, grid, out, job, jobs, progress, t_start, t_adapted)


@contextlib.contextmanager
def claim_folder(out: Path, job: int | None):
    """Hold the lock of one unit of a folder (a run, or part `job`) while it is written."""
    try:
        lock = FolderLock(out, "run" if job is None else f"part{job:05d}").acquire()
    except LockHeld as exc:
        raise OutputError(str(exc)) from None
    except OSError as exc:
        raise OutputError(f"{out}: cannot write the event files into this folder: {exc.strerror or exc}") from None
    try:
        yield lock
    except BaseException:
        lock.release()
        lock.remove_created()  # a run that failed leaves no folder it made
        raise
    lock.release()


def refuse_occupied(out: Path, job: int | None, replace: bool) -> None:
    """Refuse to write a unit whose place holds a finished earlier run, unless `replace`."""
    occupant = _occupant(out, job)
    if occupant and not replace:
        raise OutputError(_occupied_message(out, occupant, job))


def _occupied_message(out: Path, earlier: list[Path], job: int | None) -> str:
    what = "part" if job is not None else "run"
    described = ""
    for path in earlier:
        if path.suffix == ".parquet":
            try:
                rec = read_run(path)
                described = f" (card {rec['card']['path']}, seed {rec['seed']}, created {rec.get('created', '?')})"
            except OutputError:
                described = " (unreadable)"
            break
    return (f"{out}: holds the files of an earlier {what}{described}: "
            f"{', '.join(p.name for p in earlier)}; give --force to replace them, or choose another folder with -o")


def check_unweighting(stats: UnweightingStats, xs: CrossSection, max_weight: float, unit: str) -> None:
    """Refuse a sample the grid did not describe: weights far above its maximum weight, or a mean
    weight that contradicts its cross-section (an edited grid file, or an adaptation or
    calibration that missed part of the phase space); warn when the excess is small but visible."""
    share = stats.overflow_share
    advice = ("the grid file was edited, or the calibration missed a peak of the weights: adapt again with "
              "more sampling.calibration_points")
    if share > OVERFLOW_REFUSE:
        raise SamplingError(f"{stats.overflow_events} of {stats.trials} trials weigh more than the grid's maximum "
                            f"weight {max_weight:.6g}, carrying {share:.1%} of the total: the events would not be "
                            f"unweighted; {advice}")
    if share > OVERFLOW_WARN:
        warnings.warn(f"{stats.overflow_events} trials weigh more than the maximum weight {max_weight:.6g}, "
                      f"carrying {share:.2%} of the total; their events keep weight 1, so distributions where they "
                      f"fall are low by up to that share. {advice}", OverflowWarning, stacklevel=3)
    est, err = stats.estimate
    sigma = math.hypot(err, xs.error)
    if sigma > 0 and abs(est - xs.value) > MISMATCH_PULL * sigma and abs(est - xs.value) > MISMATCH_REL * abs(xs.value):
        raise SamplingError(f"the sampled weights give {est:.6g} ± {err:.2g} {unit} but the grid's adaptation "
                            f"{xs.value:.6g} ± {xs.error:.2g} {unit}, {abs(est - xs.value) / sigma:.0f} standard "
                            "deviations apart: the grid file was edited, or vegas missed part of the phase space; "
                            "adapt again with more integration.points_per_iteration")


def _sample(cfg, proc, grid, out, job, jobs, progress, t_start, t_adapted) -> RunResult:
    xs = grid.cross_section
    samp = cfg.sampling
    index = 0 if job is None else job
    rng_unw, rng_w = streams(samp["seed"], index)
    sampler = MapSampler(guarded(proc), grid.adaptive_map(), proc.ndim, samp["chunk"])
    builder = RecordBuilder(proc.particle_layout(), proc.measure.unit)
    labels = builder.layout.subprocesses
    unit = proc.measure.unit
    run_id = uuid.uuid4().hex[:16]
    base = _record(proc, grid, job, jobs, run_id)
    names = {kind: part_name(kind, job) for kind in ("unweighted", "weighted")}
    manifest = manifest_name(job)
    for name in [*names.values(), manifest, manifest[:-5] + ".txt", CARD_COPY]:
        for tmp in stale_temporaries(out, name):  # leftovers of a killed earlier attempt
            tmp.unlink(missing_ok=True)
    stats = None
    timing = {"adaptation_s": t_adapted - t_start}
    rg = cfg.output["row_group_events"]
    now = lambda: _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")  # noqa: E731
    finished: list[EventWriter] = []
    n_unw = part_sizes(samp["events"], jobs)[index]
    n_w = part_sizes(samp["weighted_events"], jobs)[index]
    tune_allocator(n_unw + n_w)  # resident memory flat in long runs (see gen.memory)
    with contextlib.ExitStack() as stack:  # any failure removes every unpublished file
        if n_unw > 0:
            t0 = time.monotonic()
            stats = UnweightingStats(max_weight=grid.max_weight)
            weight = xs.value / samp["events"]
            progress.stage("unweight", n_unw)
            wr = stack.enter_context(EventWriter(out / names["unweighted"], rg, builder.schema,
                                                       cfg.output["compression"]))
            chunks = ((x, np.full(x.shape[0], weight)) for x in sampler.unweighted(rng_unw, n_unw, stats))
            counts, sums = _stream(wr, builder, proc, rng_unw, chunks, index * JOB_STRIDE,
                                   lambda n: progress.update(stats.accepted, f"efficiency {stats.efficiency:.1%}"))
            progress.end(f"efficiency {stats.efficiency:.1%}, {stats.overflow_events} above w_max")
            xs_rec = dict(base["cross_section"], by_subprocess=by_subprocess(labels, counts, xs.value))
            wr.finish(dict(base, created=now(), weighting="unweighted", cross_section=xs_rec,
                           events={"count": wr.rows, "sum_weights": wr.sum_w, "max_weight": wr.max_w},
                           unweighting=stats.as_dict()))
            check_unweighting(stats, xs, grid.max_weight, unit)  # before anything is published
            finished.append(wr)
            timing["unweighted_s"] = time.monotonic() - t0
            if stats.efficiency < LOW_EFFICIENCY:
                warnings.warn(f"the unweighting efficiency is {stats.efficiency:.2%}: {stats.trials} trials for "
                              f"{stats.accepted} events. Weighted events (sampling.weighted_events) need no rejection; "
                              "a better adapted grid (more integration.warmup_iterations or points_per_iteration) "
                              "raises the efficiency", LowEfficiencyWarning, stacklevel=2)
        if n_w > 0:
            t0 = time.monotonic()
            progress.stage("weighted", n_w)
            wr = stack.enter_context(EventWriter(out / names["weighted"], rg, builder.schema,
                                                       cfg.output["compression"]))
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
            timing["weighted_s"] = time.monotonic() - t0
        # this run's files replace the earlier run's of the same names; the earlier run's other files
        # (and its summary, which no longer describes this folder) go next; the new summary comes last
        files = [w.publish() for w in finished]
        clear_earlier_run(out, job, keep={w.path.name for w in finished})
    timing["total_s"] = time.monotonic() - t_start
    summary = _summary(cfg, proc, grid, base, stats, finished, timing, job, jobs)
    write_summary(out, job, summary, cfg.text)
    return RunResult(out, xs, stats, files, base, summary=summary)


def _summary(cfg, proc, grid, base, stats, finished, timing, job, jobs) -> dict:
    """The run's summary and manifest: the files it wrote with their run id, and its figures."""
    xs = grid.cross_section
    events = sum(w.rows for w in finished)
    doc = {
        "run_id": base["run_id"], "program": base["program"], "kind": "run" if job is None else "part",
        "job": {"index": 0 if job is None else job, "count": jobs}, "card": cfg.source, "process": cfg.label,
        "model": cfg.model, "sqrt_s_GeV": base["collider"]["sqrt_s_GeV"], "measure": base["measure"],
        "result": xs.as_dict(), "grid": {"checksum": grid.checksum, "max_weight": grid.max_weight},
        "couplings": base["parameters"]["couplings"], "seed": cfg.sampling["seed"],
        "files": {w.path.name: {"events": w.rows, "bytes": w.path.stat().st_size} for w in finished},
        "timing": {k: round(v, 3) for k, v in timing.items()},
        "events_per_s": events / timing["total_s"] if timing["total_s"] > 0 else None,
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
    }
    if stats is not None:
        est, err = stats.estimate
        doc["unweighting"] = {"events": stats.accepted, "trials": stats.trials, "efficiency": stats.efficiency,
                              "overflow_events": stats.overflow_events, "overflow_share": stats.overflow_share,
                              "sampling_estimate": est, "sampling_error": err}
    return doc


def summary_text(doc: dict, iterations: str = "") -> str:
    """The human-readable twin of a summary."""
    m = doc["measure"]
    res = doc["result"]
    symbol = "Γ" if m["unit"] == "GeV" else "σ"
    lines = [f"gen run summary  ·  {doc['process']}  [{doc['model']}]",
             f"card        {doc['card']}",
             f"{'at rest' if m['unit'] == 'GeV' else 'sqrt(s)':<11} {doc['sqrt_s_GeV']:.6g} GeV",
             f"{symbol:<11} {res['value']:.6g} ± {res['error']:.3g} {m['unit']}   chi2/dof {res['chi2_per_dof']:.2f}, "
             f"Q {res['q']:.2f}"]
    if "lifetime_s" in m:
        lines.append(f"lifetime    {m['lifetime_s']:.6g} ± {m['lifetime_error_s']:.2g} s")
    if iterations:
        lines += ["iterations", iterations]
    if "unweighting" in doc:
        u = doc["unweighting"]
        lines.append(f"unweighting {u['events']} events from {u['trials']} trials, efficiency {u['efficiency']:.2%}, "
                     f"{u['overflow_events']} above w_max ({u['overflow_share']:.2%} of the total)")
    if doc.get("couplings"):
        lines.append("couplings   " + ", ".join(f"{k} = {v:.6g}" for k, v in doc["couplings"].items()))
    t = doc["timing"]
    lines.append("timing      " + ", ".join(f"{k.removesuffix('_s')} {v:.2f} s" for k, v in t.items())
                 + (f"; {doc['events_per_s']:.4g} events/s" if doc.get("events_per_s") else ""))
    lines.append(f"seed        {doc['seed']}, job {doc['job']['index']} of {doc['job']['count']}, run id {doc['run_id']}")
    for name, f in doc["files"].items():
        lines.append(f"file        {name}: {f['events']} events, {f['bytes'] / 1e6:.3g} MB")
    return "\n".join(lines) + "\n"


def write_summary(out: Path, job: int | None, doc: dict, card_text: str) -> None:
    """The card as given (once per folder), the text summary, then the JSON summary: the manifest, last."""
    try:
        card = out / CARD_COPY
        if job is None or not card.exists():
            write_atomically(card, card_text)
        name = manifest_name(job)
        iterations = "\n".join(f"  {i:>3}  {v:.6e} ± {e:.3e}" for i, (v, e) in enumerate(
            [(it["value"], it["error"]) for it in doc["result"]["iterations"]], 1))
        write_atomically(out / (name[:-5] + ".txt"), summary_text(doc, iterations))
    except OSError as exc:
        raise OutputError(f"{out}: cannot write the run summary: {exc.strerror or exc}") from None
    write_manifest(out, name, doc)

