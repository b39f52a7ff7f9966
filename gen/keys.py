"""One description of a settable value, used for every card key and every model parameter.

A `Key` states the value's type, default, accepted range or choices, unit and meaning, whether it
is required, and whether the bound itself and infinity are accepted. `Key.check` validates a value
against it and raises a `CardError` naming the card and the key path; the card reference in the
README is made from the same descriptions, so the documentation and the checks cannot drift.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .errors import CardError, close_matches

__all__ = ["Key", "NUMBER", "type_name"]

#: the kinds a number may have in TOML
NUMBER = (int, float)

_NAMES = {int: "an integer", float: "a number", str: "a string", list: "an array", dict: "a table", bool: "true/false"}


def type_name(kind) -> str:
    kinds = kind if isinstance(kind, tuple) else (kind,)
    if set(kinds) == {int, float}:
        return "a number"
    if set(kinds) == {str, int, float}:
        return "a string or a number"
    return " or ".join(_NAMES.get(k, k.__name__) for k in kinds)


@dataclass(frozen=True)
class Key:
    """A settable value: its type, default, accepted range or choices, unit and meaning.

    `lo` and `hi` are inclusive unless `lo_open` (the lower bound itself is refused, as for a
    strictly positive energy); infinity is refused unless `allow_inf` (an open upper cut);
    NaN is always refused. `default_doc` describes a default that is not a fixed value (for
    example "PDG" for a mass taken from the particle table).
    """

    kind: type | tuple[type, ...]
    default: Any = None
    lo: float | None = None
    hi: float | None = None
    unit: str = ""
    doc: str = ""
    choices: tuple[str, ...] = ()
    required: bool = False
    lo_open: bool = False
    allow_inf: bool = False
    default_doc: str = ""

    def check(self, source: str, path: str, value: Any) -> Any:
        """The value if it is acceptable, else a CardError naming source and path."""
        kinds = self.kind if isinstance(self.kind, tuple) else (self.kind,)
        if isinstance(value, bool) or not isinstance(value, kinds):
            raise CardError(source, path, f"expected {type_name(self.kind)}, found {value!r} ({type(value).__name__})"
                            + self._type_hint(value, kinds))
        if self.choices and isinstance(value, str) and value not in self.choices:
            raise CardError(source, path, f"{value!r} is not one of {', '.join(map(repr, self.choices))}"
                            + close_matches(value, self.choices))
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            self.check_number(source, path, value)
        return value

    def check_number(self, source: str, path: str, value: float) -> None:
        unit = f" {self.unit}" if self.unit else ""
        if isinstance(value, float) and math.isnan(value):
            raise CardError(source, path, "found nan; expected a number")
        if math.isinf(value) and not self.allow_inf:
            raise CardError(source, path, f"found {value!r}; expected a finite number{self._range_text()}")
        if self.lo is not None and (value < self.lo or (self.lo_open and value == self.lo)):
            word = "at or below" if self.lo_open else "below"
            raise CardError(source, path, f"{value!r} is {word} the smallest accepted value {self.lo:g}{unit}"
                            + (" (it must be larger)" if self.lo_open else ""))
        if self.hi is not None and value > self.hi and not math.isinf(value):
            raise CardError(source, path, f"{value!r} is above the largest accepted value {self.hi:g}{unit}"
                            + (" (inf for no limit)" if self.allow_inf else ""))

    def _range_text(self) -> str:
        if self.lo is None and self.hi is None:
            return ""
        return f" in {_fmt(self.lo)} .. {_fmt(self.hi)}{(' ' + self.unit) if self.unit else ''}"

    @staticmethod
    def _type_hint(value: Any, kinds: tuple[type, ...]) -> str:
        """What to write instead, for the mistakes people make most."""
        if kinds == (int,) and isinstance(value, float) and math.isfinite(value) and value == int(value):
            return f"; write it as an integer, for example {int(value):_}"
        if isinstance(value, str) and float in kinds:
            try:
                return f"; write the number without quotes: {float(value)!r}"
            except ValueError:
                return ""
        return ""

    def range_doc(self) -> str:
        """The accepted range or choices as written in the card reference."""
        if self.choices:
            return ", ".join(self.choices)
        lo = "" if self.lo is None else (f"> {_fmt(self.lo)}" if self.lo_open else _fmt(self.lo))
        hi = "" if self.hi is None else _fmt(self.hi)
        if not lo and not hi:
            return ""
        text = lo if self.lo_open and not hi else f"{lo} .. {hi}"
        return text + (", or inf" if self.allow_inf and hi else "")

    def default_text(self) -> str:
        if self.required:
            return "required"
        if self.default_doc:
            return self.default_doc
        return "" if self.default is None else _fmt(self.default)


def _fmt(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and math.isinf(v):
        return "inf"
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)
