"""Benchmark: unweighted e+e- -> mu+mu- events to Parquet, end to end and by bare parts.

Run as `python -m gen.benchmark` (add `--sizes 1000000 10000000 --allocator both` for the memory
check, with gen's allocator setting and glibc's default side by side;
`--dask 4000000` measures the speed-up on 1 and 2 local Dask workers instead).
For each size it starts a fresh Python process, so peak memory (max RSS) is that size's alone,
and prints:

- end-to-end events per second of `gen.run` (adaptation, calibration, unweighting, momenta,
  Arrow batches and the streamed Parquet write, from a validated card to the renamed file);
- in the same process, the bare parts on the same numbers: the integrand evaluated alone on as
  many points as the run drew, and a plain pyarrow write of the same event columns alone;
- the ratio of end-to-end time to the sum of the bare parts, peak memory and the unweighting
  efficiency.

`--startup` instead times the start of commands (`gen --version`, `gen --help`, `gen processes`)
in fresh processes beside a bare interpreter, and lists what their imports cost (`-X importtime`).

`--tree N` instead times the automatic amplitudes (microseconds per point for 4 to 7 gluons, four
fermions and more, summed over helicities and sampled), the recursion against the hand-coded
library on the same 2 -> 2 processes, and the automatic amplitudes' demo cards end to end at N
unweighted events.

`--colour` instead measures what colour and helicity sampling cost in variance against what they
save in time, for processes with five coloured partons: the time per point of the exact sums and
of one sampled assignment per point, and the relative variance a sampled |M|^2 adds at fixed
phase-space points.

`--hadron N` instead runs dijets and Drell-Yan with the default parton-density set and prints
events per second end to end, the share of the integrand's time spent in parton densities and the
unweighting efficiency; `--pdf` measures density evaluations per second.

Timings are medians over `--repeat` runs (these machines are noisy); nothing here is a test.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CARD = """
[process]
model = "qed"
incoming = ["e-", "e+"]
outgoing = ["mu-", "mu+"]
[collider]
sqrt_s = 10.58
[sampling]
events = {n}
weighted_events = 0
seed = 1
"""


def _one(n: int, repeat: int) -> dict:
    import numpy as np
    import pyarrow.parquet as pq

    from gen.card import parse_card
    from gen.jobs.run import run
    from gen.processes import build_process

    cfg = parse_card(CARD.format(n=n), "benchmark.toml")
    e2e, bare_f, bare_w = [], [], []
    eff = 0.0
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(repeat):
            t0 = time.perf_counter()
            res = run(cfg, folder=Path(tmp) / f"run{r}")
            e2e.append(time.perf_counter() - t0)
            if r == 0:  # peak memory of the run itself, before the bare parts load a whole table
                rss_run = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
            eff = res.unweighting.efficiency
            trials = (res.unweighting.trials + cfg.sampling["calibration_points"]
                      + cfg.integration["points_per_iteration"] * (cfg.integration["warmup_iterations"]
                                                                  + cfg.integration["iterations"]))
            # bare part 1: the integrand alone on as many points, in the same chunks
            proc = build_process(cfg)
            rng = np.random.default_rng(0)
            chunk = cfg.sampling["chunk"]
            t0 = time.perf_counter()
            for start in range(0, trials, chunk):
                proc.weights(rng.random((min(chunk, trials - start), 1)))
            bare_f.append(time.perf_counter() - t0)
            # bare part 2: a plain pyarrow write of the same event columns, held in memory
            table = pq.read_table(res.files[0]) if n <= 2_000_000 else None
            if table is not None:
                t0 = time.perf_counter()
                pq.write_table(table, Path(tmp) / "plain.parquet", compression="snappy",
                               use_dictionary=["subprocess", "particles.list.particle.role",
                                               "particles.list.particle.pdg"],
                               row_group_size=cfg.output["row_group_events"])
                bare_w.append(time.perf_counter() - t0)
                del table
            for f in Path(tmp).glob("**/*.parquet"):
                f.unlink()
    t_e2e = statistics.median(e2e)
    out = {"events": n, "end_to_end_s": t_e2e, "events_per_s": n / t_e2e, "efficiency": eff,
           "integrand_alone_s": statistics.median(bare_f),
           "peak_rss_MB": rss_run}
    if bare_w:
        out["plain_write_s"] = statistics.median(bare_w)
        out["ratio_to_bare_parts"] = t_e2e / (out["integrand_alone_s"] + out["plain_write_s"])
    return out


def _dask(n: int, parts: int) -> None:
    """Wall time of n unweighted events in `parts` parts on 1 and 2 local Dask workers (cluster
    start timed apart), the same parts made one after another in this process, and the fixed
    cost per part measured with many tiny parts."""
    from gen.card import parse_card
    from gen.jobs.run import run
    from gen.jobs.distributed import local_cluster, run_parts_on_dask
    from gen.sampling.grid import Grid, make_grid
    from gen.processes import build_process

    with tempfile.TemporaryDirectory() as tmp:
        cfg = parse_card(CARD.format(n=n), "benchmark.toml")
        grid_path = make_grid(build_process(cfg), cfg).save(Path(tmp) / "grid.json")
        grid = Grid.load(grid_path)
        t0 = time.perf_counter()
        for j in range(parts):
            run(cfg, folder=Path(tmp) / "seq", grid=grid, job=j, jobs=parts)
        seq = time.perf_counter() - t0
        print(f"no Dask, parts one after another: {n} events in {parts} parts: {seq:.2f} s ({n / seq:.0f} events/s)")
        walls = {}
        tiny = parse_card(CARD.format(n=40 * 100), "benchmark.toml")
        tiny_grid = make_grid(build_process(tiny), tiny).save(Path(tmp) / "tiny.json")
        for workers in (1, 2):
            t0 = time.perf_counter()
            with local_cluster(workers) as client:
                start = time.perf_counter() - t0
                client.run(lambda: __import__("gen.jobs.run"))  # the workers' own imports, not timed below
                times = []
                for r in range(3):
                    folder = Path(tmp) / f"w{workers}-{r}"
                    t0 = time.perf_counter()
                    run_parts_on_dask(cfg, grid_path, parts, folder, client=client)
                    times.append(time.perf_counter() - t0)
                    for f in folder.glob("*"):
                        f.unlink()
                walls[workers] = statistics.median(times)
                print(f"{workers} worker(s): {n} events in {parts} parts: {walls[workers]:.2f} s "
                      f"({n / walls[workers]:.0f} events/s); cluster start {start:.2f} s")
                if workers == 2:
                    t0 = time.perf_counter()
                    run_parts_on_dask(tiny, tiny_grid, 40, Path(tmp) / "tiny", client=client)
                    per = (time.perf_counter() - t0) * workers / 40
                    print(f"fixed cost per part (40 parts of 100 events on 2 workers): {per * 1e3:.0f} ms of worker time")
        print(f"speed-up with 2 workers: {walls[1] / walls[2]:.2f} (medians of 3)")


def _pdf() -> None:
    """Parton-density points per second (one flavour, cubic in log x and log Q^2), median of 5."""
    import numpy as np

    from gen.physics import pdf

    s = pdf.load()
    rng = np.random.default_rng(1)
    for n in (10_000, 100_000, 1_000_000):
        x = 10 ** rng.uniform(-6, 0, n)
        q = 10 ** rng.uniform(0.5, 3.5, n)
        times = []
        for _ in range(5):
            t0 = time.perf_counter()
            s.xfx(21, x, q)
            times.append(time.perf_counter() - t0)
        print(f"{n:>9} points: {n / statistics.median(times):,.0f} points/s for one flavour")


HADRON_CARD = """
[process]
model = "{model}"
incoming = ["p", "p"]
outgoing = {outgoing}
[collider]
sqrt_s = 13600.0
{cuts}
[sampling]
events = {n}
weighted_events = 0
seed = 1
"""

HADRON_CARDS = {
    "dijets (pt > 250 GeV, |eta| < 2.8)": ("qcd", '["jet", "jet"]', "[cuts]\npt_min = 250.0\neta_max = 2.8"),
    "Drell-Yan e+e- (66-116 GeV)": ("electroweak", '["e-", "e+"]', "[cuts]\nmass_min = 66.0\nmass_max = 116.0"),
}


def _median_run(cfg, repeat: int) -> tuple[float, float]:
    """The median wall time (s) of `repeat` runs of a card into a temporary folder, and the
    unweighting efficiency of the last."""
    from gen.jobs.run import run

    times, eff = [], 0.0
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(repeat):
            t0 = time.perf_counter()
            res = run(cfg, folder=Path(tmp) / f"run{r}")
            times.append(time.perf_counter() - t0)
            eff = res.unweighting.efficiency
    return statistics.median(times), eff


def _hadron(n: int, repeat: int) -> None:
    """Hadron-collider runs with the default set: end-to-end events per second, the share of the
    integrand's time spent in parton-density evaluation, the unweighting efficiency."""
    from gen.card import parse_card
    from gen.physics import pdf as gpdf
    from gen.processes import build_process

    print(f"{'process':<36} {'events':>8} {'end-to-end':>11} {'events/s':>9} {'densities':>10} {'efficiency':>10}")
    for label, (model, outgoing, cuts) in HADRON_CARDS.items():
        text = HADRON_CARD.format(model=model, outgoing=outgoing, cuts=cuts, n=n)
        cfg = parse_card(text, "benchmark.toml")
        med, eff = _median_run(cfg, repeat)
        # share of the integrand's time in the densities: time both on the same points
        import numpy as np

        proc = build_process(cfg)
        x = np.random.default_rng(2).random((200_000, proc.ndim))
        spent = [0.0]
        plain = gpdf.PdfSet.xfx_many

        def timed(self, *a, **k):
            t = time.perf_counter()
            out = plain(self, *a, **k)
            spent[0] += time.perf_counter() - t
            return out

        gpdf.PdfSet.xfx_many = timed
        try:
            t0 = time.perf_counter()
            proc.weights(x)
            total = time.perf_counter() - t0
        finally:
            gpdf.PdfSet.xfx_many = plain
        print(f"{label:<36} {n:>8} {med:>9.2f} s {n / med:>9.0f} {spent[0] / total:>10.0%} {eff:>10.1%}")


#: the automatic amplitudes' processes timed by --tree: (label, model, incoming, outgoing, points)
TREE_AMPLITUDES = [
    ("g g -> g g", "standard", ["g", "g"], ["g", "g"], 2000),
    ("g g -> g g g", "standard", ["g", "g"], ["g", "g", "g"], 1000),
    ("g g -> g g g g", "standard", ["g", "g"], ["g", "g", "g", "g"], 200),
    ("g g -> g g g g g", "standard", ["g", "g"], ["g", "g", "g", "g", "g"], 50),
    ("e- e+ -> mu- nu_mubar u dbar", "standard", ["e-", "e+"], ["mu-", "nu_mubar", "u", "dbar"], 4000),
    ("e- e+ -> u ubar g g", "standard", ["e-", "e+"], ["u", "ubar", "g", "g"], 2000),
    ("e- e+ -> mu- mu+ b bbar", "standard", ["e-", "e+"], ["mu-", "mu+", "b", "bbar"], 4000),
]

#: the same 2 -> 2 process by the hand-coded library and by the recursion
TREE_AGAINST_LIBRARY = [("e- e+ -> mu- mu+", "electroweak", ["e-", "e+"], ["mu-", "mu+"]),
                        ("g g -> g g", "qcd", ["g", "g"], ["g", "g"]),
                        ("u ubar -> t tbar", "qcd", ["u", "ubar"], ["t", "tbar"])]

#: demo cards of the automatic amplitudes timed end to end by --tree
TREE_CARDS = ["lep2-w-pairs-four-fermions", "z-pole-radiative-muons", "z-pole-four-partons",
              "higgs-factory-zh-spin-correlated", "linear-collider-top-pairs", "pp-top-pairs-recursion"]


def _us_per_point(amp, p, repeat: int) -> float:
    """Median over `repeat` of the microseconds per point of amp.squared at momenta p."""
    import numpy as np

    rng = np.random.default_rng(0)
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        amp.squared(p, rng)
        times.append(time.perf_counter() - t0)
    return statistics.median(times) / p.shape[0] * 1e6


def _tree(events: int, repeat: int) -> None:
    """The automatic amplitudes: microseconds per point (median of `repeat`) summed over helicities
    and with one configuration sampled per point, against the hand-coded library on the same 2 -> 2,
    and the demo cards end to end (unweighted events per minute, efficiency)."""
    import numpy as np

    from gen.card import load_card
    from gen.physics import tree
    from gen.physics.matrix import MODELS, find_process
    from gen.physics.kinematics import dot

    def per_point(amp, p):
        return _us_per_point(amp, p, repeat)

    print(f"{'amplitude':<32} {'points':>6} {'colour':>7} {'us/point, summed':>17} {'sampled helicity':>17}")
    for label, model, incoming, outgoing, n in TREE_AMPLITUDES:
        summed = tree.build(model, incoming, outgoing)
        sampled = tree.build(model, incoming, outgoing, helicities="sample")
        p = summed.probe_momenta(3, n)
        print(f"{label:<32} {n:>6} {summed.colour_mode:>7} {per_point(summed, p):>17.1f} {per_point(sampled, p):>17.1f}")
        sys.stdout.flush()
    print(f"\n{'2 -> 2':<24} {'library us/point':>17} {'recursion us/point':>19} {'ratio':>6}")
    for label, model, incoming, outgoing in TREE_AGAINST_LIBRARY:
        amp = tree.build("standard", incoming, outgoing)
        p = amp.probe_momenta(3, 20000)
        spec = find_process(MODELS[model], tuple(incoming), tuple(outgoing)).spec
        s, t, u = (dot(a, a) for a in (p[:, 0] + p[:, 1], p[:, 0] - p[:, 2], p[:, 0] - p[:, 3]))
        par = dict(MODELS[model].resolve({}), alpha_s=0.118, m1=amp.legs[0].mass, m2=amp.legs[1].mass,
                   m3=amp.legs[2].mass, m4=amp.legs[3].mass)
        times = []
        for _ in range(repeat):
            t0 = time.perf_counter()
            spec.matrix(s, t, u, par)
            times.append(time.perf_counter() - t0)
        lib = statistics.median(times) / p.shape[0] * 1e6
        rec = per_point(amp, p)
        print(f"{label:<24} {lib:>17.3f} {rec:>19.1f} {rec / lib:>8.0f}")
    print(f"\n{'demo card':<36} {'events':>7} {'end-to-end':>11} {'events/min':>11} {'efficiency':>10}")
    cards = Path(__file__).resolve().parent.parent / "cards"
    for name in TREE_CARDS:
        med, eff = _median_run(load_card(cards / f"{name}.toml").with_overrides(events=events), repeat)
        print(f"{name:<36} {events:>7} {med:>9.1f} s {events / med * 60:>11.0f} {eff:>10.1%}")
        sys.stdout.flush()


#: processes of --colour: (label, model, incoming, outgoing)
COLOUR_PROCESSES = [("u ubar -> g g g", "qcd-tree", ["u", "ubar"], ["g", "g", "g"]),
                    ("g u -> u g g", "qcd-tree", ["g", "u"], ["u", "g", "g"]),
                    ("u d -> u d g", "qcd-tree", ["u", "d"], ["u", "d", "g"]),
                    ("e- e+ -> u ubar g g", "standard", ["e-", "e+"], ["u", "ubar", "g", "g"])]


def _colour(repeat: int, points: int = 12, draws: int = 400) -> None:
    """Per process: us per point with exact colour and helicity sums, with sampled colours, and with
    both sampled; the relative variance v = <Var(sampled |M|^2) / |M|^2 exact^2> over `points`
    phase-space points (`draws` samples each); and the CPU time per unit variance of the sampled
    estimate against the exact sum for an integrand whose own relative variance is 1 (a grid
    half-adapted): (t_sample / t_sum) (1 + 2 v) -- below 1, sampling wins."""
    import numpy as np

    from gen.physics import tree

    print(f"{'process':<22} {'mode':<26} {'us/point':>9} {'rel. variance v':>16} {'CPU per variance':>17}")
    for label, model, incoming, outgoing in COLOUR_PROCESSES:
        exact = tree.build(model, incoming, outgoing, colours="sum")
        p = exact.probe_momenta(5, points)
        ref = exact.squared(p)
        t_sum = _us_per_point(exact, np.repeat(p, 100, axis=0), repeat)
        print(f"{label:<22} {'exact colour and helicity':<26} {t_sum:>9.1f} {0.0:>16.3f} {1.0:>17.2f}")
        for mode, opts in (("sampled colours", {"colours": "sample"}),
                           ("sampled colours, helicity", {"colours": "sample", "helicities": "sample"})):
            amp = tree.build(model, incoming, outgoing, **opts)
            est = amp.squared(np.repeat(p, draws, axis=0), np.random.default_rng(1)).reshape(points, draws)
            v = float(np.mean(est.var(axis=1) / ref ** 2))
            t = _us_per_point(amp, np.repeat(p, 100, axis=0), repeat)
            print(f"{'':<22} {mode:<26} {t:>9.1f} {v:>16.3f} {t / t_sum * (1 + 2 * v):>17.2f}")
        sys.stdout.flush()


STARTUP_COMMANDS = {
    "python -c pass (bare interpreter)": ["-c", "pass"],
    "gen --version": ["-m", "gen.cli", "--version"],
    "gen --help": ["-m", "gen.cli", "--help"],
    "gen processes": ["-m", "gen.cli", "processes"],
}


PARTS_CARD = CARD.format(n=20000).replace("weighted_events = 0", "weighted_events = 4000")


def _parts_against_one_run(parts: int = 20) -> None:
    """Wall time of `parts` batch parts as separate `gen run --grid --job` processes against one
    such process making the same events (the fixed cost of a part is start-up and set-up)."""
    with tempfile.TemporaryDirectory() as tmp:
        card = Path(tmp) / "parts.toml"
        card.write_text(PARTS_CARD)
        grid = Path(tmp) / "grid.json"
        gen = [sys.executable, "-m", "gen.cli"]
        subprocess.run([*gen, "adapt", str(card), "-o", str(grid), "--quiet"], check=True)

        def timed(jobs, folder):
            t0 = time.perf_counter()
            for j in range(jobs):
                subprocess.run([*gen, "run", str(card), "--grid", str(grid), "--job", str(j), "--jobs", str(jobs),
                                "-o", str(Path(tmp) / folder), "--quiet"], check=True)
            return time.perf_counter() - t0

        one = statistics.median(timed(1, f"one{r}") for r in range(3))
        many = timed(parts, "parts")
        print(f"{parts} parts as separate processes: {many:.2f} s; one process with the same 24,000 events: "
              f"{one:.2f} s (median of 3); ratio {many / one:.1f}; {many / parts:.3f} s per part")


def _startup(repeat: int) -> None:
    """Median wall and CPU seconds of each command over `repeat` fresh processes, and the modules
    whose import costs most in `gen processes` (cumulative microseconds from -X importtime)."""
    import shutil

    commands = {label: [sys.executable, *args] for label, args in STARTUP_COMMANDS.items()}
    script = shutil.which("gen")
    if script:  # the installed command adds its entry-point lookup
        commands.update({f"{label} (installed script)": [script, *args[2:]] for label, args in STARTUP_COMMANDS.items()
                         if args[0] == "-m"})
    print(f"{'command':<46} {'wall (median)':>14} {'CPU (median)':>13}")
    for label, cmd in commands.items():
        walls, cpus = [], []
        for _ in range(max(repeat, 5)):
            before = resource.getrusage(resource.RUSAGE_CHILDREN)
            t0 = time.perf_counter()
            subprocess.run(cmd, capture_output=True, check=True)
            walls.append(time.perf_counter() - t0)
            after = resource.getrusage(resource.RUSAGE_CHILDREN)
            cpus.append(after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime)
        print(f"{label:<46} {statistics.median(walls):>12.3f} s {statistics.median(cpus):>11.3f} s")
    _parts_against_one_run()
    r = subprocess.run([sys.executable, "-X", "importtime", "-m", "gen.cli", "processes"], capture_output=True,
                       text=True, check=True)
    rows = []
    for line in r.stderr.splitlines():
        if line.startswith("import time:") and "|" in line:
            _, cumulative, name = line.split("|")
            if cumulative.strip().isdigit():
                rows.append((int(cumulative), name.rstrip()))
    print("largest cumulative imports of `gen processes` (ms):")
    for us, name in sorted(rows, reverse=True)[:8]:
        print(f"  {us / 1000:8.1f}  {name.strip()}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1_000_000])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--one", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--dask", type=int, metavar="N", help="instead: N events on 1 and 2 local Dask workers")
    ap.add_argument("--parts", type=int, default=8, help="parts for --dask")
    ap.add_argument("--pdf", action="store_true", help="instead: parton-density evaluations per second")
    ap.add_argument("--hadron", type=int, metavar="N", help="instead: N unweighted dijet and Drell-Yan events at 13.6 TeV")
    ap.add_argument("--startup", action="store_true", help="instead: start-up time of commands")
    ap.add_argument("--tree", type=int, metavar="N", help="instead: the automatic amplitudes per point, against the "
                    "library, and their demo cards at N unweighted events")
    ap.add_argument("--colour", action="store_true", help="instead: the variance cost of colour and helicity "
                    "sampling against the exact sums")
    ap.add_argument("--allocator", choices=("auto", "tuned", "system", "both"), default="auto",
                    help="gen's choice (fixed mmap threshold from gen.memory.LARGE_RUN events), always fixed, "
                         "glibc's own dynamic one, or fixed and glibc's side by side")
    args = ap.parse_args(argv)
    if args.startup:
        _startup(args.repeat)
        return 0
    if args.hadron:
        _hadron(args.hadron, args.repeat)
        return 0
    if args.tree:
        _tree(args.tree, args.repeat)
        return 0
    if args.colour:
        _colour(args.repeat)
        return 0
    if args.pdf:
        _pdf()
        return 0
    if args.dask:
        _dask(args.dask, args.parts)
        return 0
    if args.one:
        print(json.dumps(_one(args.one, args.repeat)))
        return 0
    print(f"{'allocator':>9} {'events':>10} {'end-to-end':>11} {'events/s':>10} {'integrand':>10} {'plain write':>12} "
          f"{'ratio':>6} {'peak RSS':>9} {'efficiency':>10}")
    allocators = ("tuned", "system") if args.allocator == "both" else (args.allocator,)
    for n in args.sizes:
        for alloc in allocators:
            rep = args.repeat if n <= 2_000_000 else 1
            env = dict(os.environ, GEN_ALLOCATOR=alloc)
            r = subprocess.run([sys.executable, "-m", "gen.benchmark", "--one", str(n), "--repeat", str(rep)],
                               capture_output=True, text=True, check=True, env=env)
            d = json.loads(r.stdout.strip().splitlines()[-1])
            pw = f"{d['plain_write_s']:.2f} s" if "plain_write_s" in d else "-"
            ratio = f"{d['ratio_to_bare_parts']:.2f}" if "ratio_to_bare_parts" in d else "-"
            print(f"{alloc:>9} {n:>10} {d['end_to_end_s']:>9.2f} s {d['events_per_s']:>10.0f} "
                  f"{d['integrand_alone_s']:>8.2f} s {pw:>12} {ratio:>6} {d['peak_rss_MB']:>6.0f} MB "
                  f"{d['efficiency']:>10.1%}")
            sys.stdout.flush()
    return 0


if __name__ == "__main__":
    sys.exit(main())
