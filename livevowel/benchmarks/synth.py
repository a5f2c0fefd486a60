"""Suite "synth": block render time of the formant synthesiser.

1. **10 ms block render time** of :class:`livevowel.dsp.synth.KlattVoice`
   (the demo voice calls it from the audio path once per block), for a man's
   voice at 120 Hz and a high voice at 480 Hz, at 16 and 48 kHz, with a
   formant glide, jitter, shimmer and aspiration on. Goal: wall-clock p99
   < 2 ms (a fifth of the block's duration, leaving the audio thread most of
   its time). Thread CPU time is shown beside it: on a busy machine the wall
   clock also counts waiting for a core.
2. **Offline real-time factor** of :func:`livevowel.dsp.synth.render` on the
   6 s example take at 16 kHz (render seconds per audio second). Goal: < 0.2.
"""

from __future__ import annotations

import os
import time
from typing import Callable

from livevowel.benchmarks import percentiles_ms, verdict

BLOCK_GOAL_P99_MS = 2.0
RTF_GOAL = 0.2


def _schedule(f0_hz: float):
    from livevowel.dsp.synth import Schedule, Segment

    segs = []
    for _ in range(20):
        segs.append(Segment(0.5, "voiced", f0_hz, 0.9 * f0_hz, (730.0, 1090.0, 2440.0), transition_s=0.15))
        segs.append(Segment(0.5, "voiced", 0.9 * f0_hz, f0_hz, (270.0, 2290.0, 3010.0), transition_s=0.15))
    return Schedule(tuple(segs), voice="man" if f0_hz < 300 else "child", jitter_pct=1.0, shimmer_db=0.3,
                    aspiration_db=-25.0, ramp_s=0.02)


def block_times(*, f0_hz: float, rate_hz: float, blocks: int) -> tuple[list[float], list[float]]:
    """Wall-clock and thread-CPU seconds per 10 ms ``render`` call over
    ``blocks`` consecutive blocks."""
    from livevowel.dsp.synth import KlattVoice

    voice = KlattVoice(_schedule(f0_hz), rate_hz=rate_hz, seed=1)
    n = int(round(0.010 * rate_hz))
    voice.render(n)                       # warm-up (first pages of noise, imports)
    wall, cpu = [], []
    for _ in range(blocks):
        c0 = time.thread_time()
        t0 = time.perf_counter()
        voice.render(n)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.thread_time() - c0)
    return wall, cpu


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    from livevowel.examples import example_schedule
    from livevowel.dsp.synth import render

    blocks = 100 if quick else 1500
    results: dict = {}
    out(f"{'case':<28}{'median ms':>10}{'p95 ms':>9}{'p99 ms':>9}{'max ms':>9}{'cpu p50':>9}{'cpu p99':>9}"
        f"  goal wall p99 < {BLOCK_GOAL_P99_MS} ms")
    for f0 in (120.0, 480.0):
        for rate in (16000.0, 48000.0):
            wall, cpu = block_times(f0_hz=f0, rate_hz=rate, blocks=blocks)
            p = percentiles_ms(wall)
            c = percentiles_ms(cpu)
            name = f"block_f0_{int(f0)}_rate_{int(rate)}"
            results[name] = {**p, "cpu_median_ms": c["median_ms"], "cpu_p99_ms": c["p99_ms"]}
            out(f"10 ms block F0 {int(f0)} Hz {int(rate / 1000)} kHz".ljust(28)
                + f"{p['median_ms']:>10.3f}{p['p95_ms']:>9.3f}{p['p99_ms']:>9.3f}{p['max_ms']:>9.3f}"
                + f"{c['median_ms']:>9.3f}{c['p99_ms']:>9.3f}  "
                + verdict(p["p99_ms"] < BLOCK_GOAL_P99_MS))
    if os.getloadavg()[0] > (os.cpu_count() or 1):
        out(f"note: load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores; wall-clock tails include "
            "waiting for a core (the cpu columns do not)")
    sch = example_schedule()
    reps = 1 if quick else 3
    best = float("inf")
    for _ in range(reps):
        t0 = time.perf_counter()
        render(sch, rate_hz=16000.0)
        best = min(best, time.perf_counter() - t0)
    rtf = best / sch.duration_s
    results["example_render_rtf"] = rtf
    out(f"example take ({sch.duration_s:.1f} s, 16 kHz) real-time factor {rtf:.3f} (best of {reps})  "
        f"goal < {RTF_GOAL}  {verdict(rtf < RTF_GOAL)}")
    return results
