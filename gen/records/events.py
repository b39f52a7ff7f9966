"""Arrow record batches of the schema, built from a process's events without per-event loops.

A `RecordBuilder` holds what is the same for every event of a run (the process's
`ParticleLayout`, turned into Arrow dictionaries once) and `batch` adds the per-event columns of
an `EventData`.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa

from ..processes.interface import EventData, ParticleLayout
from .schema import arrow_schema, schema_doc

__all__ = ["RecordBuilder", "JOB_STRIDE"]

#: event_id = job * JOB_STRIDE + serial: ids stay unique across up to 2^23 merged jobs.
JOB_STRIDE = 1 << 40


def _numeric(values: np.ndarray, dtype=None) -> pa.Array:
    """An Arrow array over a numpy array's memory. (pa.array would do, but its first call imports
    pandas where it is installed, 0.3 s of every run's start.)"""
    a = np.ascontiguousarray(values if dtype is None else np.asarray(values, dtype))
    return pa.Array.from_buffers(pa.from_numpy_dtype(a.dtype), a.size, [None, pa.py_buffer(a)])


def _strings(items) -> pa.Array:
    """An Arrow string array of Python strings, built from its offsets and bytes."""
    data = [str(x).encode() for x in items]
    offsets = np.zeros(len(data) + 1, np.int32)
    np.cumsum([len(d) for d in data], out=offsets[1:])
    return pa.Array.from_buffers(pa.string(), len(data), [None, pa.py_buffer(offsets), pa.py_buffer(b"".join(data))])


def _helicities(values: np.ndarray | None, m: int) -> pa.Array:
    """The helicity field: null where NaN (or everywhere, where no process gave helicities)."""
    if values is None:
        return pa.nulls(m, pa.float32())
    h = np.ascontiguousarray(values.reshape(m), np.float32)
    known = ~np.isnan(h)
    if known.all():
        return _numeric(h)
    bitmap = np.packbits(known, bitorder="little")
    return pa.Array.from_buffers(pa.float32(), m, [pa.py_buffer(bitmap), pa.py_buffer(np.nan_to_num(h))],
                                 null_count=int(m - known.sum()))


class RecordBuilder:
    """Record batches of one run: its particle layout, and the unit of its weights."""

    def __init__(self, layout: ParticleLayout, weight_unit: str = "pb"):
        self.layout = layout
        self.schema = arrow_schema(weight_unit)
        self._particle_type = self.schema.field("particles").type.value_type
        roles = schema_doc()["roles"]
        self._role_dict = _strings(roles)
        self._role_codes = np.array([roles.index(r) for r in layout.roles], np.int32)
        self._sub = _strings(layout.subprocesses)

    def batch(self, first_id: int, weights: np.ndarray, data: EventData) -> pa.RecordBatch:
        """Events with ids first_id, first_id + 1, ... and the given weights; `data` holds the
        momenta (N, n, 4) and whatever else varies per event (None: the layout's value)."""
        lay = self.layout
        n_ev = weights.shape[0]
        n = lay.n
        m = n_ev * n
        comp = np.ascontiguousarray(data.momenta.reshape(m, 4).T)  # (4, m): each component contiguous

        def per_particle(values, fixed):
            return _numeric(np.tile(fixed, n_ev) if values is None else values.reshape(m))

        def per_event(values, fixed):
            if values is not None:
                return _numeric(values, np.float64)
            return pa.nulls(n_ev, pa.float64()) if fixed is None else _numeric(np.full(n_ev, fixed, np.float64))

        fields = [
            per_particle(data.pdg, lay.pdg),
            pa.DictionaryArray.from_arrays(_numeric(np.tile(self._role_codes, n_ev)), self._role_dict),
            per_particle(None, lay.parent_first), per_particle(None, lay.parent_last),
            per_particle(data.colour, lay.colour), per_particle(data.anticolour, lay.anticolour),
            _numeric(comp[0]), _numeric(comp[1]), _numeric(comp[2]), _numeric(comp[3]),
            per_particle(data.mass, lay.mass), _helicities(data.helicity, m),
        ]
        particles = pa.StructArray.from_arrays(fields, fields=list(self._particle_type))
        offsets = _numeric(np.arange(0, m + 1, n, dtype=np.int32))
        plist = pa.ListArray.from_arrays(offsets, particles, type=self.schema.field("particles").type)
        codes = np.zeros(n_ev, np.int32) if data.subprocess is None else data.subprocess.astype(np.int32)
        cols = [
            _numeric(np.arange(first_id, first_id + n_ev, dtype=np.int64)),
            _numeric(weights, np.float64),
            pa.DictionaryArray.from_arrays(_numeric(codes), self._sub),
            per_event(data.scale, lay.scale),
            per_event(data.factorization_scale, None),
            per_event(None, lay.alpha_em),
            per_event(data.alpha_s, lay.alpha_s),
            per_event(data.x1, None),
            per_event(data.x2, None),
            plist,
        ]
        return pa.RecordBatch.from_arrays(cols, schema=self.schema)
