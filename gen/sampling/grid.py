"""Adapt once, sample many: the adapted vegas grid as a plain-data file.

A grid file is JSON: the format name and version, the program version, the card it was adapted
for (text and a digest of the validated physics settings), the process's phase-space channels
(name and number of variables each) with the vegas grid nodes of each dimension, the
adaptation's result with its iterations, and the maximum weight found by the calibration sample,
which every part uses for unweighting. No pickle: a grid is data, and loading it runs no code.

Loading checks every number (nodes increasing inside [0, 1], a finite positive maximum weight, a
finite result), and a grid is checked against the process it is used with (the card's digest and
the channel layout) before anything is sampled. The checksum is an integrity check of our own
writing (it catches truncation and accidental edits); it is an unkeyed SHA-256, not a signature.
"""

from __future__ import annotations

import hashlib
import json
import math
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import vegas

from ..card import RunConfig
from ..errors import GenWarning, UserError
from ..files import write_atomically
from ..progress import Progress
from ..version import __version__
from ..processes.guard import guarded
from .sampler import CrossSection, MapSampler, adapt

__all__ = ["Grid", "GridError", "ConsistencyWarning", "make_grid", "physics_digest", "streams"]

FORMAT = "gen.grid"
VERSION = 2


class ConsistencyWarning(GenWarning):
    """The vegas iterations disagree more than their errors allow."""


class GridError(UserError):
    """A grid file that cannot be used: missing, corrupted, foreign or made for another card."""


def physics_digest(cfg: RunConfig) -> str:
    """Digest of everything that shapes the adapted grid: process, beams, parameters, cuts,
    integration settings, the seed and the calibration size (not the number of events)."""
    doc = {
        "model": cfg.model, "incoming": [p.name for p in cfg.incoming], "outgoing": [p.name for p in cfg.outgoing],
        "collider": cfg.collider, "parameters": cfg.parameters,
        "masses": {str(k): v for k, v in sorted(cfg.masses.items())},
        "widths": {str(k): v for k, v in sorted(cfg.widths.items())},
        "cuts": cfg.cuts, "integration": cfg.integration, "seed": cfg.sampling["seed"],
        **({"partons": cfg.partons, "scales": cfg.scales} if cfg.hadron_beams else {}),
        **({"decays": cfg.decays} if cfg.decays else {}),
        "calibration_points": cfg.sampling["calibration_points"],
        "overweight_share": cfg.sampling["overweight_share"],
    }
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()[:32]


def streams(seed: int, job: int | None = None) -> list[np.random.Generator]:
    """Independent generators: [adaptation, calibration] for job None, else [unweighted, weighted] of that job.

    Keys: (0,) for the grid, (1, job) for part `job`, (2,) for the probe of the integrand when the
    process is built (`gen.processes.guard`); no two streams share a spawn key.
    """
    key = (0,) if job is None else (1, job)
    return [np.random.default_rng(s) for s in np.random.SeedSequence(seed, spawn_key=key).spawn(2)]



@dataclass(frozen=True)
class Grid:
    digest: str
    card_text: str
    card_path: str
    #: (name, number of variables) of each phase-space channel
    channels: tuple[tuple[str, int], ...]
    nodes: tuple[tuple[float, ...], ...]
    cross_section: CrossSection
    max_weight: float

    @property
    def ndim(self) -> int:
        return sum(n for _, n in self.channels)

    def adaptive_map(self) -> vegas.AdaptiveMap:
        return vegas.AdaptiveMap([list(n) for n in self.nodes])

    @property
    def checksum(self) -> str:
        return hashlib.sha256(json.dumps(self._payload(), sort_keys=True).encode()).hexdigest()[:32]

    def _payload(self) -> dict:
        xs = self.cross_section
        return {"format": FORMAT, "version": VERSION, "digest": self.digest,
                "card": {"path": self.card_path, "text": self.card_text},
                "channels": [{"name": name, "ndim": n} for name, n in self.channels],
                "nodes": [list(n) for n in self.nodes],
                "result": {"value": xs.value, "error": xs.error, "iterations": [list(i) for i in xs.iterations],
                           "warmup": [list(i) for i in xs.warmup]},
                "max_weight": self.max_weight}

    def save(self, path: str | Path) -> Path:
        """Write atomically (a new temporary file, then rename)."""
        p = Path(path)
        doc = dict(self._payload(), program=f"gen {__version__}", checksum=self.checksum)
        try:
            write_atomically(p, json.dumps(doc, indent=1))
        except OSError as exc:
            raise GridError(f"{p}: cannot write the grid: {exc.strerror or exc}") from None
        return p

    @classmethod
    def load(cls, path: str | Path) -> "Grid":
        p = Path(path)
        try:
            doc = json.loads(p.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise GridError(f"{p}: no such grid file (make one with `gen adapt CARD -o {p}`)") from None
        except IsADirectoryError:
            raise GridError(f"{p}: is a folder, not a grid file") from None
        except (OSError, UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
            raise GridError(f"{p}: not a gen grid file (unreadable JSON: {exc})") from None
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise GridError(f"{p}: not a gen grid file (no format '{FORMAT}')")
        if doc.get("version") != VERSION:
            raise GridError(f"{p}: grid format version {doc.get('version')!r}; this gen reads version {VERSION} "
                            "(adapt the grid again with `gen adapt`)")
        try:
            xs = doc["result"]
            grid = cls(digest=str(doc["digest"]), card_text=str(doc["card"]["text"]), card_path=str(doc["card"]["path"]),
                       channels=tuple((str(c["name"]), int(c["ndim"])) for c in doc["channels"]),
                       nodes=tuple(tuple(float(v) for v in n) for n in doc["nodes"]),
                       cross_section=CrossSection(float(xs["value"]), float(xs["error"]),
                                                  tuple((float(a), float(b)) for a, b in xs["iterations"]),
                                                  tuple((float(a), float(b)) for a, b in xs["warmup"])),
                       max_weight=float(doc["max_weight"]))
        except (KeyError, TypeError, ValueError, OverflowError) as exc:
            raise GridError(f"{p}: corrupted grid file (missing or malformed {exc})") from None
        if grid.checksum != doc.get("checksum"):
            raise GridError(f"{p}: corrupted grid file (checksum mismatch)")
        grid._check_numbers(p)
        return grid

    def _check_numbers(self, p: Path) -> None:
        if len(self.nodes) != self.ndim or any(n < 1 for _, n in self.channels):
            raise GridError(f"{p}: corrupted grid file ({len(self.nodes)} node rows for channels of "
                            f"{self.ndim} variables)")
        for d, row in enumerate(self.nodes):
            a = np.asarray(row)
            if a.size < 2 or not np.all(np.isfinite(a)) or np.any(np.diff(a) <= 0) or a[0] < 0.0 or a[-1] > 1.0:
                raise GridError(f"{p}: corrupted grid file (the nodes of dimension {d} are not increasing inside [0, 1])")
        xs = self.cross_section
        numbers = [xs.value, xs.error] + [v for it in xs.iterations + xs.warmup for v in it]
        if not all(math.isfinite(v) for v in numbers) or xs.value < 0 or xs.error < 0:
            raise GridError(f"{p}: corrupted grid file (the adaptation's result is not a finite non-negative number)")
        if not (math.isfinite(self.max_weight) and self.max_weight > 0):
            raise GridError(f"{p}: corrupted grid file (maximum weight {self.max_weight!r}; expected a finite positive "
                            "number)")

    def check_card(self, cfg: RunConfig, source: str) -> None:
        """Refuse a grid adapted for other physics settings than the card's."""
        if physics_digest(cfg) != self.digest:
            raise GridError(f"{source}: the grid was adapted for another card or seed ({self.card_path}); "
                            "process, collider, parameters, cuts, integration settings and seed must match; "
                            "adapt a new grid with `gen adapt`")

    def check_process(self, proc, source: str) -> None:
        """Refuse a grid whose channel layout is not the process's."""
        layout = tuple((c.name, c.ndim) for c in proc.channels)
        if layout != self.channels:
            raise GridError(f"{source}: the grid's phase-space channels {list(self.channels)} are not the process's "
                            f"{list(layout)}; adapt a new grid with `gen adapt`")


def make_grid(proc, cfg: RunConfig, progress: Progress | None = None) -> Grid:
    """Adapt vegas to the process, then find the maximum weight on the frozen grid (the lowest bound
    above which the calibration weights carry at most sampling.overweight_share of their sum)."""
    progress = progress or Progress(enabled=False)
    integ = cfg.integration
    unit = proc.measure.unit
    weights = guarded(proc)
    rng_adapt, rng_cal = streams(cfg.sampling["seed"])
    progress.stage("adapt", integ["warmup_iterations"] + integ["iterations"])
    xs, amap = adapt(weights, proc.ndim, rng_adapt, warmup=integ["warmup_iterations"],
                     iterations=integ["iterations"], points=integ["points_per_iteration"],
                     on_iteration=lambda i, n, v, e: progress.update(i, f"{proc.measure.symbol} = {v:.5e} ± {e:.2e} {unit}"))
    progress.end(f"{proc.measure.symbol} = {xs.value:.5e} ± {xs.error:.2e} {unit}")
    if not xs.consistent(integ["consistency_min_q"]):
        warnings.warn(f"the vegas iterations disagree (chi2/dof = {xs.chi2_dof:.2f}, Q = {xs.q:.3g} < "
                      f"integration.consistency_min_q = {integ['consistency_min_q']}); raise "
                      "integration.warmup_iterations or points_per_iteration", ConsistencyWarning, stacklevel=3)
    # each dimension has its own number of increments; the rows of amap.grid are padded past them
    ninc = np.asarray(amap.ninc)
    grid = np.asarray(amap.grid)
    nodes = tuple(tuple(float(v) for v in grid[d, :ninc[d] + 1]) for d in range(proc.ndim))
    # calibrate on the map rebuilt from the stored nodes, exactly as every part will sample it
    sampler = MapSampler(weights, vegas.AdaptiveMap([list(n) for n in nodes]), proc.ndim, cfg.sampling["chunk"])
    n_cal = cfg.sampling["calibration_points"]
    # a stage of its own: at milliseconds per point (p p -> 3 jets) it takes minutes
    progress.stage("calibrate", n_cal)
    wmax = sampler.max_weight(rng_cal, n_cal, cfg.sampling["overweight_share"],
                              on_chunk=lambda done: progress.update(done, f"{done} of {n_cal} points for w_max"))
    progress.end(f"w_max from {n_cal} points")
    return Grid(physics_digest(cfg), cfg.text, cfg.source, tuple((c.name, c.ndim) for c in proc.channels), nodes, xs,
                wmax)
