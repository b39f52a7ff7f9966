"""Event records: Arrow record batches of the schema in `schema/`, built from arrays without loops.

An `EventLayout` holds what is the same for every event of a run (roles, parents, masses, the
subprocess labels) and defaults for what a process may vary per event (particle ids, colour tags,
scales, alpha_s, momentum fractions); `batch` tiles the fixed parts and adds the per-event columns.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyarrow as pa

from .store import arrow_schema, schema_doc


__all__ = ["EventLayout", "EventData", "JOB_STRIDE"]

#: event_id = job * JOB_STRIDE + serial: ids stay unique across up to 2^23 merged jobs.
JOB_STRIDE = 1 << 40


@dataclass
class EventData:
    """What varies from event to event, beyond the momenta; None where the layout's fixed value holds."""

    momenta: np.ndarray  # (N, n, 4)
    pdg: np.ndarray | None = None  # (N, n) int32
    colour: np.ndarray | None = None
    anticolour: np.ndarray | None = None
    subprocess: np.ndarray | None = None  # (N,) int16 index into the layout's labels
    scale: np.ndarray | None = None  # renormalization scale (GeV)
    factorization_scale: np.ndarray | None = None
    alpha_s: np.ndarray | None = None
    x1: np.ndarray | None = None
    x2: np.ndarray | None = None
    mass: np.ndarray | None = None  # (N, n): resonance masses drawn per event


@dataclass
class EventLayout:
    """What is the same for every event of a run, with defaults for what may vary per event."""

    pdg: np.ndarray  # (n,) int32
    roles: list[str]
    parent_first: np.ndarray  # (n,) int16
    parent_last: np.ndarray
    colour: np.ndarray  # (n,) int32
    anticolour: np.ndarray
    mass: np.ndarray  # (n,) float64
    subprocesses: list[str]
    scale: float
    alpha_em: float
    alpha_s: float | None = None

    def __post_init__(self):
        schema = arrow_schema()
        self._particle_type = schema.field("particles").type.value_type
        self._role_dict = pa.array(schema_doc()["roles"], pa.string())
        self._role_codes = np.array([schema_doc()["roles"].index(r) for r in self.roles], np.int16)
        self._sub = pa.array(self.subprocesses, pa.string())
        self.n = len(self.pdg)

    def batch(self, first_id: int, weights: np.ndarray, data: EventData) -> pa.RecordBatch:
        """Events with ids first_id, first_id + 1, ... and the given weights (pb); `data` holds the
        momenta (N, n, 4) and whatever else varies per event (None: the layout's value)."""
        n_ev = weights.shape[0]
        n = self.n
        m = n_ev * n
        comp = np.ascontiguousarray(data.momenta.reshape(m, 4).T)  # (4, m): each component contiguous

        def per_particle(values, fixed):
            return pa.array(np.tile(fixed, n_ev) if values is None else values.reshape(m))

        def per_event(values, fixed):
            if values is not None:
                return pa.array(values, pa.float64())
            return pa.nulls(n_ev, pa.float64()) if fixed is None else pa.array(np.full(n_ev, fixed))

        fields = [
            per_particle(data.pdg, self.pdg),
            pa.DictionaryArray.from_arrays(pa.array(np.tile(self._role_codes, n_ev)), self._role_dict),
            per_particle(None, self.parent_first), per_particle(None, self.parent_last),
            per_particle(data.colour, self.colour), per_particle(data.anticolour, self.anticolour),
            pa.array(comp[0]), pa.array(comp[1]), pa.array(comp[2]), pa.array(comp[3]),
            per_particle(data.mass, self.mass), pa.nulls(m, pa.float32()),
        ]
        particles = pa.StructArray.from_arrays(fields, fields=list(self._particle_type))
        offsets = pa.array(np.arange(0, m + 1, n, dtype=np.int32))
        plist = pa.ListArray.from_arrays(offsets, particles, type=arrow_schema().field("particles").type)
        codes = np.zeros(n_ev, np.int16) if data.subprocess is None else data.subprocess
        cols = [
            pa.array(np.arange(first_id, first_id + n_ev, dtype=np.int64)),
            pa.array(weights, pa.float64()),
            pa.DictionaryArray.from_arrays(pa.array(codes), self._sub),
            per_event(data.scale, self.scale),
            per_event(data.factorization_scale, None),
            per_event(None, self.alpha_em),
            per_event(data.alpha_s, self.alpha_s),
            per_event(data.x1, None),
            per_event(data.x2, None),
            plist,
        ]
        return pa.RecordBatch.from_arrays(cols, schema=arrow_schema())
