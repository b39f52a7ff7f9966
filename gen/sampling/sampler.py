"""vegas adaptation, weighted sampling and hit-or-miss unweighting.

The integrand is a process's `weights(x)` on the unit hypercube. Adaptation runs the card's
warm-up and result iterations through `vegas.Integrator`, with random numbers from the run's own
generator; the cross-section is the inverse-variance weighted average of the result iterations,
with its chi-square per degree of freedom and Q. Sampling then draws points y uniformly, maps them
through the frozen adapted map (x = map(y), weight f(x) dx/dy), and either keeps them as weighted
events or accepts each with probability w / w_max. Everything runs in chunks of the card's size.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
import vegas

__all__ = ["CrossSection", "adapt", "MapSampler", "UnweightingStats", "bounded_maximum", "chi2_survival"]


def chi2_survival(chi2: float, dof: int) -> float:
    """P(X >= chi2) for a chi-square distribution with an integer number dof of degrees of
    freedom, in closed form (y = chi2/2): e^-y sum_(i<k) y^i/i! for dof = 2k, and
    erfc(sqrt y) + e^-y sum_(i=1..k) y^(i-1/2)/Gamma(i+1/2) for dof = 2k+1 (the regularized upper
    incomplete gamma function at integer and half-integer order; Abramowitz & Stegun 26.4.4-5).
    Written here because importing scipy.special for it cost every run 0.3 s; the tests compare
    it with scipy.special.gammaincc."""
    if dof <= 0:
        return 1.0
    y = 0.5 * max(chi2, 0.0)
    if dof % 2 == 0:
        term, total = 1.0, 1.0
        for i in range(1, dof // 2):
            term *= y / i
            total += term
        return min(1.0, math.exp(-y) * total)
    total = math.erfc(math.sqrt(y))
    if dof > 1:
        term = math.sqrt(y) / math.gamma(1.5)  # y^(1/2) / Gamma(3/2)
        acc = term
        for i in range(2, dof // 2 + 1):
            term *= y / (i - 0.5)
            acc += term
        total += math.exp(-y) * acc
    return min(1.0, total)


@dataclass(frozen=True)
class CrossSection:
    """sigma +- error in pb from the result iterations, with their consistency."""

    value: float
    error: float
    iterations: tuple[tuple[float, float], ...]
    warmup: tuple[tuple[float, float], ...] = ()

    @property
    def chi2_dof(self) -> float:
        n = len(self.iterations)
        if n < 2:
            return 0.0
        return sum(((v - self.value) / e) ** 2 for v, e in self.iterations if e > 0) / (n - 1)

    @property
    def q(self) -> float:
        """Probability of a chi-square at least this large if the iterations agree."""
        n = len(self.iterations)
        return 1.0 if n < 2 else chi2_survival(self.chi2_dof * (n - 1), n - 1)

    def consistent(self, q_min: float) -> bool:
        return self.q >= q_min

    def summary(self, unit: str = "pb") -> str:
        rows = [f"  {'iteration':>9}  {'value [' + unit + ']':>14}  {'error [' + unit + ']':>11}"]
        for i, (v, e) in enumerate(self.iterations, 1):
            rows.append(f"  {i:>9}  {v:>14.6e}  {e:>11.3e}")
        rows.append(f"  {'average':>9}  {self.value:>14.6e}  {self.error:>11.3e}   "
                    f"chi2/dof = {self.chi2_dof:.2f}, Q = {self.q:.2f}")
        return "\n".join(rows)

    def as_dict(self) -> dict:
        return {"value": self.value, "error": self.error, "chi2_per_dof": self.chi2_dof, "q": self.q,
                "iterations": [{"value": v, "error": e} for v, e in self.iterations]}


def _combine(results: list[tuple[float, float]]) -> tuple[float, float]:
    good = [(v, e) for v, e in results if e > 0]
    if not good:  # an integrand constant over the map gives zero variance
        vals = [v for v, _ in results]
        return float(np.mean(vals)), 0.0
    wsum = sum(1.0 / (e * e) for _, e in good)
    return sum(v / (e * e) for v, e in good) / wsum, 1.0 / math.sqrt(wsum)


def adapt(f: Callable[[np.ndarray], np.ndarray], ndim: int, rng: np.random.Generator, *,
          warmup: int, iterations: int, points: int,
          on_iteration: Callable[[int, int, float, float], None] | None = None,
          ) -> tuple[CrossSection, vegas.AdaptiveMap]:
    """Adapt a vegas grid to f on [0, 1]^ndim and estimate its integral (pb)."""
    integ = vegas.Integrator([[0.0, 1.0]] * ndim, ran_array_generator=lambda size: rng.random(size))

    @vegas.lbatchintegrand
    def batch(x):
        return f(np.ascontiguousarray(x))

    done: list[tuple[float, float]] = []
    warm: list[tuple[float, float]] = []
    total = warmup + iterations
    for i in range(total):
        r = integ(batch, nitn=1, neval=points)
        est = (float(r.mean), float(r.sdev))
        (warm if i < warmup else done).append(est)
        if on_iteration is not None:
            cur = _combine(done) if done else est
            on_iteration(i + 1, total, *cur)
    value, error = _combine(done)
    return CrossSection(value, error, tuple(done), tuple(warm)), integ.map


@dataclass
class UnweightingStats:
    """Book-keeping of a hit-or-miss pass."""

    max_weight: float
    trials: int = 0
    accepted: int = 0
    sum_w: float = 0.0
    sum_w2: float = 0.0
    overflow_events: int = 0
    overflow_excess: float = 0.0  # sum over trials of (w - w_max) where positive

    @property
    def efficiency(self) -> float:
        return self.accepted / self.trials if self.trials else 0.0

    @property
    def estimate(self) -> tuple[float, float]:
        """The sampling pass's own estimate of sigma (pb) and its error."""
        if self.trials == 0:
            return 0.0, 0.0
        mean = self.sum_w / self.trials
        var = max(self.sum_w2 / self.trials - mean * mean, 0.0)
        return mean, math.sqrt(var / self.trials)

    @property
    def overflow_share(self) -> float:
        """Share of sigma carried by weights above w_max (lost to hit-or-miss)."""
        return self.overflow_excess / self.sum_w if self.sum_w > 0 else 0.0

    def as_dict(self) -> dict:
        est, err = self.estimate
        return {"max_weight": self.max_weight, "trials": self.trials, "accepted": self.accepted,
                "sum_w": self.sum_w, "sum_w2": self.sum_w2,
                "efficiency": self.efficiency, "overflow_events": self.overflow_events,
                "overflow_share": self.overflow_share, "sampling_estimate": est,
                "sampling_error": err}


#: calibration weights kept for the excess-bounded maximum weight
TOP_WEIGHTS = 20000


def bounded_maximum(weights: np.ndarray, allowed: float) -> float:
    """The lowest of the weights such that the excess sum(w - bound) of those above it stays within
    `allowed` (the largest weight when allowed is 0)."""
    w = np.sort(weights)[::-1]
    # excess over w[k] of the k larger weights: sum_{i<k} w[i] - k w[k], non-decreasing in k
    excess = np.concatenate([[0.0], np.cumsum(w)[:-1]]) - np.arange(w.size) * w
    k = int(np.searchsorted(excess, allowed, side="right")) - 1
    return float(w[max(k, 0)])


class MapSampler:
    """Draws points from a frozen adapted map: x = map(y), y uniform, weight f(x) dx/dy."""

    def __init__(self, f: Callable[[np.ndarray], np.ndarray], amap: vegas.AdaptiveMap, ndim: int, chunk: int):
        self.f = f
        self.map = amap
        self.ndim = ndim
        self.chunk = chunk

    def draw(self, rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray]:
        y = rng.random((n, self.ndim))
        x = np.empty_like(y)
        jac = np.empty(n)
        self.map.map(y, x, jac)
        w = self.f(x) * jac
        if np.any(w < 0) or not np.all(np.isfinite(w)):
            raise FloatingPointError("the integrand returned negative or non-finite weights")
        return x, w

    def max_weight(self, rng: np.random.Generator, n: int, share: float = 0.0,
                   on_chunk: Callable[[int], None] | None = None) -> float:
        """The maximum weight for unweighting from n calibration points: the lowest w_max such that
        the weights above it carry at most `share` of the calibration sum in their excess
        sum(w - w_max) (0: the largest weight). Only the largest TOP_WEIGHTS weights are kept, and
        w_max never goes below the smallest of them. `on_chunk(done)` follows the points drawn."""
        top = np.zeros(0)
        total = 0.0
        for start in range(0, n, self.chunk):
            _, w = self.draw(rng, min(self.chunk, n - start))
            total += float(w.sum())
            top = np.concatenate([top, w[w > 0]])
            if top.size > TOP_WEIGHTS:
                top = np.partition(top, top.size - TOP_WEIGHTS)[-TOP_WEIGHTS:]
            if on_chunk is not None:
                on_chunk(min(start + self.chunk, n))
        if top.size == 0:
            raise FloatingPointError("every calibration point has zero weight")
        return bounded_maximum(top, share * total)

    def unweighted(self, rng: np.random.Generator, n_events: int, stats: UnweightingStats) -> Iterator[np.ndarray]:
        """Yield accepted points (chunks of x) until n_events are accepted, filling stats."""
        wmax = stats.max_weight
        while stats.accepted < n_events:
            # as many points as the acceptance so far says are needed (with a margin), at most a
            # chunk: a slow integrand asked for few events is not evaluated at a whole chunk
            need = n_events - stats.accepted
            if stats.trials:
                size = int(1.3 * need * stats.trials / max(stats.accepted, 1)) + 100
            else:
                size = 2 * need  # a first look at the acceptance
            size = min(self.chunk, max(size, 1000))
            x, w = self.draw(rng, size)
            hit = rng.random(size) * wmax < w
            idx = np.flatnonzero(hit)
            need = n_events - stats.accepted
            if idx.size > need:  # stop the book-keeping at the last event kept
                cut = idx[need - 1] + 1
                x, w, hit, idx = x[:cut], w[:cut], hit[:cut], idx[:need]
            stats.trials += w.size
            stats.accepted += idx.size
            stats.sum_w += float(w.sum())
            stats.sum_w2 += float((w * w).sum())  # not np.dot: BLAS threads would spin on the other core
            over = w > wmax
            if over.any():
                stats.overflow_events += int(over.sum())
                stats.overflow_excess += float((w[over] - wmax).sum())
            if idx.size:
                yield x[idx]

    def weighted(self, rng: np.random.Generator, n_points: int) -> Iterator[tuple[np.ndarray, np.ndarray]]:
        """Yield (x, w / n_points) chunks over n_points draws; points of zero weight are dropped."""
        for start in range(0, n_points, self.chunk):
            x, w = self.draw(rng, min(self.chunk, n_points - start))
            keep = w > 0
            yield x[keep], w[keep] / n_points
