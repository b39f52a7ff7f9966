"""The event-file schema as data (`schema/events.json`, installed as the package `gen.schema`):
the Arrow schema, the README's schema section and the checks of files read back are all made from it."""

from __future__ import annotations

import json
from functools import lru_cache
from importlib import resources
from typing import Any

import pyarrow as pa

__all__ = ["schema_doc", "arrow_schema", "schema_markdown", "metadata_key"]

_TYPES = {"int64": pa.int64(), "int32": pa.int32(), "int16": pa.int16(), "float64": pa.float64(),
          "float32": pa.float32(), "category": pa.dictionary(pa.int32(), pa.string())}


@lru_cache(maxsize=1)
def schema_doc() -> dict[str, Any]:
    """The schema document (schema/events.json)."""
    return json.loads(resources.files("gen.schema").joinpath("events.json").read_text(encoding="utf-8"))


def metadata_key() -> str:
    """The file-metadata key under which the run record is stored."""
    return schema_doc()["metadata_key"]


def _field(f: dict, children: dict[str, pa.DataType], unit: str) -> pa.Field:
    t = children[f["type"]] if f["type"] in children else _TYPES[f["type"]]
    meta = {"unit": unit if f["unit"] == "measure" else f["unit"], "doc": f["doc"]}
    return pa.field(f["name"], t, nullable=f.get("nullable", False) or f["type"].startswith("list"), metadata=meta)


@lru_cache(maxsize=4)
def arrow_schema(measure_unit: str = "pb") -> pa.Schema:
    """The Arrow schema of an event file, built from the schema document; fields whose unit is the
    measure's (the weight) carry `measure_unit` (pb for a cross-section, GeV for a partial width)."""
    doc = schema_doc()
    particle = pa.struct([_field(f, {}, measure_unit) for f in doc["particle_fields"]])
    children = {"list<particle>": pa.list_(pa.field("particle", particle, nullable=False))}
    return pa.schema([_field(f, children, measure_unit) for f in doc["event_fields"]],
                     metadata={"gen.schema_version": doc["version"]})


def schema_markdown() -> str:
    """The schema as Markdown tables (the README's schema section is this text)."""
    doc = schema_doc()

    def table(title, fields):
        rows = [f"| `{f['name']}` | {f['type']}{' (nullable)' if f.get('nullable') else ''} | "
                f"{'pb or GeV (the measure)' if f['unit'] == 'measure' else f['unit']} | {f['doc']} |" for f in fields]
        return [title, "", "| field | type | unit | meaning |", "|---|---|---|---|", *rows]

    out = [f"Schema version {doc['version']}. {doc['doc']}", ""]
    out += table("Per event:", doc["event_fields"])
    out += [""] + table("Per particle (`particles` items):", doc["particle_fields"])
    out += ["", f"Run record (JSON under the file metadata key `{doc['metadata_key']}`):", "",
            "| key | meaning |", "|---|---|"]
    out += [f"| `{m['key']}` | {m['doc']} |" for m in doc["metadata"]]
    return "\n".join(out) + "\n"
