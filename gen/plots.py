"""PNG plots, drawn headless: validation (sample against reference, with a pull panel) and quick looks.

The look: sample as dark points with error bars, the reference as an amber step line over a
pale band of the expected statistical spread, pulls as bars coloured by size. Plotting is an
optional extra: `pip install 'gen[plots]'`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .errors import OutputError, UserError

__all__ = ["validation_plot", "quick_look"]

INK = "#1f2a36"
AMBER = "#d98e04"
BAND = "#f6dfa8"
GOOD = "#5b8c5a"
BAD = "#b33f40"


def _pyplot():
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise UserError("plots need matplotlib: install the extra with `pip install 'gen[plots]'`") from None
    return plt


def validation_plot(report: dict, item: dict, path: Path) -> Path:
    plt = _pyplot()
    edges = np.asarray(item["edges"])
    width = np.diff(edges)
    centre = 0.5 * (edges[1:] + edges[:-1])
    val = np.asarray(item["sample"]) / width
    err = np.asarray(item["sample_error"]) / width
    ref = np.asarray(item["reference"]) / width
    pulls = np.asarray(item["pulls"])
    fig, (top, bot) = plt.subplots(2, 1, figsize=(7.0, 6.0), sharex=True,
                                   gridspec_kw={"height_ratios": [3, 1.2], "hspace": 0.05})
    top.fill_between(edges, np.append(ref - err, ref[-1] - err[-1]), np.append(ref + err, ref[-1] + err[-1]),
                     step="post", color=BAND, label="reference ± expected spread")
    top.stairs(ref, edges, color=AMBER, lw=1.8, label="analytic reference")
    top.errorbar(centre, val, yerr=err, fmt="o", ms=3.5, color=INK, lw=1.0, label=f"sample ({report['weighting']})")
    unit = item["unit"]
    symbol = "dΓ/dx" if report.get("unit") == "GeV" else "dσ/dx"
    top.set_ylabel(f"{symbol}  [{report.get('unit', 'pb')}{' / ' + unit if unit else ''}]")
    verdict = "pass" if item["pass"] else "FAIL"
    top.set_title(f"{report['process']}  ·  χ²/dof = {item['chi2_per_dof']:.2f}, p = {item['p_value']:.3g}  ·  {verdict}",
                  fontsize=10, color=GOOD if item["pass"] else BAD, loc="left")
    top.legend(frameon=False, fontsize=8)
    top.spines[["top", "right"]].set_visible(False)
    bot.axhspan(-2, 2, color="#eeeeee")
    bot.axhspan(-1, 1, color="#dddddd")
    bot.bar(centre, pulls, width=0.8 * width, color=[GOOD if abs(p) < 3 else BAD for p in pulls])
    bot.axhline(0, color=INK, lw=0.8)
    lim = max(3.5, float(np.abs(pulls).max()) * 1.15 if pulls.size else 3.5)
    bot.set_ylim(-lim, lim)
    bot.set_ylabel("pull")
    bot.set_xlabel(item["label"])
    bot.spines[["top", "right"]].set_visible(False)
    return save_figure(fig, path, dpi=110, bbox_inches="tight")


def particle_names(rec: dict) -> list[str]:
    """The names of an event's particles in record order: the card's incoming and outgoing ones,
    then the products of each decay step."""
    names = list(rec["process"]["incoming"]) + list(rec["process"]["outgoing"])
    for step in rec.get("decays", {}).get("chain", []):
        names += list(step["into"])
    return names


def quick_look(path: str | Path, out: str | Path | None = None, bins: int = 40) -> list[Path]:
    """Histograms of E, p_T, pseudorapidity and azimuth of each final outgoing particle (decay
    products included), weighted to d(measure)/dx."""
    import boost_histogram as bh
    import pyarrow.parquet as pq

    from .physics.kinematics import azimuth, pseudorapidity, pt
    from .records.store import read_run

    plt = _pyplot()
    path = Path(path)
    rec = read_run(path)
    unit = rec["measure"]["unit"]
    symbol = "dΓ/dx" if unit == "GeV" else "dσ/dx"
    table = pq.read_table(path, columns=["weight", "particles"])
    w = table.column("weight").to_numpy()
    parts = table.column("particles").combine_chunks()
    flat = parts.flatten()
    n = int(parts.offsets[1].as_py() - parts.offsets[0].as_py()) if len(parts) else 0
    roles = flat.field("role").slice(0, n).to_pylist()
    names = particle_names(rec)
    if len(names) != n:
        raise UserError(f"{path}: the run record names {len(names)} particles per event but the events hold {n}")
    p = np.stack([flat.field(k).to_numpy(zero_copy_only=False) for k in ("e", "px", "py", "pz")], -1).reshape(len(w), n, 4)
    out_dir = Path(out) if out is not None else path.parent / "plots"
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{out_dir}: cannot make the plot folder: {exc.strerror or exc}") from None
    files = []
    for k in [i for i, r in enumerate(roles) if r == "outgoing"]:
        q = p[:, k, :]
        obs = [("energy E [GeV]", q[:, 0], "GeV"), ("transverse momentum p_T [GeV]", pt(q), "GeV"),
               ("pseudorapidity η", pseudorapidity(q), ""), ("azimuth φ [rad]", azimuth(q), "rad")]
        fig, axs = plt.subplots(2, 2, figsize=(9, 6.5))
        for ax, (label, x, xunit) in zip(axs.ravel(), obs):
            finite = np.isfinite(x)
            x, wx = x[finite], w[finite]
            lo, hi = (float(x.min()), float(x.max())) if x.size else (0.0, 1.0)
            if not hi - lo > 1e-9 * max(abs(hi), abs(lo), 1.0):  # constant (e.g. energies at fixed sqrt(s))
                half = 0.01 * max(abs(lo), 1e-3)
                lo, hi = lo - half, hi + half
            h = bh.Histogram(bh.axis.Regular(bins, lo, hi + 1e-12 * (hi - lo)), storage=bh.storage.Weight())
            h.fill(x, weight=wx)
            width = h.axes[0].widths
            ax.stairs(h.values() / width, h.axes[0].edges, color=INK, lw=1.4, fill=True, alpha=0.15)
            ax.stairs(h.values() / width, h.axes[0].edges, color=INK, lw=1.4)
            ax.errorbar(h.axes[0].centers, h.values() / width, yerr=np.sqrt(h.variances()) / width, fmt="none",
                        color=AMBER, lw=1.0)
            ax.set_xlabel(label)
            ax.set_ylabel(f"{symbol}  [{unit}{' / ' + xunit if xunit else ''}]")
            ax.spines[["top", "right"]].set_visible(False)
        fig.suptitle(f"{rec['process']['label']}  ·  {names[k]}  ·  {rec['weighting']}, {len(w)} events", fontsize=10,
                     x=0.02, ha="left")
        fig.tight_layout()
        target = out_dir / f"{path.stem}-{k}-{names[k].replace('+', 'plus').replace('-', 'minus')}.png"
        files.append(save_figure(fig, target))
    return files


def save_figure(fig, target: Path, **savefig_options) -> Path:
    """Save a figure as PNG through an exclusive temporary file renamed into place, so that a full
    disk or a failure leaves no partial picture; the figure is closed either way."""
    import matplotlib.pyplot as plt

    from .files import temporary_beside

    try:
        fd, tmp = temporary_beside(target)
    except OSError as exc:
        plt.close(fig)
        raise OutputError(f"{target.parent}: cannot write the plot: {exc.strerror or exc}") from None
    try:
        with open(fd, "wb") as fh:
            fig.savefig(fh, format="png", **{"dpi": 100, **savefig_options})
        tmp.replace(target)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise OutputError(f"{target}: cannot write the plot: {exc.strerror or exc}") from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    finally:
        plt.close(fig)
    return target
