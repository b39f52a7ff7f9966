"""gen: leading-order event generation, written as Parquet.

The public API: `load_card` / `parse_card` turn a TOML card into a validated `RunConfig`;
`run` integrates it and writes the run folder; `read_table`, `read_momenta` and `read_run` read
event files back; `MODELS` is the process library.

Names are imported on first use (PEP 562), so that `import gen` and the command's start-up stay
light: nothing heavy is loaded before it is needed.
"""

from __future__ import annotations

import importlib

from .version import __version__

#: public name -> module that defines it
_HOME = {
    "RunConfig": "card", "load_card": "card", "parse_card": "card",
    "GenError": "errors", "UserError": "errors", "CardError": "errors", "OutputError": "errors",
    "MODELS": "physics.matrix",
    "run": "jobs.run", "RunResult": "jobs.run",
    "read_table": "records.store", "read_momenta": "records.store", "read_run": "records.store",
}

__all__ = ["__version__", "RunConfig", "load_card", "parse_card", "run", "RunResult", "read_table",
           "read_momenta", "read_run", "MODELS", "GenError", "UserError", "CardError", "OutputError"]


def __getattr__(name: str):
    if name not in _HOME:
        raise AttributeError(f"module 'gen' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{_HOME[name]}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
