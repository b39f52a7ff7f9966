"""The event-file schema, the streaming Parquet writer and the readers.

The schema lives as data in `schema/events.json` (installed as the package `gen.schema`); the Arrow
schema, the README's schema section and the checks of files read back are all made from it.
Files are written row group by row group under a hidden temporary name and renamed into place
only when complete, with the run record in the file's key-value metadata.
"""

from __future__ import annotations

import json
import os
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from .errors import OutputError

__all__ = ["schema_doc", "arrow_schema", "EventWriter", "read_table", "read_momenta", "read_run",
           "event_files", "schema_markdown"]

_TYPES = {"int64": pa.int64(), "int32": pa.int32(), "int16": pa.int16(), "float64": pa.float64(),
          "float32": pa.float32(), "category": pa.dictionary(pa.int16(), pa.string())}


@lru_cache(maxsize=1)
def schema_doc() -> dict[str, Any]:
    """The schema document (schema/events.json)."""
    return json.loads(resources.files("gen.schema").joinpath("events.json").read_text(encoding="utf-8"))


def _field(f: dict, children: dict[str, pa.DataType]) -> pa.Field:
    t = children[f["type"]] if f["type"] in children else _TYPES[f["type"]]
    meta = {"unit": f["unit"], "doc": f["doc"]}
    return pa.field(f["name"], t, nullable=f.get("nullable", False) or f["type"].startswith("list"), metadata=meta)


@lru_cache(maxsize=1)
def arrow_schema() -> pa.Schema:
    """The Arrow schema of an event file, built from the schema document."""
    doc = schema_doc()
    particle = pa.struct([_field(f, {}) for f in doc["particle_fields"]])
    children = {"list<particle>": pa.list_(pa.field("particle", particle, nullable=False))}
    return pa.schema([_field(f, children) for f in doc["event_fields"]],
                     metadata={"gen.schema_version": doc["version"]})


def schema_markdown() -> str:
    """The schema as Markdown tables (the README's schema section is this text)."""
    doc = schema_doc()

    def table(title, fields):
        rows = [f"| `{f['name']}` | {f['type']}{' (nullable)' if f.get('nullable') else ''} | {f['unit']} | {f['doc']} |"
                for f in fields]
        return [title, "", "| field | type | unit | meaning |", "|---|---|---|---|", *rows]

    out = [f"Schema version {doc['version']}. {doc['doc']}", ""]
    out += table("Per event:", doc["event_fields"])
    out += [""] + table("Per particle (`particles` items):", doc["particle_fields"])
    out += ["", f"Run record (JSON under the file metadata key `{doc['metadata_key']}`):", "",
            "| key | meaning |", "|---|---|"]
    out += [f"| `{m['key']}` | {m['doc']} |" for m in doc["metadata"]]
    return "\n".join(out) + "\n"


class EventWriter:
    """Streams record batches into a Parquet file; the file appears only when `publish` runs.

    Use as a context manager: leaving the block by an exception removes the temporary file, so a
    failed or killed run leaves nothing that looks like a complete file. `finish` completes the
    temporary file; `publish` renames it into place, so that several files of one run can appear
    together (see `gen.run`); `abort` removes an unpublished file.
    """

    def __init__(self, path: str | Path, row_group_events: int):
        self.path = Path(path)
        self.tmp = self.path.with_name(f".{self.path.name}.partial-{os.getpid()}")
        self.row_group = row_group_events
        self._pending: list[pa.RecordBatch] = []
        self._pending_rows = 0
        self.rows = 0
        self.sum_w = 0.0
        self.max_w = 0.0
        self._finished = self._published = False
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._writer = pq.ParquetWriter(
                self.tmp, arrow_schema(), compression="snappy",
                use_dictionary=["subprocess", "particles.list.particle.role", "particles.list.particle.pdg"],
                write_statistics=["event_id", "weight"])
        except OSError as exc:
            raise OutputError(f"{self.path}: cannot write the event file: {exc.strerror or exc}") from None

    def write(self, batch: pa.RecordBatch) -> None:
        if batch.num_rows == 0:
            return
        w = batch.column(1).to_numpy()
        self.sum_w += float(w.sum())
        self.max_w = max(self.max_w, float(w.max()))
        self._pending.append(batch)
        self._pending_rows += batch.num_rows
        self.rows += batch.num_rows
        if self._pending_rows >= self.row_group:
            self._flush()

    def _flush(self) -> None:
        if self._pending:
            table = pa.Table.from_batches(self._pending, schema=arrow_schema())
            try:
                self._writer.write_table(table, row_group_size=max(self._pending_rows, 1))
            except OSError as exc:
                raise OutputError(f"{self.path}: writing failed: {exc.strerror or exc}") from None
            self._pending, self._pending_rows = [], 0

    def finish(self, record: dict[str, Any]) -> None:
        """Write the run record and close the (still temporary) file."""
        self._flush()
        key = schema_doc()["metadata_key"]
        try:
            self._writer.add_key_value_metadata({key: json.dumps(record, default=_jsonable)})
            self._writer.close()
        except OSError as exc:
            raise OutputError(f"{self.path}: writing failed: {exc.strerror or exc}") from None
        self._writer = None
        self._finished = True

    def publish(self) -> Path:
        """Rename the finished file into place (atomic on one file system)."""
        try:
            os.replace(self.tmp, self.path)
        except OSError as exc:
            raise OutputError(f"{self.path}: cannot move the finished file into place: {exc.strerror or exc}") from None
        self._published = True
        return self.path

    def abort(self) -> None:
        if self._published:
            return
        if self._writer is not None:
            try:
                self._writer.close()
            except Exception:  # the file is discarded either way
                pass
            self._writer = None
        self.tmp.unlink(missing_ok=True)

    def __enter__(self) -> "EventWriter":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is not None or not self._finished:
            self.abort()


def _jsonable(obj):
    if isinstance(obj, (np.floating, np.integer)):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"cannot store {type(obj).__name__} in the run record")


def event_files(path: str | Path) -> list[Path]:
    """The event files at a path: the file itself, or the .parquet files of a run folder."""
    p = Path(path)
    if p.is_dir():
        files = sorted(f for f in p.glob("*.parquet") if not f.name.startswith("."))
        if not files:
            raise OutputError(f"{p}: no event files (*.parquet) in this folder")
        return files
    if not p.exists():
        raise OutputError(f"{p}: no such file or folder")
    return [p]


def read_run(path: str | Path) -> dict[str, Any]:
    """The run record of an event file (cross-section, counts, card, parameters...)."""
    p = Path(path)
    try:
        meta = pq.read_metadata(p).metadata or {}
    except (OSError, pa.ArrowInvalid) as exc:
        raise OutputError(f"{p}: not a readable Parquet file ({exc})") from None
    key = schema_doc()["metadata_key"].encode()
    if key not in meta:
        raise OutputError(f"{p}: a Parquet file, but not a gen event file (no '{key.decode()}' metadata)")
    return json.loads(meta[key])


def read_table(path: str | Path, columns: list[str] | None = None) -> pa.Table:
    """An event file as a pyarrow Table (checked to be a gen event file)."""
    read_run(path)
    return pq.read_table(path, columns=columns)


def read_momenta(path: str | Path, role: str | None = None) -> np.ndarray:
    """Four-momenta as a float64 array of shape (N, n, 4), (E, px, py, pz) in GeV.

    All events of a file have the same particle content; `role` ('incoming', 'outgoing', ...)
    keeps only the particles of that role.
    """
    table = read_table(path, columns=["particles"])
    parts = table.column("particles").combine_chunks()
    n_events = len(parts)
    flat = parts.flatten()
    offsets = parts.offsets.to_numpy()
    if n_events == 0:
        return np.empty((0, 0, 4))
    n = int(offsets[1] - offsets[0])
    if not np.all(np.diff(offsets) == n):
        raise OutputError(f"{path}: events have different numbers of particles; read the table instead")
    cols = [flat.field(k).to_numpy(zero_copy_only=False) for k in ("e", "px", "py", "pz")]
    mom = np.stack(cols, axis=-1).reshape(n_events, n, 4)
    if role is not None:
        roles = flat.field("role").slice(0, n).to_pylist()
        keep = [i for i, r in enumerate(roles) if r == role]
        mom = mom[:, keep, :]
    return mom
