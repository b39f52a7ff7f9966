"""The public API, the schema as data, and the README sections made from data."""

from __future__ import annotations

from pathlib import Path

import pyarrow as pa

import gen
from gen.docs import render
from gen.records.schema import arrow_schema, schema_doc

ROOT = Path(__file__).parent.parent


def test_public_api_is_deliberate():
    assert sorted(gen.__all__) == sorted([
        "__version__", "RunConfig", "load_card", "parse_card", "run", "RunResult", "read_table",
        "read_momenta", "read_run", "MODELS", "GenError", "UserError", "CardError", "OutputError"])
    for name in gen.__all__:
        assert hasattr(gen, name)


def test_arrow_schema_is_built_from_the_schema_document():
    doc = schema_doc()
    schema = arrow_schema()
    assert [f.name for f in schema] == [f["name"] for f in doc["event_fields"]]
    particle = schema.field("particles").type.value_type
    assert [f.name for f in particle] == [f["name"] for f in doc["particle_fields"]]
    assert schema.field("weight").metadata[b"unit"] == b"pb"
    # 32-bit dictionary indices: awkward reads no other index width
    assert particle.field("role").type == pa.dictionary(pa.int32(), pa.string())
    assert schema.metadata[b"gen.schema_version"] == doc["version"].encode()


def test_readme_sections_match_their_sources():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    assert render(text) == text, "run `python -m gen.docs` to regenerate the README sections"


def test_readme_quick_start_is_two_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = text.split("## Quick start", 1)[1].split("```sh\n", 1)[1].split("```", 1)[0]
    lines = [ln for ln in block.splitlines() if ln.strip()]
    assert len(lines) == 2
    assert lines[1] == "python -m pip install -e '.[test]' && python -m pytest"
    ci = (ROOT / ".ci" / "run").read_text()
    assert lines[1] in ci
    card = lines[0].split("gen run ")[1]
    assert (ROOT / card).exists()
