"""Timing helpers shared by the benchmarks: wall-clock repeats, medians, percentiles."""

from __future__ import annotations

import statistics
import time


def timings_s(call, repeats: int, warmup: int = 1) -> list[float]:
    """Wall-clock seconds of `repeats` calls of `call()` (after `warmup` untimed calls)."""
    for _ in range(warmup):
        call()
    out = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        call()
        out.append(time.perf_counter() - t0)
    return out


def median(values) -> float:
    return statistics.median(values)


def percentile(values, q: float) -> float:
    """The q-th percentile (0–100), linear interpolation between order statistics."""
    s = sorted(values)
    pos = (len(s) - 1) * q / 100.0
    lo = int(pos)
    hi = min(lo + 1, len(s) - 1)
    return s[lo] + (s[hi] - s[lo]) * (pos - lo)
