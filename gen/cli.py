"""The `gen` command: run, adapt, merge, info, validate, plot, processes.

User errors print one line `gen: error: ...` on stderr and exit with status 2; an unexpected
internal error prints one line with a hint to rerun with `--debug`, which shows the traceback,
and exits with status 3. Only argparse is imported before a command runs, so `gen --help` and
`gen --version` start at once; each command imports what it needs.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import warnings
from pathlib import Path

from .errors import UserError, printable
from .version import __version__

__all__ = ["main", "parser"]


_PB_SCALES = (("b", 1e12), ("mb", 1e9), ("µb", 1e6), ("nb", 1e3), ("pb", 1.0), ("fb", 1e-3), ("ab", 1e-6))


def _fmt_value(value: float, error: float, unit: str) -> str:
    """value ± error unit (relative error), and for a cross-section far from 1 pb the same in the
    unit that makes it readable (0.25614 b for 2.5614e+11 pb)."""
    rel = f"{100 * error / value:.3g}%" if value else "n/a"
    text = f"{value:.6g} ± {error:.3g} {unit}  ({rel})"
    if unit == "pb" and value > 0 and not 1e-1 <= value < 1e4:
        name, scale = next(((n, f) for n, f in _PB_SCALES if value >= 0.1 * f), _PB_SCALES[-1])
        text += f"  = {value / scale:.6g} {name}"
    return text


def _measure_line(rec: dict, value: float, error: float) -> str:
    """'σ ...' for a cross-section; 'Γ ...' with the lifetime for a particle decaying at rest."""
    m = rec["measure"]
    if m["unit"] == "GeV":
        life = f", lifetime {m['lifetime_s']:.6g} s" if "lifetime_s" in m else ""
        return f"  Γ           {_fmt_value(value, error, 'GeV')}{life}"
    return f"  σ           {_fmt_value(value, error, m['unit'])}"


def _couplings_text(model: str, couplings: dict) -> str:
    """alpha = 0.00729735, g_fermi = 1.16638e-05 GeV^-2, ...: each with its unit where it has one."""
    from .physics.matrix import MODELS

    params = MODELS[model].params if model in MODELS else {}
    return ", ".join(f"{k} = {v:.6g}" + (f" {params[k].unit}" if k in params and params[k].unit else "")
                     for k, v in couplings.items())


def _print_warnings(caught) -> None:
    from .errors import GenWarning

    for w in caught:
        if issubclass(w.category, GenWarning):
            print(f"gen: warning: {printable(str(w.message))}", file=sys.stderr)


def _cmd_adapt(args) -> int:
    from .card import load_card
    from .processes import build_process
    from .progress import Progress
    from .sampling.grid import make_grid

    cfg = load_card(args.card).with_overrides(seed=args.seed)
    proc = build_process(cfg)
    progress = Progress(enabled=None if not args.quiet else False)
    grid = make_grid(proc, cfg, progress)
    path = grid.save(args.output)
    if not args.quiet:
        xs, m = grid.cross_section, proc.measure
        print(f"  {m.symbol}           {_fmt_value(xs.value, xs.error, m.unit)}   chi2/dof {xs.chi2_dof:.2f}, Q {xs.q:.2f}")
        print(f"  w_max       {grid.max_weight:.6g} {m.unit} from {cfg.sampling['calibration_points']} calibration points")
        print(f"  wrote       {path}")
    return 0


def _grid_for_parts(cfg, proc, args, folder: Path, progress):
    """The grid of a multi-part run: --grid, else the folder's own grid.json, else adapt one there."""
    from .sampling.grid import Grid, GridError, make_grid

    if args.grid:
        return Grid.load(args.grid), Path(args.grid)
    path = folder / "grid.json"
    if path.exists():
        try:
            grid = Grid.load(path)
            grid.check_card(cfg, cfg.source)
            grid.check_process(proc, cfg.source)
            return grid, path  # resume: the parts already made used this grid
        except GridError:
            pass
    grid = make_grid(proc, cfg, progress)
    return grid, grid.save(path)


def _cmd_run(args) -> int:
    from .card import load_card
    from .jobs.run import default_folder, run
    from .processes import build_process
    from .progress import Progress
    from .sampling.grid import Grid

    overrides = {"events": args.events, "seed": args.seed}
    cfg = load_card(args.card).with_overrides(**overrides, folder=args.output)
    folder = default_folder(cfg)
    show = not args.quiet
    distributed = args.workers is not None or args.scheduler is not None
    if args.job is not None and args.grid is None:
        raise UserError("--job needs --grid: adapt once with `gen adapt CARD -o GRID`, then run each part from it")
    if args.job is not None and distributed:
        raise UserError("--job runs one part here; --workers/--scheduler run all parts: use one or the other")
    jobs = args.jobs if args.jobs is not None else (args.workers if args.workers else 1)
    if args.scheduler and args.jobs is None:
        raise UserError("--scheduler needs --jobs N, the number of parts to make")
    if args.scheduler is not None:
        from .jobs.distributed import check_scheduler_address

        args.scheduler = check_scheduler_address(args.scheduler)
    if jobs < 1 or (args.job is not None and not 0 <= args.job < jobs):
        raise UserError(f"--job must be in 0..{jobs - 1} and --jobs at least 1 (found --job {args.job}, --jobs {jobs})")
    if args.workers is not None and args.workers < 1:
        raise UserError(f"--workers must be at least 1, found {args.workers}")
    proc = build_process(cfg)  # every card and phase-space error comes before anything is printed
    grid = Grid.load(args.grid) if args.grid else None
    if grid is not None:  # a grid for another card or process is refused before the banner too
        grid.check_card(cfg, cfg.source)
        grid.check_process(proc, cfg.source)
    if show:
        print(f"gen {__version__} ▸ {' '.join(p.name for p in cfg.incoming)} → "
              f"{' '.join(p.name for p in cfg.outgoing)}  [{cfg.model}]  card {cfg.source}")
    progress = Progress(enabled=None if show else False)
    if args.job is None and jobs == 1 and not distributed and grid is None:
        res = run(cfg, progress=progress, process=proc, replace=args.force)
        if show:
            _report_run(res)
        return 0
    if args.job is not None:
        res = run(cfg, progress=progress, grid=grid, job=args.job, jobs=jobs, process=proc, replace=args.force)
        if show:
            if res.skipped:
                print(f"  part {args.job} of {jobs} is already complete in {folder}; skipped")
            else:
                _report_run(res)
        return 0
    grid, grid_path = _grid_for_parts(cfg, proc, args, folder, progress)
    if distributed:
        from .jobs.distributed import run_parts_on_dask

        done = run_parts_on_dask(cfg, grid_path, jobs, folder, workers=args.workers, scheduler=args.scheduler,
                                 overrides=overrides, progress=progress, replace=args.force)
        skipped = sum(d["skipped"] for d in done)
    else:
        skipped = 0
        for j in range(jobs):
            res = run(cfg, progress=progress, grid=grid, job=j, jobs=jobs, process=proc, replace=args.force)
            skipped += res.skipped
    if show:
        print(f"  parts       {jobs} in {folder} ({skipped} already complete, skipped); grid {grid_path}")
        _report_combined(folder)
    return 0


def _report_run(res) -> None:
    xs = res.cross_section
    rec = res.record
    col = rec["collider"]
    unit = rec["measure"]["unit"]
    print(f"  {'at rest' if col.get('at_rest') else 'sqrt(s)':<11} {col['sqrt_s_GeV']:.6g} GeV")
    print(f"{_measure_line(rec, xs.value, xs.error)}   chi2/dof {xs.chi2_dof:.2f}, Q {xs.q:.2f}")
    st = res.unweighting
    if st is not None:
        est, err = st.estimate
        print(f"  unweighted  {st.accepted} events, efficiency {st.efficiency:.1%}, "
              f"{st.overflow_events} above w_max carrying {st.overflow_share:.2%} of the total "
              f"(sampling pass: {est:.6g} ± {err:.2g} {unit})")
    _print_channels(rec)
    if rec["parameters"].get("couplings"):
        print("  couplings   " + _couplings_text(rec["process"]["model"], rec["parameters"]["couplings"]))
    for f in res.files:
        print(f"  wrote       {f}")
    if res.summary:
        t = res.summary["timing"]
        rate = res.summary.get("events_per_s")
        job = res.summary["job"]["index"]
        name = "summary.txt" if res.summary["kind"] == "run" else f"summary-part{job:05d}.txt"
        print(f"  summary     {res.folder / name}")
        print(f"  time        {t['total_s']:.2f} s in all (adaptation {t['adaptation_s']:.2f} s)"
              + (f", {rate:.4g} events/s" if rate else ""))


#: channels listed by name in the summaries; the rest are counted
CHANNELS_SHOWN = 6


def _print_channels(rec) -> None:
    """The multi-channel phase space of a run: each channel's adapted weight and its share of sigma."""
    chans = rec.get("grid", {}).get("channels")
    if not chans:
        return
    print(f"  channels    {len(chans)}, adapted weight / share of {rec['measure']['quantity']} covered:")
    top = sorted(chans, key=lambda c: -c["covers"])
    for c in top[:CHANNELS_SHOWN]:
        print(f"    {c['weight']:6.1%} / {c['covers']:6.1%}  {c['name']}")
    if len(top) > CHANNELS_SHOWN:
        rest = top[CHANNELS_SHOWN:]
        print(f"    {sum(c['weight'] for c in rest):6.1%} / {sum(c['covers'] for c in rest):6.1%}  "
              f"{len(rest)} more")


def _report_combined(folder) -> None:
    from .jobs.batch import check_parts, collect_parts, combine

    parts = collect_parts([folder])
    problems = check_parts(parts)
    for p in problems:
        print(f"  ! {p}")
    if "unweighted" in parts and not problems:
        c = combine(parts["unweighted"])
        unit = parts["unweighted"][0].record["measure"]["unit"]
        print(f"  combined    {_fmt_value(c['value'], c['error'], unit)} from {c['parts']} parts "
              f"(grid {c['adaptation']['value']:.6g} ± {c['adaptation']['error']:.2g}, "
              f"sampling {c['sampling']['value']:.6g} ± {c['sampling']['error']:.2g} {unit})")
        print(f"  unweighted  {c['events']} events, efficiency {c['efficiency']:.1%}")


def _cmd_merge(args) -> int:
    from .jobs.batch import merge
    from .progress import Progress

    files, combined = merge(args.parts, args.output, Progress(enabled=None if not args.quiet else False),
                            replace=args.force)
    if not args.quiet:
        if combined:
            unit = combined.get("unit", "pb")
            print(f"  combined    {_fmt_value(combined['value'], combined['error'], unit)} from "
                  f"{combined['parts']} parts, {combined['events']} unweighted events")
        for f in files:
            print(f"  wrote       {f}")
    return 0


def _summarize(path: Path) -> dict:
    from .records.store import read_run

    rec = read_run(path)
    return {"path": str(path), "weighting": rec["weighting"], "events": rec["events"],
            "cross_section": rec["cross_section"], "process": rec["process"], "collider": rec["collider"],
            "parameters": rec.get("parameters", {}), "unweighting": rec.get("unweighting"), "seed": rec["seed"],
            "job": rec["job"], "schema_version": rec["schema_version"], "program": rec.get("program", "?"),
            "created": rec.get("created", "?"), "measure": rec["measure"], "grid": rec.get("grid", {}),
            **({"decays": rec["decays"]} if "decays" in rec else {})}


def _cmd_info(args) -> int:
    from .jobs.batch import check_parts, collect_parts, combine
    from .records.store import event_files

    infos = [_summarize(f) for f in event_files(args.path)]
    parts = [i for i in infos if i["job"]["count"] > 1 and i["job"]["index"] is not None]
    combined = None
    problems: list[str] = []
    if parts:
        groups = collect_parts([args.path])
        problems = check_parts(groups)
        if "unweighted" in groups and not problems:
            combined = combine(groups["unweighted"])
    if args.json:
        json.dump({"files": infos, "combined": combined, "problems": problems}, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    if parts:
        unit = parts[0]["measure"]["unit"]
        print(f"{args.path}: {len(parts)} part files")
        for p in problems:
            print(f"  ! {p}")
        if combined:
            print(f"  combined    {_fmt_value(combined['value'], combined['error'], unit)} from "
                  f"{combined['parts']} parts (not merged; `gen merge` writes the sample)")
            print(f"  unweighted  {combined['events']} events, efficiency {combined['efficiency']:.1%}")
        for info in parts:
            print(f"  part {info['job']['index']:>5} of {info['job']['count']}  {info['weighting']:<10} "
                  f"{info['events']['count']:>9} events  {Path(info['path']).name}")
        infos = [i for i in infos if i not in parts]
    for info in infos:
        _print_info(info)
    return 0


def _print_info(info: dict) -> None:
    xs = info["cross_section"]["total"]
    proc = info["process"]
    unit = info["measure"]["unit"]
    print(f"{info['path']}  ({info['weighting']}, schema {info['schema_version']}, {info['program']})")
    if "subprocesses" in proc:
        shared = (f", {proc['evaluations_per_point']} distinct |M|^2 evaluations per point"
                  if "evaluations_per_point" in proc else "")
        print(f"  process     {proc['label']}  [{proc['model']}], {len(proc['subprocesses'])} subprocesses{shared}")
    else:
        print(f"  process     {proc['label']}  [{proc['model']}], symmetry factor {proc.get('symmetry_factor', 1):g}")
    col = info["collider"]
    print(f"  {'at rest' if col.get('at_rest') else 'sqrt(s)':<11} {col['sqrt_s_GeV']:.6g} GeV")
    for st in info.get("decays", {}).get("chain", []):
        print(f"  decay       {st['particle']} -> {' '.join(st['into'])}, BR {st['branching_ratio']:.5g} "
              f"({st['branching_ratio_source']}), mass {st['mass_GeV']:.6g} ± {st['window_widths']:g} x "
              f"{st['width_GeV']:.4g} GeV")
    if "parton_densities" in col:
        dens, scales = col["parton_densities"], col["scales"]
        print(f"  partons     {dens['set']} member {dens['member']}, alpha_s {col['alpha_s']}; scales "
              f"renormalization {scales['renormalization']}, factorization {scales['factorization']}"
              + (f", times {scales['factor']:g}" if scales["factor"] != 1 else ""))
        top = sorted(info["cross_section"].get("by_subprocess", {}).items(), key=lambda kv: -kv[1]["value"])[:5]
        for label, v in top:
            print(f"    {label:<24} {v['value']:.5g} {unit}  ({v['events']} events)")
    print(_measure_line(info, xs["value"], xs["error"]))
    ev = info["events"]
    print(f"  events      {ev['count']}, sum of weights {ev['sum_weights']:.6g} {unit}, "
          f"largest weight {ev.get('max_weight', 0.0):.4g} {unit}")
    if info["unweighting"]:
        u = info["unweighting"]
        print(f"  unweighting efficiency {u['efficiency']:.1%}, {u['overflow_events']} above w_max "
              f"({u['overflow_share']:.2%} of the total)")
    _print_channels(info)
    if info["parameters"].get("couplings"):
        print("  couplings   " + _couplings_text(proc["model"], info["parameters"]["couplings"]))
    model = info["parameters"].get("model", {})
    print("  parameters  " + ", ".join(f"{k} = {v:.6g}" if isinstance(v, float) else f"{k} = {v}"
                                     for k, v in model.items()))
    job = info["job"]
    where = f"merged from {len(job['merged'])} parts" if "merged" in job else f"job {job['index']} of {job['count']}"
    print(f"  seed {info['seed']}, {where}, created {info['created']}")


def _cmd_validate(args) -> int:
    from .records.store import event_files
    from .validate import Thresholds, validate

    if args.bins < 1:
        raise UserError(f"--bins must be at least 1, found {args.bins}")
    th = Thresholds(p_min=args.p_min, pull_max=args.pull_max, sigma_max=args.sigma_max)
    files = [f for f in event_files(args.path) if "-part" not in f.name]
    if not files:
        raise UserError(f"{args.path}: holds only batch parts; merge them first (`gen merge {args.path} -o DIR`) "
                        "and validate the merged sample")
    reports = [validate(f, out=args.out, bins=args.bins, thresholds=th, plots=not args.no_plots) for f in files]
    if args.json:
        json.dump({"reports": reports}, sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        for r in reports:
            xs, unit = r["cross_section"], r["unit"]
            print(f"{r['file']}  ({r['weighting']}, {r['events']} events)  →  {r['verdict'].upper()}")
            print(f"  reference   {r['reference']['name']}")
            print(f"  total       sample {xs['sample']:.6g} ± {xs['sample_error']:.2g} {unit}, "
                  f"reference {xs['reference']:.6g} {unit}, pull {xs['pull']:+.2f}  {'ok' if xs['pass'] else 'FAIL'}")
            for o in r["observables"]:
                print(f"  {o['name']:<13} chi2/dof {o['chi2']:7.1f}/{o['dof']:<3} p = {o['p_value']:<9.3g} "
                      f"largest pull {o['max_pull']:4.1f}  {'ok' if o['pass'] else 'FAIL'}")
            if r["reference"]["note"]:
                print(f"  note        {r['reference']['note']}")
            print(f"  report      {r['report']}")
    return 0 if all(r["verdict"] == "pass" for r in reports) else 1


def _cmd_plot(args) -> int:
    from .plots import quick_look
    from .records.store import event_files

    if args.bins < 1:
        raise UserError(f"--bins must be at least 1, found {args.bins}")
    for f in event_files(args.path):
        for png in quick_look(f, out=args.out, bins=args.bins):
            print(f"  wrote       {png}")
    return 0


def _cmd_processes(args) -> int:
    from .physics.matrix import MODELS
    from .physics.particles import GROUPS, HADRON_PARTONS, lookup

    wanted = lookup(args.particle, "gen processes", "--particle").name if args.particle else None
    if args.model and args.model not in MODELS:
        from .errors import close_matches

        raise UserError(f"--model {args.model!r} is not a model" + close_matches(args.model, MODELS)
                        + "; models: " + ", ".join(MODELS))
    homes: dict[str, list[str]] = {}
    for name, model in MODELS.items():
        for spec in model.processes:
            homes.setdefault(spec.label, []).append(name)
    for name, model in MODELS.items():
        if args.model and name != args.model:
            continue
        fixed = [s for s in model.processes if not all(p in HADRON_PARTONS["p"] for p in s.incoming)]
        partonic = [s for s in model.processes if all(p in HADRON_PARTONS["p"] for p in s.incoming)]
        if wanted:
            fixed = [s for s in fixed if wanted in s.incoming + s.outgoing]
            partonic = [s for s in partonic if wanted in s.incoming + s.outgoing]
            if not fixed and not partonic:
                continue
        couplings = ", ".join(model.couplings)
        print(f"{name}: {model.doc}" + (f" Couplings: {couplings}." if couplings else ""))
        for spec in fixed:
            sym = "  (identical final particles: factor 1/2)" if spec.symmetry != 1 else ""
            cut = ("  [needs cuts away from the soft and collinear regions]" if len(spec.outgoing) > 2
                   else "  [needs cuts away from the beam axis]") if spec.needs_angular_cut else ""
            also = [m for m in homes[spec.label] if m != name]
            other = f"  (also in {', '.join(also)}, with its own couplings)" if also else ""
            print(f"    {spec.label}{sym}{cut}{other}")
        if partonic:
            finals: dict[tuple, str] = {}
            for s in partonic:
                shown = _grouped(s.outgoing, GROUPS)
                finals.setdefault(tuple(sorted(shown)), " ".join(shown))
            print(f"    with hadron beams (p p, p pbar; {len(partonic)} parton processes), outgoing: "
                  + "; ".join(sorted(finals.values())))
        print("    parameters: " + ", ".join(model.params))
    return 0


def _grouped(outgoing, groups) -> list[str]:
    """Outgoing particle names, each replaced by the group a card would write (jet for partons)."""
    return [next((g for g in ("jet", "l-", "l+", "nu", "nubar") if p in groups[g]), p) for p in outgoing]


def _path(text: str) -> str:
    """A path argument with ~ expanded (as the shell does for an unquoted word), the same for every option."""
    return str(Path(text).expanduser())


def parser() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(prog="gen", description="Leading-order event generation to Parquet.")
    ap.add_argument("--version", action="version", version=f"gen {__version__}")
    ap.add_argument("--debug", action="store_true", help="show the traceback of an internal error")
    sub = ap.add_subparsers(dest="command", required=True, metavar="COMMAND")
    a = sub.add_parser("adapt", help="adapt the vegas grid once and write it, for batch parts")
    a.add_argument("card", type=_path, help="run card (TOML)")
    a.add_argument("-o", "--output", required=True, type=_path, help="grid file to write (JSON)")
    a.add_argument("--seed", type=int, help="random seed (overrides sampling.seed)")
    a.add_argument("--quiet", action="store_true", help="print nothing but warnings and errors")
    a.set_defaults(func=_cmd_adapt)
    r = sub.add_parser("run", help="integrate a card's process and write its event files")
    r.add_argument("card", type=_path, help="run card (TOML)")
    r.add_argument("-o", "--output", type=_path, help="run folder (default: the card's output.folder, else gen-runs/<card name>)")
    r.add_argument("--events", type=int, help="unweighted events in all (overrides sampling.events)")
    r.add_argument("--seed", type=int, help="random seed (overrides sampling.seed)")
    r.add_argument("--quiet", action="store_true", help="print nothing but warnings and errors")
    r.add_argument("--grid", type=_path, help="sample this adapted grid (from gen adapt) instead of adapting")
    r.add_argument("--job", type=int, help="make only part JOB (0-based) of --jobs parts; needs --grid")
    r.add_argument("--jobs", type=int, help="number of parts the sample is split into")
    r.add_argument("--workers", type=int, help="make all parts on a local Dask cluster of this many workers")
    r.add_argument("--scheduler", help="make all parts on the Dask scheduler at this address")
    r.add_argument("--force", action="store_true", help="replace an earlier run's files in the run folder (they are "
                   "refused otherwise)")
    r.set_defaults(func=_cmd_run)
    m = sub.add_parser("merge", help="merge batch parts into one sample")
    m.add_argument("parts", nargs="+", type=_path, help="part files or folders of parts")
    m.add_argument("-o", "--output", required=True, type=_path, help="folder for the merged files")
    m.add_argument("--quiet", action="store_true", help="print nothing but warnings and errors")
    m.add_argument("--force", action="store_true", help="replace an earlier sample in the output folder")
    m.set_defaults(func=_cmd_merge)
    v = sub.add_parser("validate", help="compare a sample with its analytic reference; exit 1 when it fails")
    v.add_argument("path", type=_path, help="an event file or a run folder")
    v.add_argument("--out", type=_path, help="folder for the report and plots (default: <run folder>/validation)")
    v.add_argument("--bins", type=int, default=20, help="bins per observable (default 20)")
    v.add_argument("--p-min", type=float, default=1e-4, help="smallest accepted chi-square p-value (default 1e-4)")
    v.add_argument("--pull-max", type=float, default=6.0, help="largest accepted bin pull (default 6)")
    v.add_argument("--sigma-max", type=float, default=5.0,
                   help="largest accepted deviation of the total, in standard deviations (default 5)")
    v.add_argument("--no-plots", action="store_true", help="write the report only")
    v.add_argument("--json", action="store_true", help="print the reports as JSON")
    v.set_defaults(func=_cmd_validate)
    q = sub.add_parser("plot", help="quick-look histograms of the outgoing particles")
    q.add_argument("path", type=_path, help="an event file or a run folder")
    q.add_argument("--out", type=_path, help="folder for the PNG files (default: <run folder>/plots)")
    q.add_argument("--bins", type=int, default=40, help="bins per histogram (default 40)")
    q.set_defaults(func=_cmd_plot)
    i = sub.add_parser("info", help="describe an event file or a run folder")
    i.add_argument("path", type=_path, help="an event file, a run folder or a folder of batch parts")
    i.add_argument("--json", action="store_true", help="machine-readable output")
    i.set_defaults(func=_cmd_info)
    p = sub.add_parser("processes", help="list the process library by model")
    p.add_argument("--model", help="only this model")
    p.add_argument("--particle", help="only processes with this particle (a name or PDG id)")
    p.set_defaults(func=_cmd_processes)
    return ap


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        rc = 3
        try:
            rc = _dispatch(args)
            return rc
        finally:
            if rc not in (2, 3):  # a refused or failed command says one line: its error
                _print_warnings(caught)


def _dispatch(args) -> int:
    try:
        return args.func(args)
    except UserError as exc:
        print(f"gen: error: {printable(str(exc))}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("gen: interrupted; no incomplete file was left behind", file=sys.stderr)
        return 130
    except BrokenPipeError:  # the reader of our output went away (`gen processes | head`)
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except Exception as exc:
        if args.debug:
            raise
        print(f"gen: internal error: {type(exc).__name__}: {printable(str(exc))[:300]}; this is a defect of gen, "
              "not of your input: rerun with --debug for the traceback and report it", file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
