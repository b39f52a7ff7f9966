"""Event records: Arrow record batches of the schema in `schema/`, built from arrays without loops.

An `EventLayout` holds what is the same for every event of a run (particle ids, roles, parents,
colour tags, masses, subprocess label) as ready Arrow arrays of one event; `batch` tiles them and
adds the per-event columns.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyarrow as pa

from .store import arrow_schema, schema_doc

__all__ = ["EventLayout", "JOB_STRIDE"]

#: event_id = job * JOB_STRIDE + serial: ids stay unique across up to 2^23 merged jobs.
JOB_STRIDE = 1 << 40


@dataclass
class EventLayout:
    pdg: np.ndarray  # (n,) int32
    roles: list[str]
    parent_first: np.ndarray  # (n,) int16
    parent_last: np.ndarray
    colour: np.ndarray  # (n,) int32
    anticolour: np.ndarray
    mass: np.ndarray  # (n,) float64
    subprocess: str
    scale: float
    alpha_em: float
    alpha_s: float | None = None

    def __post_init__(self):
        schema = arrow_schema()
        self._particle_type = schema.field("particles").type.value_type
        self._role_dict = pa.array(schema_doc()["roles"], pa.string())
        codes = np.array([schema_doc()["roles"].index(r) for r in self.roles], np.int8)
        self._role_codes = codes
        self._sub = pa.array([self.subprocess], pa.string())
        self.n = len(self.pdg)

    def batch(self, first_id: int, weights: np.ndarray, momenta: np.ndarray) -> pa.RecordBatch:
        """Events with ids first_id, first_id + 1, ... and the given weights (pb), momenta (N, n, 4)."""
        n_ev = weights.shape[0]
        n = self.n
        m = n_ev * n
        comp = np.ascontiguousarray(momenta.reshape(m, 4).T)  # (4, m): each component contiguous

        def tile(a):
            return pa.array(np.tile(a, n_ev))

        fields = [
            tile(self.pdg),
            pa.DictionaryArray.from_arrays(pa.array(np.tile(self._role_codes, n_ev)), self._role_dict),
            tile(self.parent_first), tile(self.parent_last), tile(self.colour), tile(self.anticolour),
            pa.array(comp[0]), pa.array(comp[1]), pa.array(comp[2]), pa.array(comp[3]),
            tile(self.mass), pa.nulls(m, pa.float32()),
        ]
        particles = pa.StructArray.from_arrays(fields, fields=list(self._particle_type))
        offsets = pa.array(np.arange(0, m + 1, n, dtype=np.int32))
        plist = pa.ListArray.from_arrays(offsets, particles, type=arrow_schema().field("particles").type)
        cols = [
            pa.array(np.arange(first_id, first_id + n_ev, dtype=np.int64)),
            pa.array(weights, pa.float64()),
            pa.DictionaryArray.from_arrays(pa.array(np.zeros(n_ev, np.int8)), self._sub),
            pa.array(np.full(n_ev, self.scale)),
            pa.array(np.full(n_ev, self.alpha_em)),
            pa.nulls(n_ev, pa.float64()) if self.alpha_s is None else pa.array(np.full(n_ev, self.alpha_s)),
            pa.nulls(n_ev, pa.float64()),
            pa.nulls(n_ev, pa.float64()),
            plist,
        ]
        return pa.RecordBatch.from_arrays(cols, schema=arrow_schema())
