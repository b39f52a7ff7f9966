"""Regenerate the README sections that are made from data: the card reference and the schema.

`python -m gen.docs [README]` rewrites the text between the markers in the README; the tests
check that the README matches, so the documentation cannot drift from `gen/card.py` and `schema/`.
"""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

from .card import reference_markdown
from .records.schema import schema_markdown

SECTIONS = {"card-reference": reference_markdown, "schema": schema_markdown}


def render(text: str) -> str:
    for name, make in SECTIONS.items():
        pat = re.compile(rf"(<!-- {name}:begin -->\n).*?(<!-- {name}:end -->)", re.S)
        if not pat.search(text):
            raise SystemExit(f"README.md has no <!-- {name}:begin --> ... <!-- {name}:end --> markers")
        text = pat.sub(lambda m: m.group(1) + make() + m.group(2), text)
    return text


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m gen.docs", description="Regenerate the README sections made from "
                                 "data (the card reference and the schema).")
    ap.add_argument("readme", nargs="?", default="README.md", help="the README to update (default README.md)")
    args = ap.parse_args(argv)
    path = Path(args.readme)
    path.write_text(render(path.read_text(encoding="utf-8")), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
