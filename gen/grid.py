"""Adapt once, sample many: the adapted vegas grid as a plain-data file.

A grid file is JSON: the format name and version, the program version, the card it was adapted
for (text and a digest of the validated physics settings), the vegas grid nodes, the
adaptation's cross-section with its iterations, and the maximum weight found by the calibration
sample, which every part uses for unweighting. A checksum over the content detects corruption.
No pickle: a grid is data, and loading it runs no code.
"""

from __future__ import annotations

import hashlib
import json
import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import vegas

from . import __version__
from .card import RunConfig
from .errors import UserError
from .progress import Progress
from .sampler import CrossSection, MapSampler, adapt

__all__ = ["Grid", "GridError", "ConsistencyWarning", "make_grid", "physics_digest", "streams"]

FORMAT = "gen.grid"
VERSION = 1


class ConsistencyWarning(UserWarning):
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
        **({"partons": cfg.partons, "scales": cfg.scales} if cfg.incoming[0].is_hadron else {}),
        **({"decays": {k: vars(d) for k, d in cfg.decays.items()}} if cfg.decays else {}),
        "calibration_points": cfg.sampling["calibration_points"],
    }
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()[:32]


def streams(seed: int, job: int | None = None) -> list[np.random.Generator]:
    """Independent generators: [adaptation, calibration] for job None, else [unweighted, weighted] of that job.

    Keys: (0,) for the grid, (1, job) for part `job`; no two streams share a spawn key.
    """
    key = (0,) if job is None else (1, job)
    return [np.random.default_rng(s) for s in np.random.SeedSequence(seed, spawn_key=key).spawn(2)]


@dataclass(frozen=True)
class Grid:
    digest: str
    card_text: str
    card_path: str
    ndim: int
    nodes: tuple[tuple[float, ...], ...]
    cross_section: CrossSection
    max_weight: float

    def adaptive_map(self) -> vegas.AdaptiveMap:
        return vegas.AdaptiveMap([list(n) for n in self.nodes])

    @property
    def checksum(self) -> str:
        return hashlib.sha256(json.dumps(self._payload(), sort_keys=True).encode()).hexdigest()[:32]

    def _payload(self) -> dict:
        xs = self.cross_section
        return {"format": FORMAT, "version": VERSION, "digest": self.digest,
                "card": {"path": self.card_path, "text": self.card_text}, "ndim": self.ndim,
                "nodes": [list(n) for n in self.nodes],
                "cross_section": {"value_pb": xs.value, "error_pb": xs.error,
                                  "iterations": [list(i) for i in xs.iterations],
                                  "warmup": [list(i) for i in xs.warmup]},
                "max_weight_pb": self.max_weight}

    def save(self, path: str | Path) -> Path:
        """Write atomically (temporary name, then rename)."""
        p = Path(path)
        doc = dict(self._payload(), program=f"gen {__version__}", checksum=self.checksum)
        tmp = p.with_name(f".{p.name}.partial-{os.getpid()}")
        try:
            p.parent.mkdir(parents=True, exist_ok=True)
            tmp.write_text(json.dumps(doc, indent=1), encoding="utf-8")
            os.replace(tmp, p)
        except OSError as exc:
            tmp.unlink(missing_ok=True)
            raise GridError(f"{p}: cannot write the grid: {exc.strerror or exc}") from None
        return p

    @classmethod
    def load(cls, path: str | Path) -> "Grid":
        p = Path(path)
        try:
            doc = json.loads(p.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise GridError(f"{p}: no such grid file (make one with `gen adapt CARD -o {p}`)") from None
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise GridError(f"{p}: not a gen grid file (unreadable JSON: {exc})") from None
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise GridError(f"{p}: not a gen grid file (no format '{FORMAT}')")
        if doc.get("version") != VERSION:
            raise GridError(f"{p}: grid format version {doc.get('version')!r}; this gen reads version {VERSION}")
        try:
            xs = doc["cross_section"]
            grid = cls(digest=doc["digest"], card_text=doc["card"]["text"], card_path=doc["card"]["path"],
                       ndim=int(doc["ndim"]), nodes=tuple(tuple(float(v) for v in n) for n in doc["nodes"]),
                       cross_section=CrossSection(float(xs["value_pb"]), float(xs["error_pb"]),
                                                  tuple((float(a), float(b)) for a, b in xs["iterations"]),
                                                  tuple((float(a), float(b)) for a, b in xs["warmup"])),
                       max_weight=float(doc["max_weight_pb"]))
        except (KeyError, TypeError, ValueError) as exc:
            raise GridError(f"{p}: corrupted grid file (missing or malformed {exc})") from None
        if grid.checksum != doc.get("checksum"):
            raise GridError(f"{p}: corrupted grid file (checksum mismatch)")
        if len(grid.nodes) != grid.ndim or any(len(n) < 2 or list(n) != sorted(n) for n in grid.nodes):
            raise GridError(f"{p}: corrupted grid file (grid nodes are not increasing)")
        return grid

    def check_card(self, cfg: RunConfig, source: str) -> None:
        """Refuse a grid adapted for other physics settings than the card's."""
        if physics_digest(cfg) != self.digest:
            raise GridError(f"{source}: the grid was adapted for another card or seed ({self.card_path}); "
                            "process, collider, parameters, cuts, integration settings and seed must match; "
                            "adapt a new grid with `gen adapt`")


def make_grid(proc, cfg: RunConfig, progress: Progress | None = None) -> Grid:
    """Adapt vegas to the process, then find the maximum weight on the frozen grid."""
    progress = progress or Progress(enabled=False)
    integ = cfg.integration
    rng_adapt, rng_cal = streams(cfg.sampling["seed"])
    progress.stage("adapt", integ["warmup_iterations"] + integ["iterations"])
    xs, amap = adapt(proc.weights, proc.ndim, rng_adapt, warmup=integ["warmup_iterations"],
                     iterations=integ["iterations"], points=integ["points_per_iteration"],
                     on_iteration=lambda i, n, v, e: progress.update(i, f"σ = {v:.5e} ± {e:.2e} pb"))
    progress.end(f"σ = {xs.value:.5e} ± {xs.error:.2e} pb")
    if not xs.consistent(integ["consistency_min_q"]):
        warnings.warn(f"the vegas iterations disagree (chi2/dof = {xs.chi2_dof:.2f}, Q = {xs.q:.3g} < "
                      f"integration.consistency_min_q = {integ['consistency_min_q']}); raise "
                      "integration.warmup_iterations or points_per_iteration", ConsistencyWarning, stacklevel=3)
    # each dimension has its own number of increments; the rows of amap.grid are padded past them
    ninc = np.asarray(amap.ninc)
    grid = np.asarray(amap.grid)
    nodes = tuple(tuple(float(v) for v in grid[d, :ninc[d] + 1]) for d in range(proc.ndim))
    # calibrate on the map rebuilt from the stored nodes, exactly as every part will sample it
    sampler = MapSampler(proc.weights, vegas.AdaptiveMap([list(n) for n in nodes]), proc.ndim, cfg.sampling["chunk"])
    wmax = sampler.max_weight(rng_cal, cfg.sampling["calibration_points"])
    return Grid(physics_digest(cfg), cfg.text, cfg.source, proc.ndim, nodes, xs, wmax)
