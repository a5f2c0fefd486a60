"""Suite "targets": cost of judging one frame against a target set, and of loading a set.

1. **Per-frame classification**: for one (F1, F2) point, the nearest target
   of the 12-vowel ``gae-men`` set (Mahalanobis), then the hit test and the
   closeness score against one target -- what the live display and the
   drills do for every 10 ms frame. Goal: p99 < 0.5 ms (5% of a hop).
2. **Batch classification**: ``TargetSet.classify`` over 10 000 points (a
   long recording's frames). Goal: < 50 ms.
3. **Loading** a shipped set from YAML with validation. Goal: median < 20 ms.
"""

from __future__ import annotations

import time
from typing import Callable

import numpy as np

from livevowel.benchmarks import percentiles_ms, verdict

FRAME_GOAL_P99_MS = 0.5
BATCH_GOAL_MS = 50.0
LOAD_GOAL_MEDIAN_MS = 20.0


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    rng = np.random.default_rng(0)
    n = 500 if quick else 20000
    pts = np.column_stack([rng.uniform(250, 900, n), rng.uniform(800, 2600, n)]).tolist()
    target = ts.get("fleece")
    times = []
    for f1, f2 in pts:
        t0 = time.perf_counter()
        ts.nearest(f1, f2)
        target.contains(f1, f2)
        target.closeness(f1, f2)
        times.append(time.perf_counter() - t0)
    frame = percentiles_ms(times)
    out(f"{'case':<34}{'median ms':>10}{'p95 ms':>9}{'p99 ms':>9}{'max ms':>9}")
    out(f"{'one frame: nearest+hit+score':<34}{frame['median_ms']:>10.4f}{frame['p95_ms']:>9.4f}"
        f"{frame['p99_ms']:>9.4f}{frame['max_ms']:>9.3f}  goal p99 < {FRAME_GOAL_P99_MS} ms  "
        + verdict(frame["p99_ms"] < FRAME_GOAL_P99_MS))

    big = rng.uniform([250, 800], [900, 2600], size=(10000, 2))
    reps = 3 if quick else 10
    best = float("inf")
    for _ in range(reps):
        t0 = time.perf_counter()
        ts.classify(big[:, 0], big[:, 1])
        best = min(best, time.perf_counter() - t0)
    batch_ms = best * 1e3
    out(f"classify 10 000 points: {batch_ms:.2f} ms (best of {reps})  goal < {BATCH_GOAL_MS} ms  "
        + verdict(batch_ms < BATCH_GOAL_MS))

    loads = []
    for _ in range(5 if quick else 30):
        t0 = time.perf_counter()
        load_target_set("gae-men")
        loads.append(time.perf_counter() - t0)
    load = percentiles_ms(loads)
    out(f"load gae-men.yaml: median {load['median_ms']:.2f} ms, max {load['max_ms']:.2f} ms  "
        f"goal median < {LOAD_GOAL_MEDIAN_MS} ms  " + verdict(load["median_ms"] < LOAD_GOAL_MEDIAN_MS))
    return {"frame": frame, "classify_10000_ms": batch_ms, "load": load}
