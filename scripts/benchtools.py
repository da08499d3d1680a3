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


class ColdWarm(NamedTuple):
    cold: float     #: seconds, the first call in this process
    warm: float     #: seconds, median of the calls after it
    runs: int       #: number of warm calls
    result: object


def cold_and_warm(fn, runs: int = 5) -> ColdWarm:
    """Time the first call of ``fn`` (cold: imports, caches, first file read) apart from
    the median of ``runs`` further calls (warm), so two tools are compared like for like."""
    t0 = time.perf_counter()
    out = fn()
    cold = time.perf_counter() - t0
    w = timed(fn, runs)
    return ColdWarm(cold, w.median, max(1, int(runs)), w.result if w.result is not None else out)
