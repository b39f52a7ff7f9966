"""A one-line progress display on stderr, silent when stderr is not a terminal or when asked."""

from __future__ import annotations

import sys
import time

__all__ = ["Progress"]

_BLOCKS = " ▏▎▍▌▋▊▉█"


class Progress:
    """`stage(name, total)`, then `update(done, note)`; `end()` closes the stage's line."""

    def __init__(self, enabled: bool | None = None, stream=None, width: int = 28):
        self.stream = stream or sys.stderr
        self.enabled = (self.stream.isatty() if enabled is None else enabled)
        self.width = width
        self._name = ""
        self._total = 1
        self._t0 = 0.0
        self._last = 0.0

    def stage(self, name: str, total: int) -> None:
        self._name, self._total, self._t0, self._last = name, max(total, 1), time.monotonic(), 0.0
        self.update(0)

    def _bar(self, frac: float) -> str:
        cells = frac * self.width
        full = int(cells)
        part = int((cells - full) * (len(_BLOCKS) - 1))
        bar = "█" * full + (_BLOCKS[part] if full < self.width else "")
        return bar.ljust(self.width)

    def update(self, done: int, note: str = "") -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if done < self._total and now - self._last < 0.1:
            return
        self._last = now
        frac = min(done / self._total, 1.0)
        el = now - self._t0
        self.stream.write(f"\r  {self._name:<10} ▕{self._bar(frac)}▏ {100 * frac:5.1f}%  {el:6.1f} s  {note}\x1b[K")
        self.stream.flush()

    def end(self, note: str = "") -> None:
        if not self.enabled:
            return
        self._last = 0.0
        self.update(self._total, note)
        self.stream.write("\n")
        self.stream.flush()
