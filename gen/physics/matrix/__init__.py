"""The matrix-element library: one module per model, gathered in `MODELS`."""

from __future__ import annotations

import itertools
from collections import defaultdict
from dataclasses import dataclass, field

from ..particles import HADRON_PARTONS, Species
from . import electroweak, qcd, qed, scalar
from .automatic import automatic_models
from .registry import ColourFlow, Model, Ordering, ProcessSpec

__all__ = ["MODELS", "Model", "ProcessSpec", "ColourFlow", "Ordering", "find_process", "Subprocess",
           "find_subprocesses"]

MODELS: dict[str, Model] = {m.name: m for m in (scalar.MODEL, qed.MODEL, electroweak.MODEL, qcd.MODEL)}
MODELS.update({m.name: m for m in automatic_models(MODELS)})


def find_process(model: Model, incoming: tuple[str, ...], outgoing: tuple[str, ...]) -> Ordering | None:
    """The spec matching the particles in any order, as an `Ordering` (the permutations into the
    spec's canonical order), or None when the model has no such process."""
    for spec in model.processes:
        for ip in itertools.permutations(range(len(incoming))):
            if tuple(incoming[i] for i in ip) != spec.incoming:
                continue
            for op in itertools.permutations(range(len(outgoing))):
                if tuple(outgoing[i] for i in op) == spec.outgoing:
                    return Ordering(spec, ip, op)
    return None


@dataclass(frozen=True)
class Subprocess(Ordering):
    """One parton-level process of a hadron collision: the partons taken from beams 1 and 2 and the
    particle in each outgoing slot of the card, with the `Ordering` into the spec's canonical order
    (canonical incoming i = partons[in_perm[i]], canonical outgoing j = slot out_perm[j])."""

    partons: tuple[str, str] = field(kw_only=True)
    outgoing: tuple[str, ...] = field(kw_only=True)

    @property
    def label(self) -> str:
        return f"{' '.join(self.partons)} -> {' '.join(self.outgoing)}"


def find_subprocesses(model: Model, beams: tuple[str, str], slots: tuple[Species, ...]) -> list[Subprocess]:
    """Every parton process of the model that the beams' partons can start and whose final state
    fills the card's outgoing slots (a slot holds one particle, or any member of a group).

    Each distinct final state is listed once; slots of the same group are filled in one order, and
    the event writer shuffles interchangeable slots, so nothing is counted twice.
    """
    allowed = [s.members or (s.name,) for s in slots]
    by_in: dict[tuple[str, ...], list[ProcessSpec]] = defaultdict(list)
    for spec in model.processes:
        if len(spec.outgoing) == len(slots) and spec.matrix is not None:
            by_in[tuple(sorted(spec.incoming))].append(spec)
    out: list[Subprocess] = []
    for a in HADRON_PARTONS[beams[0]]:
        for b in HADRON_PARTONS[beams[1]]:
            for spec in by_in.get(tuple(sorted((a, b))), []):
                ip = (0, 1) if spec.incoming == (a, b) else (1, 0)
                for op in itertools.permutations(range(len(slots))):
                    if all(spec.outgoing[j] in allowed[op[j]] for j in range(len(slots))):
                        filled = [""] * len(slots)
                        for j, k in enumerate(op):
                            filled[k] = spec.outgoing[j]
                        out.append(Subprocess(spec, ip, tuple(op), partons=(a, b), outgoing=tuple(filled)))
                        break
    return out
