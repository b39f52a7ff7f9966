"""Shared helpers: build cards as text and integrate them without writing files."""

from __future__ import annotations

import numpy as np
import pytest

from gen.card import parse_card
from gen.processes import build_process
from gen.sampling.sampler import adapt


def card(model: str, incoming, outgoing, collider: str, extra: str = "", sampling: str = "") -> str:
    q = lambda xs: "[" + ", ".join(f'"{x}"' for x in xs) + "]"  # noqa: E731
    return (f'[process]\nmodel = "{model}"\nincoming = {q(incoming)}\noutgoing = {q(outgoing)}\n'
            f"[collider]\n{collider}\n{extra}\n[sampling]\n{sampling}\n")


def integrate(text: str, seed: int = 7, warmup: int = 5, iterations: int = 8, points: int = 20000):
    """(process, CrossSection) for card text, vegas only."""
    proc = build_process(parse_card(text, "test.toml"))
    xs, _ = adapt(proc.weights, proc.ndim, np.random.default_rng(seed), warmup=warmup,
                  iterations=iterations, points=points)
    return proc, xs


def within(value: float, error: float, ref: float, k: float = 5.0, rel_floor: float = 1e-9) -> bool:
    """|value - ref| <= k sigma (plus a rounding floor of rel_floor * |ref|)."""
    return abs(value - ref) <= k * error + rel_floor * abs(ref)


@pytest.fixture
def make_card():
    return card
