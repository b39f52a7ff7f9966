"""The README's shell blocks, Python snippets and cards work as written (in a scratch folder with
a copy of the demo cards); a block marked `<!-- not run by the tests: ... -->` needs a cluster."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from gen.card import parse_card

ROOT = Path(__file__).parent.parent
BLOCK = re.compile(r"(?:<!-- (?P<mark>[^>]*) -->\n)?```(?P<lang>sh|python|toml)\n(?P<body>.*?)```", re.S)


def _blocks():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    return [(m.group("lang"), m.group("body"), m.group("mark") or "") for m in BLOCK.finditer(text)]


def _shell(body: str) -> str:
    """The block as bash runs it; the quick start's installs are done already (the test extra is installed)."""
    lines = []
    for line in body.splitlines():
        if line.startswith("python -m pip install"):
            rest = line.split("&&", 1)[1].strip() if "&&" in line else ""
            if not rest or rest.startswith("python -m pytest"):
                continue
            line = rest
        lines.append(line)
    return "\n".join(lines)


@pytest.fixture(scope="module")
def scratch(tmp_path_factory):
    folder = tmp_path_factory.mktemp("readme")
    shutil.copytree(ROOT / "cards", folder / "cards")
    return folder


def test_the_readme_has_runnable_blocks():
    langs = [lang for lang, _, mark in _blocks() if not mark.startswith("not run")]
    assert langs.count("sh") >= 2 and langs.count("python") >= 3 and langs.count("toml") >= 2


@pytest.mark.slow
def test_every_block_runs_as_written(scratch):
    env = dict(os.environ, PYTHONWARNINGS="ignore", PATH=f"{Path(sys.executable).parent}{os.pathsep}{os.environ['PATH']}")
    for lang, body, mark in _blocks():
        if mark.startswith("not run"):
            continue
        if lang == "toml":
            if mark.startswith("a fragment"):
                continue
            parse_card(body, "README.md")
            continue
        cmd = ["bash", "-e", "-c", _shell(body)] if lang == "sh" else [sys.executable, "-c", body]
        r = subprocess.run(cmd, cwd=scratch, capture_output=True, text=True, env=env)
        assert r.returncode == 0, f"README {lang} block failed:\n{body}\n--- stdout\n{r.stdout}\n--- stderr\n{r.stderr}"
    assert (scratch / "gen-runs" / "z-pole-muons" / "summary.txt").exists()
    assert (scratch / "runs" / "zpole" / "unweighted.parquet").exists()


def test_every_link_inside_the_readme_points_at_a_heading():
    """[text](#anchor) links against the headings' anchors as GitHub makes them (lower case,
    punctuation dropped, spaces to hyphens; common practice, no source)."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    fenced = re.sub(r"```.*?```", "", text, flags=re.S)
    anchors = {re.sub(r"[^\w\- ]", "", m.group(1).strip().lower()).replace(" ", "-")
               for m in re.finditer(r"^#+\s+(.*)$", fenced, flags=re.M)}
    links = set(re.findall(r"\]\(#([^)]+)\)", fenced))
    assert links and links <= anchors, links - anchors
