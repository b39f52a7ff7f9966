"""The `gen` command: run, info, processes.

User errors print one line `gen: error: ...` on stderr and exit with status 2; internal errors
keep their traceback.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path

from . import __version__
from .errors import UserError

__all__ = ["main"]


def _fmt_sigma(value: float, error: float) -> str:
    rel = f"{100 * error / value:.3g}%" if value else "n/a"
    return f"{value:.6g} ± {error:.3g} pb  ({rel})"


def _cmd_run(args) -> int:
    from .card import load_card
    from .progress import Progress
    from .run import run

    cfg = load_card(args.card).with_overrides(events=args.events, seed=args.seed, folder=args.output)
    show = not args.quiet
    if show:
        print(f"gen {__version__} ▸ {' '.join(p.name for p in cfg.incoming)} → "
              f"{' '.join(p.name for p in cfg.outgoing)}  [{cfg.model}]  card {cfg.source}")
    progress = Progress(enabled=None if show else False)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = run(cfg, progress=progress)
    for w in caught:
        print(f"gen: warning: {w.message}", file=sys.stderr)
    if show:
        xs = res.cross_section
        print(f"  sqrt(s)     {res.record['collider']['sqrt_s_GeV']:.6g} GeV")
        print(f"  σ           {_fmt_sigma(xs.value, xs.error)}   chi2/dof {xs.chi2_dof:.2f}, Q {xs.q:.2f}")
        st = res.unweighting
        if st is not None:
            est, err = st.estimate
            print(f"  unweighted  {st.accepted} events, efficiency {st.efficiency:.1%}, "
                  f"{st.overflow_events} above w_max carrying {st.overflow_share:.2%} of σ "
                  f"(sampling pass: {est:.6g} ± {err:.2g} pb)")
        for f in res.files:
            print(f"  wrote       {f}")
    return 0


def _summarize(path: Path) -> dict:
    from .store import read_run

    rec = read_run(path)
    return {"path": str(path), "weighting": rec["weighting"], "events": rec["events"],
            "cross_section": rec["cross_section"], "process": rec["process"], "collider": rec["collider"],
            "parameters": rec["parameters"], "unweighting": rec.get("unweighting"), "seed": rec["seed"],
            "job": rec["job"], "schema_version": rec["schema_version"], "program": rec["program"],
            "created": rec["created"]}


def _cmd_info(args) -> int:
    from .store import event_files

    infos = [_summarize(f) for f in event_files(args.path)]
    if args.json:
        json.dump({"files": infos}, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    for info in infos:
        xs = info["cross_section"]["total"]
        proc = info["process"]
        print(f"{info['path']}  ({info['weighting']}, schema {info['schema_version']}, {info['program']})")
        print(f"  process     {proc['label']}  [{proc['model']}], symmetry factor {proc['symmetry_factor']:g}")
        print(f"  sqrt(s)     {info['collider']['sqrt_s_GeV']:.6g} GeV")
        print(f"  σ           {_fmt_sigma(xs['value_pb'], xs['error_pb'])}   chi2/dof {xs['chi2_per_dof']:.2f}")
        ev = info["events"]
        print(f"  events      {ev['count']}, sum of weights {ev['sum_weights_pb']:.6g} pb, "
              f"largest weight {ev['max_weight_pb']:.4g} pb")
        if info["unweighting"]:
            u = info["unweighting"]
            print(f"  unweighting efficiency {u['efficiency']:.1%}, {u['overflow_events']} above w_max "
                  f"({u['overflow_share']:.2%} of σ)")
        model = info["parameters"]["model"]
        print("  parameters  " + ", ".join(f"{k} = {v:.6g}" if isinstance(v, float) else f"{k} = {v}"
                                         for k, v in model.items()))
        print(f"  seed {info['seed']}, job {info['job']['index']} of {info['job']['count']}, created {info['created']}")
    return 0


def _cmd_processes(args) -> int:
    from .matrix import MODELS

    for name, model in MODELS.items():
        print(f"{name}: {model.doc}")
        for spec in model.processes:
            sym = "  (identical final particles: factor 1/2)" if spec.symmetry != 1 else ""
            cut = "  [needs cuts away from the beam axis]" if spec.needs_angular_cut else ""
            print(f"    {spec.label}{sym}{cut}")
        print("    parameters: " + ", ".join(model.params))
    return 0


def parser() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(prog="gen", description="Leading-order event generation to Parquet.")
    ap.add_argument("--version", action="version", version=f"gen {__version__}")
    sub = ap.add_subparsers(dest="command", required=True)
    r = sub.add_parser("run", help="integrate a card's process and write its event files")
    r.add_argument("card", help="run card (TOML)")
    r.add_argument("-o", "--output", help="run folder (default: the card's output.folder, else gen-runs/<card name>)")
    r.add_argument("--events", type=int, help="unweighted events (overrides sampling.events)")
    r.add_argument("--seed", type=int, help="random seed (overrides sampling.seed)")
    r.add_argument("--quiet", action="store_true", help="print nothing but warnings and errors")
    r.set_defaults(func=_cmd_run)
    i = sub.add_parser("info", help="describe an event file or a run folder")
    i.add_argument("path")
    i.add_argument("--json", action="store_true", help="machine-readable output")
    i.set_defaults(func=_cmd_info)
    p = sub.add_parser("processes", help="list the process library by model")
    p.set_defaults(func=_cmd_processes)
    return ap


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    try:
        return args.func(args)
    except UserError as exc:
        print(f"gen: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("gen: interrupted; no incomplete file was left behind", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
