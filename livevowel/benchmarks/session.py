"""Suite "session": cost of the session layer per frame and per attempt.

1. **Segmentation per frame**: :class:`~livevowel.session.attempts.AttemptSegmenter`
   fed a stream of frames (voiced runs of 400 ms with 600 ms pauses, 10 ms
   hop), including measuring each closed attempt. Goal: mean < 0.1 ms per
   frame (1 % of the 10 ms hop), so attempts cost nothing next to the engine.
2. **Judgement per attempt**: :func:`~livevowel.session.judge.judge` against
   the ``gae-men`` set (hit test, closeness, nearest target, hold time).
   Goal: p95 < 5 ms.
3. **Commit per attempt**: :meth:`SessionRecorder.attempt` on a real data
   folder: the attempt row (with its frame track as JSON) committed in WAL
   mode with ``synchronous=FULL``, and a 0.8 s 16 kHz WAV clip written
   atomically (temporary file, fsync, rename). Goal: p95 < 100 ms, well
   inside the shortest self-paced pause (0.3 s), so saving never delays
   the next prompt.
"""

from __future__ import annotations

import math
import shutil
import tempfile
import time
from typing import Callable

import numpy as np

from livevowel.benchmarks import percentiles_ms, verdict


def _frames(n_attempts: int, *, hop: float = 0.010):
    from livevowel.dsp.types import Frame

    rng = np.random.default_rng(0)
    out = []
    t = hop / 2
    for _ in range(n_attempts):
        for k in range(40):
            out.append(Frame(t, True, 120.0, 300 + rng.normal(0, 5), 2300 + rng.normal(0, 20), 2900.0,
                             60.0, 90.0, 120.0, -20.0, 0.9))
            t += hop
        for k in range(60):
            out.append(Frame(t, False, math.nan, math.nan, math.nan, math.nan, math.nan, math.nan, math.nan,
                             -70.0, 0.0))
            t += hop
    return out


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    from livevowel.session.attempts import AttemptSegmenter, measure_span
    from livevowel.session.judge import judge
    from livevowel.session.store import SessionRecorder, track_to_json
    from livevowel.targets import load_target_set

    n_att = 20 if quick else 200
    frames = _frames(n_att)
    seg = AttemptSegmenter()
    t0 = time.perf_counter()
    atts = []
    for fr in frames:
        for sp in seg.push(fr):
            atts.append(measure_span(sp))
    atts += [measure_span(sp) for sp in seg.flush()]
    per_frame_ms = (time.perf_counter() - t0) / len(frames) * 1e3
    ok1 = per_frame_ms < 0.1
    out(f"segmentation + measures   {len(frames)} frames, {len(atts)} attempts: "
        f"{per_frame_ms * 1e3:.1f} us per frame (goal < 100 us)  {verdict(ok1)}")

    ts = load_target_set("gae-men")
    jt = []
    for a in atts:
        t0 = time.perf_counter()
        judge(a, ts, "fleece", hit_size_sd=1.5, hold_s=0.2)
        jt.append(time.perf_counter() - t0)
    pj = percentiles_ms(jt)
    ok2 = pj["p95_ms"] < 5
    out(f"judgement per attempt     median {pj['median_ms']:.2f} ms  p95 {pj['p95_ms']:.2f} ms  "
        f"p99 {pj['p99_ms']:.2f} ms (goal p95 < 5 ms)  {verdict(ok2)}")

    folder = tempfile.mkdtemp(prefix="livevowel-bench-")
    try:
        rec = SessionRecorder(folder=folder)
        rec.start(speaker_id="BENCH", target_set=ts.id, mode="self_paced")
        clip = (0.3 * np.sin(2 * np.pi * 150 * np.arange(12800) / 16000)).astype(np.float32)
        ct = []
        n_commit = 20 if quick else 100
        for i in range(n_commit):
            a = atts[i % len(atts)]
            row = {"number": i + 1, "start_s": a.start_s, "end_s": a.end_s, "duration_s": a.duration_s,
                   "f1_hz": a.f1_hz, "f2_hz": a.f2_hz, "flags": "", "auto_hit": 1, "trial": i + 1,
                   "target_id": "fleece", "track_json": track_to_json(a.track)}
            t0 = time.perf_counter()
            rec.attempt(row, samples=clip, rate_hz=16000)
            ct.append(time.perf_counter() - t0)
        rec.finish()
        rec.close()
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    pc = percentiles_ms(ct)
    ok3 = pc["p95_ms"] < 100
    out(f"commit per attempt        median {pc['median_ms']:.1f} ms  p95 {pc['p95_ms']:.1f} ms  "
        f"p99 {pc['p99_ms']:.1f} ms  max {pc['max_ms']:.1f} ms (row + 0.8 s clip, fsync; goal p95 < 100 ms)  "
        f"{verdict(ok3)}")
    return {"segment_us_per_frame": per_frame_ms * 1e3, "judge": pj, "commit": pc,
            "goals_met": bool(ok1 and ok2 and ok3)}
