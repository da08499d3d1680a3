"""The one timer the benchmark scripts share (imported from this folder)."""

from __future__ import annotations

import statistics
import time
from typing import NamedTuple


class Timing(NamedTuple):
    median: float   #: seconds
    best: float     #: seconds
    times: list     #: every run, seconds
    result: object  #: what the last run returned


def timed(fn, runs: int = 3) -> Timing:
    """Run ``fn`` ``runs`` times with ``time.perf_counter``."""
    times, out = [], None
    for _ in range(max(1, int(runs))):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return Timing(statistics.median(times), min(times), times, out)
