"""Gauss-Legendre quadrature on a grid of equal intervals, for integrating analytic references."""

from __future__ import annotations

import numpy as np

__all__ = ["legendre_grid"]


def legendre_grid(lo: float, hi: float, intervals: int, order: int) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of `order`-point Gauss-Legendre rules on `intervals` equal pieces of [lo, hi]:
    sum(w * f(x)) approximates the integral of f over [lo, hi]."""
    g, gw = np.polynomial.legendre.leggauss(order)
    edges = np.linspace(lo, hi, intervals + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    return (mid[:, None] + half[:, None] * g[None, :]).ravel(), (half[:, None] * gw[None, :]).ravel()
