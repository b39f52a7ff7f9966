"""The matrix-element library: one module per model, gathered in `MODELS`."""

from __future__ import annotations

import itertools

from . import electroweak, qcd, qed, scalar
from .registry import ColourFlow, Model, Param, ProcessSpec

__all__ = ["MODELS", "Model", "Param", "ProcessSpec", "ColourFlow", "find_process"]

MODELS: dict[str, Model] = {m.name: m for m in (scalar.MODEL, qed.MODEL, electroweak.MODEL, qcd.MODEL)}


def find_process(model: Model, incoming: tuple[str, str], outgoing: tuple[str, ...]):
    """The spec matching the particles in any order, with the permutations into canonical order.

    Returns (spec, in_perm, out_perm) where canonical incoming[i] = user incoming[in_perm[i]], or
    None when the model has no such process.
    """
    for spec in model.processes:
        for ip in ((0, 1), (1, 0)):
            if tuple(incoming[i] for i in ip) != spec.incoming:
                continue
            for op in itertools.permutations(range(len(outgoing))):
                if tuple(outgoing[i] for i in op) == spec.outgoing:
                    return spec, ip, op
    return None
