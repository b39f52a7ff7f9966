"""Regenerate the README sections that are made from data: the card reference and the schema.

`python -m gen.docs` rewrites the text between the markers in README.md; the tests check that
the README matches, so the documentation cannot drift from `gen/card.py` and `schema/`.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from .card import reference_markdown
from .store import schema_markdown

SECTIONS = {"card-reference": reference_markdown, "schema": schema_markdown}


def render(text: str) -> str:
    for name, make in SECTIONS.items():
        pat = re.compile(rf"(<!-- {name}:begin -->\n).*?(<!-- {name}:end -->)", re.S)
        if not pat.search(text):
            raise SystemExit(f"README.md has no <!-- {name}:begin --> ... <!-- {name}:end --> markers")
        text = pat.sub(lambda m: m.group(1) + make() + m.group(2), text)
    return text


def main(argv=None) -> int:
    path = Path(argv[0] if argv else "README.md")
    path.write_text(render(path.read_text(encoding="utf-8")), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
