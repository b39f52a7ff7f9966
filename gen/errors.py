"""The package's exception family.

`GenError` is the base. Subclasses of `UserError` describe mistakes a user can fix (a bad card, an
unknown particle, impossible kinematics, an unreadable file); their message names the place (file
and key path), what was found and what would be accepted. The command line prints such a message
without a traceback and exits with status 2. Anything else is an internal error and keeps its
traceback.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = ["GenError", "UserError", "CardError", "OutputError", "GenWarning", "close_matches", "printable"]


class GenError(Exception):
    """Base of every exception raised on purpose by `gen`."""


class UserError(GenError):
    """A mistake in what the user gave us; the message says where and how to fix it."""


class CardError(UserError):
    """A run card that cannot be used: names the card file and the key path."""

    def __init__(self, source: str, key: str, message: str):
        self.source = source
        self.key = key
        self.detail = message
        where = f"{source}: {key}" if key else source
        super().__init__(f"{where}: {message}")


class OutputError(UserError):
    """An output file or folder that cannot be written or read as a `gen` event file."""


class GenWarning(UserWarning):
    """Base of the warnings `gen` gives on purpose (the command line prints them on stderr)."""


def printable(text: str) -> str:
    """Text with control characters (other than newlines) escaped, so that a message quoting what a
    user wrote cannot move the terminal's cursor or change its colours."""
    return "".join(c if c == "\n" or (c.isprintable() or c == " ") else repr(c)[1:-1] for c in text)


def close_matches(word: str, candidates: Iterable[str], n: int = 3) -> str:
    """A ' (did you mean ...?)' hint, or '' when nothing is close."""
    cands = list(candidates)
    hits = difflib.get_close_matches(word, cands, n=n, cutoff=0.6)
    if not hits:
        lowered = {c.lower(): c for c in cands}
        hits = [lowered[h] for h in difflib.get_close_matches(word.lower(), list(lowered), n=n, cutoff=0.6)]
    if not hits:
        return ""
    return " (did you mean " + " or ".join(repr(h) for h in hits) + "?)"
