"""Benchmarks run by ``livevowel bench``.

Speed and memory goals are checked here, on the machine at hand, and never in
unit tests (shared machines are noisy). Each suite is a module in this
package with a function::

    run(*, quick: bool, out: Callable[[str], None]) -> dict

that prints its table through ``out`` and returns its figures (plain numbers,
for ``--json``). ``quick`` shrinks the work for a smoke test. Report ratios
and percentiles, and say which goal each figure is measured against.
"""

from __future__ import annotations

import time
from typing import Callable

import numpy as np

#: suite name -> module under livevowel.benchmarks, in run order.
SUITES: dict[str, str] = {
    "dsp": "dsp",
    "conditions": "conditions",
    "display": "display",
    "synth": "synth",
    "targets": "targets",
    "live": "live",
    "tracking": "tracking",
    "session": "session",
}


def percentiles_ms(seconds: "list[float] | np.ndarray") -> dict[str, float]:
    """Median, 95th and 99th percentile and max of durations, in milliseconds."""
    a = np.asarray(seconds, dtype=float) * 1e3
    return {
        "median_ms": float(np.median(a)),
        "p95_ms": float(np.percentile(a, 95)),
        "p99_ms": float(np.percentile(a, 99)),
        "max_ms": float(a.max()),
    }


def timed(fn: Callable[[], object], *, repeat: int) -> list[float]:
    """Wall-clock durations (seconds) of ``repeat`` calls of ``fn``."""
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


def verdict(ok: bool) -> str:
    """'meets goal' / 'MISSES goal' for a table row."""
    return "meets goal" if ok else "MISSES goal"
