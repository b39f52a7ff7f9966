"""Progress of long work on stderr: a bar redrawn in place on a terminal, and a plain line every few
seconds in a log (a batch job's stderr), each with the time spent and an estimate of the time left."""

from __future__ import annotations

import sys
import time

__all__ = ["Progress"]

_BLOCKS = " ▏▎▍▌▋▊▉█"


def _clock(seconds: float) -> str:
    if seconds < 100:
        return f"{seconds:.1f} s"
    minutes, sec = divmod(int(seconds), 60)
    return f"{minutes} min {sec:02d} s" if minutes < 60 else f"{minutes // 60} h {minutes % 60:02d} min"


class Progress:
    """`stage(name, total)`, then `update(done, note)`; `end()` closes the stage.

    enabled None: a bar when the stream is a terminal, else a line every `log_every` seconds;
    True: always the bar; False: silent.
    """

    def __init__(self, enabled: bool | None = None, stream=None, width: int = 28, log_every: float = 5.0):
        self.stream = stream or sys.stderr
        tty = self.stream.isatty()
        self.enabled = True if enabled is None else enabled
        self.bar = tty if enabled is None else enabled
        self.width = width
        self.log_every = log_every
        self._name = ""
        self._total = 1
        self._t0 = 0.0
        self._last = 0.0

    def stage(self, name: str, total: int) -> None:
        self._name, self._total, self._t0, self._last = name, max(total, 1), time.monotonic(), time.monotonic()
        if self.bar:
            self._last = 0.0
            self.update(0)

    def _bar(self, frac: float) -> str:
        cells = frac * self.width
        full = int(cells)
        part = int((cells - full) * (len(_BLOCKS) - 1))
        bar = "█" * full + (_BLOCKS[part] if full < self.width else "")
        return bar.ljust(self.width)

    def _left(self, frac: float, elapsed: float) -> str:
        if frac <= 0.0 or frac >= 1.0:
            return ""
        return f", about {_clock(elapsed * (1.0 - frac) / frac)} left"

    def update(self, done: int, note: str = "") -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if self.bar:
            if done < self._total and now - self._last < 0.1:
                return
        elif now - self._last < self.log_every:
            return
        self._last = now
        frac = min(done / self._total, 1.0)
        el = now - self._t0
        if self.bar:
            self.stream.write(f"\r  {self._name:<10} ▕{self._bar(frac)}▏ {100 * frac:5.1f}%  {_clock(el):>8}"
                              f"{self._left(frac, el)}  {note}\x1b[K")
        else:
            self.stream.write(f"  {self._name:<10} {100 * frac:5.1f}%  {_clock(el)}{self._left(frac, el)}"
                              f"{'  ' + note if note else ''}\n")
        self.stream.flush()

    def end(self, note: str = "") -> None:
        if not self.enabled:
            return
        el = time.monotonic() - self._t0
        if self.bar:
            self._last = 0.0
            self.update(self._total, note)
            self.stream.write("\n")
        elif el >= self.log_every:  # a stage worth logging: say it finished
            self.stream.write(f"  {self._name:<10} done in {_clock(el)}{'  ' + note if note else ''}\n")
        self.stream.flush()
