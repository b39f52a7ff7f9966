"""gen: leading-order event generation (2->2 and e+e- -> q qbar g), written as Parquet.

The public API: `load_card` / `parse_card` turn a TOML card into a validated `RunConfig`;
`run` integrates it and writes the run folder; `read_table`, `read_momenta` and `read_run` read
event files back; `MODELS` is the process library.
"""

__version__ = "0.1.0"

from .card import RunConfig, load_card, parse_card  # noqa: E402
from .errors import CardError, GenError, OutputError, UserError  # noqa: E402
from .matrix import MODELS  # noqa: E402
from .run import RunResult, run  # noqa: E402
from .store import read_momenta, read_run, read_table  # noqa: E402

__all__ = ["__version__", "RunConfig", "load_card", "parse_card", "run", "RunResult", "read_table",
           "read_momenta", "read_run", "MODELS", "GenError", "UserError", "CardError", "OutputError"]
