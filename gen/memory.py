"""The C allocator's behaviour for long runs.

A run allocates and frees the same large numpy arrays chunk after chunk. glibc's malloc raises its
mmap threshold each time such a block is freed (its "dynamic threshold"), after which blocks of
that size come from the heap, where freeing them leaves holes that later, differently sized
requests do not fill: resident memory then grows by a few MiB per million events without any
leak. Fixing the threshold keeps blocks above it in mmap, which returns them to the system on
free; the resident size then stays flat with the number of events.

Measured with `python -m gen.benchmark` (e+e- -> mu+mu-, 2-core machine): at 10^7 events, medians
of 3 alternating runs, 284 MB peak and 10.9 s with the threshold fixed at 4 MiB against 329 MB and
11.4 s with glibc's dynamic threshold (at 10^6 events both peak at 283-284 MB). Fixed for every
run, it cost up to a fifth of the throughput at 10^6 events in other measurements (128 KiB,
glibc's initial value, a third), so it is fixed only when a process is about to sample
`LARGE_RUN` events or more, where the growth would show; shorter runs keep glibc's default.

`GEN_ALLOCATOR=tuned` fixes it for every run, `GEN_ALLOCATOR=system` never (and neither does gen
when the user has set `MALLOC_MMAP_THRESHOLD_`); Linux with glibc only. The setting is made once
per process and holds for the rest of it.
"""

from __future__ import annotations

import os
import sys

__all__ = ["tune_allocator", "MMAP_THRESHOLD", "LARGE_RUN"]

#: bytes: blocks from this size on are mmapped and returned to the system when freed
MMAP_THRESHOLD = 4 << 20
#: events (unweighted trials not counted) from which a run fixes the threshold by default
LARGE_RUN = 2_000_000
_M_MMAP_THRESHOLD = -3  # mallopt parameter number in glibc's malloc.h
_done = False


def tune_allocator(events: int) -> bool:
    """Fix glibc's mmap threshold for this process before it samples `events` events, if the
    mode asks for it (see the module docstring); True when the setting was made now."""
    global _done
    mode = os.environ.get("GEN_ALLOCATOR", "auto")
    if _done or not sys.platform.startswith("linux") or "MALLOC_MMAP_THRESHOLD_" in os.environ:
        return False
    if mode == "system" or (mode != "tuned" and events < LARGE_RUN):
        return False
    _done = True
    try:
        import ctypes

        return bool(ctypes.CDLL(None).mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD))
    except (OSError, AttributeError):  # not glibc
        return False
