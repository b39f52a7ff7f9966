"""Validate an event file against the analytic reference of its process.

For each observable of the first outgoing particle (cos theta* in the centre-of-mass frame; the
laboratory transverse momentum, rapidity and energy when they vary), the file's events are
histogrammed with boost-histogram and each bin is compared with the reference's integral over
that bin, with the card's cuts applied. The reference (`gen.references`) is integrated on a fine
Gauss-Legendre grid in cos theta*, which also gives the reference's own numerical error.

Statistics. Unweighted files: Pearson chi-square of the counts against N times the reference's
bin fractions (a shape test, bins - 1 degrees of freedom), pulls (n - mu)/sqrt(mu). Weighted
files: bin sums of weights against the reference's bin cross-sections with the variance sum w^2
(absolute, `bins` degrees of freedom). The total cross-section (sum of the file's weights) against
the reference's, in standard deviations of their combined error (the file's reported error, the
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
from scipy.stats import chi2 as _chi2

from .card import parse_card
from .errors import CardError, OutputError, UserError
from .card import SPEC
from .process import ManyBody, TwoToTwo, build_process
from .references import REFERENCES, Reference
from .particles import species
from .store import read_run

__all__ = ["validate", "Thresholds", "OBSERVABLES", "observables_of"]

SPEC_DEFAULTS = {k: key.default for k, key in SPEC["cuts"].items()}


@dataclass(frozen=True)
class Thresholds:
    p_min: float = 1e-4
    pull_max: float = 6.0
    sigma_max: float = 5.0


#: name -> (axis label with unit, unit)
OBSERVABLES = {
    "cos_theta_cm": ("cos θ* of the first outgoing particle (centre-of-mass frame)", ""),
    "pt": ("transverse momentum p_T of the first outgoing particle [GeV]", "GeV"),
    "rapidity": ("rapidity y of the first outgoing particle (laboratory)", ""),
    "energy": ("energy E of the first outgoing particle (laboratory) [GeV]", "GeV"),
    "x_quark": ("quark energy fraction 2E/√s (centre-of-mass frame)", ""),
    "x_antiquark": ("antiquark energy fraction 2E/√s (centre-of-mass frame)", ""),
    "x_gluon": ("gluon energy fraction 2E/√s (centre-of-mass frame)", ""),
    "pair_mass": ("invariant mass of the outgoing pair [GeV]", "GeV"),
    "pair_rapidity": ("rapidity of the outgoing pair (laboratory)", ""),
}

#: the hadron-collider reference: Drell-Yan lepton pairs (see `_drell_yan_grid`)
DRELL_YAN = Reference(
    "hadron.drell_yan",
    "dsigma/dM dy = (2M/s) sum over subprocesses of sigma(q qbar -> gamma*/Z -> l l)(M^2) f_a(x1) f_b(x2), "
    "x1,2 = (M/sqrt s) e^(+-y), densities of the sample's set at mu_F = M; sigma(q qbar -> l l) is the "
    "e+e- -> q qbar reference (Ellis, Stirling & Webber (1996) sec. 3.1) with N_c -> 1/N_c",
    None, lambda s, par: 0.0)


def _pair_observables(p: np.ndarray) -> dict[str, np.ndarray]:
    """Mass and laboratory rapidity of the sum of the two outgoing particles (p: (N, 4, 4))."""
    q = p[:, 2] + p[:, 3]
    m = np.sqrt(np.clip(q[:, 0] ** 2 - (q[:, 1:] ** 2).sum(1), 0.0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        y = 0.5 * np.log((q[:, 0] + q[:, 3]) / (q[:, 0] - q[:, 3]))
    return {"pair_mass": m, "pair_rapidity": y}


def _drell_yan_grid(proc, rec: dict, intervals: int):
    """Gauss-Legendre nodes in (M, y) with their reference weights (pb) and observables."""
    cfg = proc.cfg
    scales = cfg.scales
    if (any(sub.spec.resonance != ("m_Z", "width_Z") for sub in proc.subs) or len(proc.subs[0].outgoing) != 2
            or any(cfg.cuts[k] != v for k, v in SPEC_DEFAULTS.items() if k not in ("mass_min", "mass_max", "particles"))
            or "particles" in cfg.cuts or scales["factorization"] not in ("auto", "sqrt_shat") or scales["factor"] != 1
            or proc.beta != 0.0):
        raise UserError(f"{cfg.source}: gen validate covers hadron-collider samples of Drell-Yan lepton pairs at "
                        "symmetric beams with mass cuts only and the factorization scale at the pair mass")
    s = proc.s
    m_lo, m_hi = math.sqrt(proc.shat_min), math.sqrt(proc.shat_max)
    xm, wm = np.polynomial.legendre.leggauss(4)
    edges = np.linspace(m_lo, m_hi, intervals + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    m = (mid[:, None] + half[:, None] * xm[None, :]).ravel()
    w_m = (half[:, None] * wm[None, :]).ravel()
    # y in 100 intervals of 4 nodes across |y| <= -ln(M^2/s)/2, so that the reference fills y bins smoothly
    ey = np.linspace(-1.0, 1.0, 101)
    xy = (0.5 * (ey[1:] + ey[:-1])[:, None] + 0.5 * np.diff(ey)[:, None] * xm[None, :]).ravel()
    wy = (0.5 * np.diff(ey)[:, None] * wm[None, :]).ravel()
    ylim = -0.5 * np.log(m * m / s)
    y = (ylim[:, None] * xy[None, :]).ravel()
    w = (w_m[:, None] * ylim[:, None] * wy[None, :]).ravel()
    mm = np.repeat(m, xy.size)
    x1, x2 = mm / math.sqrt(s) * np.exp(y), mm / math.sqrt(s) * np.exp(-y)
    f1 = proc.pdf.xfx_many(proc.pids1, x1, mm) / x1
    f2 = proc.pdf.xfx_many(proc.pids2, x2, mm) / x2
    c, wc = np.polynomial.legendre.leggauss(8)
    par = dict(rec["parameters"]["model"], m1=0.0, m2=0.0, m3=0.0, m4=0.0)
    dens = np.zeros_like(mm)
    for k, sub in enumerate(proc.subs):
        quark = next(p for p in sub.partons if species(p).pdg > 0)
        sigma_hat = np.array([(wc * REFERENCES[f"electroweak.gamma_z.{quark}"].density(c, sh, par)).sum()
                              for sh in (m * m)]) / 9.0  # N_c = 3 -> 1/N_c: colour averaged, not summed
        dens += np.repeat(sigma_hat, xy.size) * f1[proc.sub_a[k]] * f2[proc.sub_b[k]]
    return w * 2.0 * mm / s * dens, {"pair_mass": mm, "pair_rapidity": y}



def observables_of(p: np.ndarray, beta_cm: float) -> dict[str, np.ndarray]:
    """The observables of four-momenta p (N, 4) in the laboratory; beta_cm boosts to the CM frame."""
    e, px, py, pz = p[:, 0], p[:, 1], p[:, 2], p[:, 3]
    g = 1.0 / math.sqrt((1.0 - beta_cm) * (1.0 + beta_cm))
    pz_cm = g * (pz - beta_cm * e)
    pt = np.hypot(px, py)
    pcm = np.sqrt(pt * pt + pz_cm * pz_cm)
    with np.errstate(divide="ignore", invalid="ignore"):
        y = 0.5 * np.log((e + pz) / (e - pz))
        cos_cm = np.where(pcm > 0, pz_cm / pcm, 1.0)
    return {"cos_theta_cm": cos_cm, "pt": pt, "rapidity": y, "energy": e}


def _reference_grid(proc: TwoToTwo, ref: Reference, par: dict, s: float, intervals: int):
    """Fine-grid nodes of cos theta* with their reference weights (pb, zero where cut) and observables."""
    nodes, gw = np.polynomial.legendre.leggauss(6)
    lo, hi = proc.map.lo, proc.map.hi
    edges = np.linspace(lo, hi, intervals + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    c = (mid[:, None] + half[:, None] * nodes[None, :]).ravel()
    w = (half[:, None] * gw[None, :]).ravel() * ref.density(c, s, par)
    lab = proc._lab_outgoing(c, np.zeros_like(c))
    w = np.where(proc.cut_mask(lab), w, 0.0)
    return w, observables_of(lab[:, 0, :], proc.beta)


def _dalitz_grid(proc: ManyBody, ref: Reference, par: dict, s: float, n: int):
    """Gauss-Legendre nodes over the massless Dalitz triangle (x1 in [0, 1], x2 in [1 - x1, 1]), their
    reference weights (pb) with the pair-mass cuts, and the energy-fraction observables."""
    cuts = proc.cfg.cuts
    others = {k: v for k, v in cuts.items() if k not in ("pair_mass_min", "particles")}
    if any(v != SPEC_DEFAULTS[k] for k, v in others.items()) or "particles" in cuts:
        raise UserError("validation of three-parton samples supports the Lorentz-invariant cuts.pair_mass_min "
                        "on all partons only; this card also cuts on " + ", ".join(
                            k for k, v in others.items() if v != SPEC_DEFAULTS[k]) or "particles")
    g, gw = np.polynomial.legendre.leggauss(4)
    edges = np.linspace(0.0, 1.0, n + 1)
    half, mid = 0.5 * np.diff(edges), 0.5 * (edges[1:] + edges[:-1])
    u = (mid[:, None] + half[:, None] * g[None, :]).ravel()
    wu = (half[:, None] * gw[None, :]).ravel()
    x1 = np.repeat(u, u.size)
    v = np.tile(u, u.size)
    wt = np.repeat(wu, u.size) * np.tile(wu, u.size) * x1  # dx2 = x1 dv
    x2 = 1.0 - x1 + x1 * v
    x3 = 2.0 - x1 - x2
    ymin = cuts.get("pair_mass_min", 0.0) ** 2 / s
    ok = (1 - x1 >= ymin) & (1 - x2 >= ymin) & (1 - x3 >= ymin) & (x1 < 1) & (x2 < 1)
    w = np.where(ok, wt * ref.density(np.where(ok, x1, 0.5), np.where(ok, x2, 0.5), s, par), 0.0)
    return w, {"x_quark": x1, "x_antiquark": x2, "x_gluon": x3}


def _energy_fractions(p: np.ndarray, beta_cm: float, sqrt_s: float, idx: list[int]) -> dict[str, np.ndarray]:
    g = 1.0 / math.sqrt((1.0 - beta_cm) * (1.0 + beta_cm))
    e_cm = g * (p[:, :, 0] - beta_cm * p[:, :, 3])
    return {name: 2.0 * e_cm[:, i] / sqrt_s for name, i in zip(("x_quark", "x_antiquark", "x_gluon"), idx)}


def _canonical_params(rec: dict, proc: TwoToTwo) -> dict:
    names = rec["process"]["incoming"] + rec["process"]["outgoing"]
    masses = [rec["parameters"]["masses_GeV"][n] for n in names]
    par = dict(rec["parameters"]["model"])
    par.update({f"m{k + 1}": masses[i] for k, i in enumerate(proc.canonical)})
    return par


def validate(path: str | Path, out: str | Path | None = None, bins: int = 20,
             thresholds: Thresholds = Thresholds(), plots: bool = True) -> dict:
    """Validate one event file; returns the report (also written as JSON, with PNG plots)."""
    path = Path(path)
    rec = read_run(path)
    try:
        cfg = parse_card(rec["card"]["text"], rec["card"]["path"])
        proc = build_process(cfg)
    except CardError as exc:
        raise OutputError(f"{path}: the card stored in the file cannot be used: {exc}") from None
    hadron = hasattr(proc, "subs") and not hasattr(proc, "chain")
    if not hasattr(proc, "spec") and not hadron:
        raise UserError(f"{path}: gen validate covers processes without decays; decay chains are checked by the "
                        "test suite (tests/test_decays.py)")
    if hadron:
        ref = DRELL_YAN
        w_ref, o_ref = _drell_yan_grid(proc, rec, 400)
        w_half, _ = _drell_yan_grid(proc, rec, 200)
        return _compare(path, rec, ref, w_ref, o_ref, w_half, 0.0, bins, thresholds, plots, out, "pair")
    spec = proc.spec
    if spec.reference is None or spec.reference not in REFERENCES:
        raise UserError(f"{path}: no analytic reference for {spec.label} in the {spec.model} model; "
                        "validation covers: " + ", ".join(sorted(REFERENCES)))
    ref = REFERENCES[spec.reference]
    par = _canonical_params(rec, proc)
    s = rec["collider"]["sqrt_s_GeV"] ** 2
    three = isinstance(proc, ManyBody)
    if three:
        par["charge"] = proc.species[proc.canonical[2]].charge
        w_ref, o_ref = _dalitz_grid(proc, ref, par, s, 600)
        w_half, _ = _dalitz_grid(proc, ref, par, s, 300)
    else:
        w_ref, o_ref = _reference_grid(proc, ref, par, s, 40000)
        w_half, _ = _reference_grid(proc, ref, par, s, 20000)
    return _compare(path, rec, ref, w_ref, o_ref, w_half, ref.accuracy(s, par), bins, thresholds, plots, out,
                    "three" if three else "two", (proc, s))


def _compare(path, rec, ref, w_ref, o_ref, w_half, accuracy, bins, thresholds, plots, out, kind, ctx=None) -> dict:
    """Histogram the file against the reference grid and write the report."""
    import boost_histogram as bh

    sigma_ref = float(w_ref.sum())
    sigma_ref_num = abs(sigma_ref - float(w_half.sum()))
    sigma_ref_acc = accuracy * sigma_ref

    axes = {}
    for name, vals in o_ref.items():
        live = vals[w_ref > 0]
        lo, hi = float(live.min()), float(live.max())
        if hi - lo <= 1e-9 * max(abs(hi), abs(lo), 1.0):
            continue  # constant at fixed beam energies (e.g. the energy in the CM frame)
        pad = 1e-9 * (hi - lo)
        axes[name] = bh.axis.Regular(bins, lo - pad, hi + pad)
    hists = {n: bh.Histogram(ax, storage=bh.storage.Weight()) for n, ax in axes.items()}
    refs = {}
    for n, ax in axes.items():
        refs[n] = bh.Histogram(ax, storage=bh.storage.Double()).fill(o_ref[n], weight=w_ref).values()

    sum_w = sum_w2 = 0.0
    n_events = 0
    pf = pq.ParquetFile(path)
    for batch in pf.iter_batches(columns=["weight", "particles"], batch_size=200000):
        w = batch.column(0).to_numpy()
        parts = batch.column(1)
        flat = parts.flatten()
        n = int(parts.offsets[1].as_py() - parts.offsets[0].as_py()) if len(parts) else 0
        comp = np.stack([flat.field(k).to_numpy(zero_copy_only=False) for k in ("e", "px", "py", "pz")], -1)
        mom = comp.reshape(len(w), n, 4)
        if kind == "pair":
            obs = _pair_observables(mom)
        elif kind == "three":
            proc, s = ctx
            obs = _energy_fractions(mom, rec["collider"]["cm_beta_z"], math.sqrt(s), proc.canonical[2:5])
        else:
            obs = observables_of(mom[:, 2, :], rec["collider"]["cm_beta_z"])
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
        sigma_err = total["error_pb"] * (sum_w / total["value_pb"]) if total["value_pb"] else 0.0
    comb = math.sqrt(sigma_err**2 + sigma_ref_num**2 + sigma_ref_acc**2)
    sigma_pull = (sum_w - sigma_ref) / comb if comb > 0 else (0.0 if sum_w == sigma_ref else math.inf)

    results = []
    out_dir = Path(out) if out is not None else path.parent / "validation"
    for name, h in hists.items():
        view = h.view(flow=True)
        flow_events = float(view.value[0] + view.value[-1])
        val, var = h.values(), h.variances()
        r = refs[name]
        if weighted:
            # absolute test; an empty bin gets the variance of one event of the mean weight
            expect = r
            mean_w = sum_w / n_events if n_events else 0.0
            err = np.sqrt(np.where(var > 0, var, np.maximum(r, 0.0) * mean_w))
            dof = int(np.count_nonzero(expect > 0))
        else:
            # shape test on counts, reported in pb per bin (counts times the common event weight)
            unit = sum_w / n_events if n_events else 1.0
            expect_counts = n_events * r / r.sum()
            expect, err = expect_counts * unit, np.sqrt(expect_counts) * unit
            dof = int(np.count_nonzero(expect_counts > 0)) - 1
        ok = err > 0
        pulls = np.zeros_like(val)
        pulls[ok] = (val[ok] - expect[ok]) / err[ok]
        chi2 = float((pulls[ok] ** 2).sum())
        p_value = float(_chi2.sf(chi2, dof)) if dof > 0 else 1.0
        max_pull = float(np.abs(pulls).max()) if pulls.size else 0.0
        passed = p_value >= thresholds.p_min and max_pull <= thresholds.pull_max
        item = {"name": name, "label": OBSERVABLES[name][0], "unit": OBSERVABLES[name][1],
                "edges": h.axes[0].edges.tolist(), "sample_pb": val.tolist(), "sample_error_pb": err.tolist(),
                "reference_pb": expect.tolist(), "pulls": pulls.tolist(),
                "chi2": chi2, "dof": dof, "chi2_per_dof": chi2 / dof if dof > 0 else 0.0,
                "p_value": p_value, "max_pull": max_pull, "events_outside": flow_events, "pass": passed}
        results.append(item)
    verdict = all(r["pass"] for r in results) and abs(sigma_pull) <= thresholds.sigma_max
    report = {
        "file": str(path), "weighting": rec["weighting"], "process": rec["process"]["label"],
        "model": rec["process"]["model"], "events": n_events,
        "reference": {"name": ref.name, "source": " ".join(ref.source.split())},
        "thresholds": {"p_min": thresholds.p_min, "pull_max": thresholds.pull_max, "sigma_max": thresholds.sigma_max},
        "cross_section": {"sample_pb": sum_w, "sample_error_pb": sigma_err, "reference_pb": sigma_ref,
                          "reference_numerical_error_pb": sigma_ref_num, "reference_accuracy_pb": sigma_ref_acc,
                          "pull": sigma_pull, "pass": abs(sigma_pull) <= thresholds.sigma_max},
        "observables": results,
        "verdict": "pass" if verdict else "fail",
    }
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
        if plots:
            from .plots import validation_plot

            for item in results:
                item["plot"] = str(validation_plot(report, item, out_dir / f"{path.stem}-{item['name']}.png"))
        report_path = out_dir / f"{path.stem}.validation.json"
        report_path.write_text(json.dumps(report, indent=1), encoding="utf-8")
    except OSError as exc:
        raise OutputError(f"{out_dir}: cannot write the validation report: {exc.strerror or exc}") from None
    report["report"] = str(report_path)
    return report
