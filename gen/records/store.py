"""The Parquet store: the streaming writer that publishes only complete files, and the readers.

Files are written row group by row group under a new hidden temporary name (created exclusively,
see `gen.files`) and renamed into place only when complete, with the run record in the file's
key-value metadata. Readers check that a file is a gen event file and that its run record holds
what the commands rely on, and name the file and the key when it does not.
"""

from __future__ import annotations

import json
import math
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from ..errors import GenWarning, OutputError
from ..files import temporary_beside, write_atomically
from .schema import arrow_schema, metadata_key

__all__ = ["EventWriter", "read_table", "read_momenta", "read_run", "event_files", "DICTIONARY_COLUMNS",
           "manifest_name", "write_manifest", "read_manifests", "folder_contents", "FolderContents",
           "UnfinishedFilesWarning"]

#: the columns worth dictionary-encoding (integers and strings; encoding floats made writing 1.5x slower)
DICTIONARY_COLUMNS = ["subprocess", "particles.list.particle.role", "particles.list.particle.pdg"]


class EventWriter:
    """Streams record batches into a Parquet file; the file appears only when `publish` runs.

    Use as a context manager: leaving the block by an exception removes the temporary file, so a
    failed or killed run leaves nothing that looks like a complete file. `finish` completes the
    temporary file; `publish` renames it into place, so that several files of one run can appear
    together (see `gen.jobs.run`); `abort` removes an unpublished file.
    """

    def __init__(self, path: str | Path, row_group_events: int, schema: pa.Schema | None = None,
                 compression: str = "snappy"):
        self.path = Path(path)
        self.schema = schema or arrow_schema()
        self.row_group = row_group_events
        self._pending: list[pa.RecordBatch] = []
        self._pending_rows = 0
        self.rows = 0
        self.sum_w = 0.0
        self.max_w = 0.0
        self._finished = self._published = False
        self._writer = None
        self._sink = None
        self.tmp: Path | None = None
        try:
            fd, self.tmp = temporary_beside(self.path)
            self._sink = os.fdopen(fd, "wb", buffering=1 << 20)
            self._writer = pq.ParquetWriter(self._sink, self.schema, compression=compression,
                                            use_dictionary=DICTIONARY_COLUMNS, write_statistics=["event_id", "weight"])
        except OSError as exc:
            self.abort()
            raise OutputError(f"{self.path}: cannot write the event file: {exc.strerror or exc}") from None

    def write(self, batch: pa.RecordBatch) -> None:
        if batch.num_rows == 0:
            return
        col = batch.column(1)  # the weights, read from the buffer (to_numpy's first call imports pandas)
        w = np.frombuffer(col.buffers()[1], np.float64, count=len(col), offset=8 * col.offset)
        self.sum_w += float(w.sum())
        self.max_w = max(self.max_w, float(w.max()))
        self._pending.append(batch)
        self._pending_rows += batch.num_rows
        self.rows += batch.num_rows
        if self._pending_rows >= self.row_group:
            self._flush()

    def _flush(self) -> None:
        if self._pending:
            table = pa.Table.from_batches(self._pending, schema=self.schema)
            try:
                self._writer.write_table(table, row_group_size=max(self._pending_rows, 1))
            except OSError as exc:
                raise OutputError(f"{self.path}: writing failed: {exc.strerror or exc}") from None
            self._pending, self._pending_rows = [], 0

    def finish(self, record: dict[str, Any]) -> None:
        """Write the run record and close the (still temporary) file."""
        self._flush()
        try:
            self._writer.add_key_value_metadata({metadata_key(): json.dumps(record, default=_jsonable, allow_nan=False)})
            self._writer.close()
            self._sink.close()
        except OSError as exc:
            raise OutputError(f"{self.path}: writing failed: {exc.strerror or exc}") from None
        self._writer = self._sink = None
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
        for closable in (self._writer, self._sink):
            if closable is not None:
                try:
                    closable.close()
                except Exception:  # the file is discarded either way
                    pass
        self._writer = self._sink = None
        if self.tmp is not None:
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


#: the format of the summaries that list a finished run's files (written last: the run's manifest)
MANIFEST_FORMAT = "gen.summary"


class UnfinishedFilesWarning(GenWarning):
    """Event files in a folder that no finished run lists (an interrupted run, or leftovers)."""


def manifest_name(job: int | None) -> str:
    """The summary of a run (job None) or of batch part `job`: its manifest, written last."""
    return "summary.json" if job is None else f"summary-part{job:05d}.json"


def write_manifest(folder: Path, name: str, doc: dict) -> Path:
    """Write a summary atomically; it lists the files of one finished run (`files`, `run_id`)."""
    try:
        return write_atomically(folder / name, json.dumps(dict(doc, format=MANIFEST_FORMAT), indent=1,
                                                          default=_jsonable, allow_nan=False))
    except OSError as exc:
        raise OutputError(f"{folder / name}: cannot write the run summary: {exc.strerror or exc}") from None


def read_manifests(folder: Path) -> list[tuple[Path, dict]]:
    """The summaries in a folder that are well-formed manifests (others are skipped)."""
    out = []
    for path in sorted(folder.glob("summary*.json")):
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError, RecursionError):
            continue
        if isinstance(doc, dict) and doc.get("format") == MANIFEST_FORMAT and isinstance(doc.get("files"), dict) \
                and isinstance(doc.get("run_id"), str):
            out.append((path, doc))
    return out


@dataclass
class FolderContents:
    """The event files of a folder: those of finished runs, and those no finished run lists."""

    files: list[Path] = field(default_factory=list)
    unfinished: list[Path] = field(default_factory=list)
    manifests: list[tuple[Path, dict]] = field(default_factory=list)


def folder_contents(folder: str | Path) -> FolderContents:
    """Sort a folder's event files by whether a finished run's summary lists them with its run id."""
    folder = Path(folder)
    present = sorted(f for f in folder.glob("*.parquet") if not f.name.startswith("."))
    manifests = read_manifests(folder)
    listed = {name: doc["run_id"] for _, doc in manifests for name in doc["files"]}
    out = FolderContents(manifests=manifests)
    for f in present:
        run_id = listed.get(f.name)
        if run_id is not None and _run_id_of(f) == run_id:
            out.files.append(f)
        else:
            out.unfinished.append(f)
    return out


def _run_id_of(path: Path) -> str | None:
    try:
        meta = pq.read_metadata(path).metadata or {}
        return json.loads(meta[metadata_key().encode()]).get("run_id")
    except Exception:  # unreadable or foreign: not a finished run's file
        return None


def event_files(path: str | Path) -> list[Path]:
    """The event files at a path: the file itself, or the files of the finished runs in a folder
    (files no run's summary lists are left out, with an `UnfinishedFilesWarning`)."""
    p = Path(path)
    if p.is_dir():
        contents = folder_contents(p)
        if not contents.files:
            if contents.unfinished:
                raise OutputError(f"{p}: no finished run here: the event files are not listed by a run summary "
                                  "(the run was interrupted or is still writing); rerun the card, or give a file's path")
            raise OutputError(f"{p}: no event files (*.parquet) in this folder")
        if contents.unfinished:
            names = ", ".join(f.name for f in contents.unfinished[:4]) + (" ..." if len(contents.unfinished) > 4 else "")
            warnings.warn(f"{p}: left out {names}: no finished run's summary lists "
                          f"{'them' if len(contents.unfinished) > 1 else 'it'} (an interrupted run, or files from "
                          "elsewhere); rerun the card to complete the run", UnfinishedFilesWarning, stacklevel=2)
        return contents.files
    if not p.exists():
        raise OutputError(f"{p}: no such file or folder")
    return [p]


_NUM = (int, float)

#: what every run record must hold for the commands to use it: key path -> accepted types
_RECORD_KEYS: dict[tuple[str, ...], tuple[type, ...]] = {
    ("schema_version",): (str,), ("weighting",): (str,), ("run_id",): (str,), ("seed",): (int,),
    ("card", "text"): (str,), ("card", "path"): (str,), ("card", "digest"): (str,), ("card", "sampling"): (dict,),
    ("process", "label"): (str,), ("process", "model"): (str,), ("process", "incoming"): (list,),
    ("process", "outgoing"): (list,), ("collider", "sqrt_s_GeV"): _NUM,
    ("parameters", "model"): (dict,), ("parameters", "masses_GeV"): (dict,),
    ("measure", "unit"): (str,), ("grid", "checksum"): (str,),
    ("cross_section", "total", "value"): _NUM, ("cross_section", "total", "error"): _NUM,
    ("cross_section", "by_subprocess"): (dict,),
    ("events", "count"): (int,), ("events", "sum_weights"): _NUM, ("events", "max_weight"): _NUM,
    ("job", "count"): (int,),
}
#: and by weighting kind
_KIND_KEYS: dict[str, dict[tuple[str, ...], tuple[type, ...]]] = {
    "unweighted": {("unweighting", k): _NUM for k in ("trials", "accepted", "sum_w", "sum_w2", "efficiency",
                                                       "overflow_events", "overflow_share", "max_weight")},
    "weighted": {("events", "trials"): (int,)},
}


def _check_key(p: Path, rec: dict, path: tuple[str, ...], kinds: tuple[type, ...]) -> None:
    node: Any = rec
    for k in path:
        node = node.get(k) if isinstance(node, dict) else None
    bad = isinstance(node, bool) or not isinstance(node, kinds) or (isinstance(node, float) and not math.isfinite(node))
    if bad:
        raise OutputError(f"{p}: the run record's {'.'.join(path)} is {node!r:.60}; expected "
                          f"{' or '.join(k.__name__ for k in kinds)} (the file's metadata is damaged)")


def _check_record(p: Path, rec: Any) -> dict:
    if not isinstance(rec, dict):
        raise OutputError(f"{p}: the run record is not a JSON object")
    version = rec.get("schema_version")
    if isinstance(version, str) and version.split(".")[0] != "2":
        raise OutputError(f"{p}: written with schema {version}; this gen reads schema 2 files (rerun the card to "
                          "write the sample again)")
    for path, kinds in _RECORD_KEYS.items():
        _check_key(p, rec, path, kinds)
    if rec["weighting"] not in _KIND_KEYS:
        raise OutputError(f"{p}: the run record's weighting is {rec['weighting']!r}; expected 'unweighted' or 'weighted'")
    for path, kinds in _KIND_KEYS[rec["weighting"]].items():
        _check_key(p, rec, path, kinds)
    job = rec["job"]
    if not (isinstance(job.get("index"), int) or (job.get("index") is None and isinstance(job.get("merged"), list))):
        raise OutputError(f"{p}: the run record's job.index is {job.get('index')!r}; expected an integer")
    for label, v in rec["cross_section"]["by_subprocess"].items():
        if not (isinstance(v, dict) and isinstance(v.get("value"), _NUM) and isinstance(v.get("events"), int)):
            raise OutputError(f"{p}: the run record's cross_section.by_subprocess[{label!r}] is damaged")
    return rec


def read_run(path: str | Path) -> dict[str, Any]:
    """The run record of an event file (cross-section, counts, card, parameters...), checked to
    hold what the commands rely on."""
    p = Path(path)
    try:
        meta = pq.read_metadata(p).metadata or {}
    except (OSError, pa.ArrowException) as exc:
        raise OutputError(f"{p}: not a readable Parquet file ({exc})") from None
    key = metadata_key().encode()
    if key not in meta:
        raise OutputError(f"{p}: a Parquet file, but not a gen event file (no '{key.decode()}' metadata)")
    try:
        rec = json.loads(meta[key])
    except (ValueError, RecursionError) as exc:
        raise OutputError(f"{p}: the run record is not valid JSON ({exc}); the file's metadata is damaged") from None
    return _check_record(p, rec)


def read_table(path: str | Path, columns: list[str] | None = None) -> pa.Table:
    """An event file as a pyarrow Table (checked to be a gen event file)."""
    read_run(path)
    try:
        return pq.read_table(path, columns=columns)
    except (OSError, pa.ArrowException) as exc:
        raise OutputError(f"{path}: cannot read the events ({exc})") from None


def read_momenta(path: str | Path, role: str | None = None) -> np.ndarray:
    """Four-momenta as a float64 array of shape (N, n, 4), (E, px, py, pz) in GeV.

    All events of a file have the same particle content; `role` ('incoming', 'outgoing', ...)
    keeps only the particles of that role. Only the four momentum columns are read, row group by
    row group into one preallocated array (no whole table held, no pandas imported).
    """
    read_run(path)
    names = ("e", "px", "py", "pz")
    try:
        pf = pq.ParquetFile(path)
        n_events = pf.metadata.num_rows
        out: np.ndarray | None = None
        row = 0
        for rg in range(pf.num_row_groups):
            lists = pf.read_row_group(rg, columns=[f"particles.list.element.{c}" for c in names]).column("particles")
            for chunk in lists.chunks:
                k = len(chunk)
                if k == 0:
                    continue
                counts = np.diff(_buffer_values(chunk.offsets, np.int32))
                if out is None:
                    out = np.empty((n_events, int(counts[0]), 4))
                if np.any(counts != out.shape[1]):
                    raise OutputError(f"{path}: events have different numbers of particles; read the table instead")
                flat = chunk.flatten()
                for j, c in enumerate(names):
                    out[row:row + k, :, j] = _buffer_values(flat.field(c), np.float64).reshape(k, -1)
                row += k
        roles = None
        if role is not None and out is not None:
            first = pf.read_row_group(0, columns=["particles.list.element.role"]).column("particles").chunk(0)
            roles = first.flatten().field("role").dictionary_decode().slice(0, out.shape[1]).to_pylist()
    except (OSError, pa.ArrowException) as exc:
        raise OutputError(f"{path}: cannot read the events ({exc})") from None
    if out is None:
        return np.empty((0, 0, 4))
    if roles is not None:
        out = out[:, [i for i, r in enumerate(roles) if r == role], :]
    return out


def compression_of(path: str | Path) -> str:
    """The compression of an event file's first column chunk, as the card names it (snappy, zstd, none)."""
    md = pq.ParquetFile(path).metadata
    if md.num_row_groups == 0:
        return "snappy"
    codec = md.row_group(0).column(0).compression.lower()
    return "none" if codec == "uncompressed" else codec


def _buffer_values(arr: pa.Array, dtype) -> np.ndarray:
    """The values of a primitive Arrow array without nulls, as a numpy view of its buffer."""
    size = np.dtype(dtype).itemsize
    return np.frombuffer(arr.buffers()[1], dtype, count=len(arr), offset=size * arr.offset)
