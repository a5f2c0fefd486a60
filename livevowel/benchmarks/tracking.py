"""Suite "tracking": cost of the tracking and smoothing stage, per hop (live) and per file (offline).

1. **Per hop, streaming**: a :class:`~livevowel.dsp.engine.StreamingAnalyzer`
   runs once over synthetic vowels (the project's Klatt synthesiser,
   Peterson & Barney 1952 men's and women's means, from memory, with glides
   and short pauses) while the per-frame measures it hands to the tracking
   stage are recorded. The stage is then replayed on its own from those
   records: voicing decision and record (``_make_record``: one frame's local
   costs), choice of state (``CausalTracker.step``), median of three and
   display smoother, confidence and the output Frame (``_finalize``) -- all of
   a hop except the spectral measures. Wall time of each voiced hop, best of
   several replays (a shared machine's noise inflates single runs). Goal:
   p99 < 0.06 ms per hop (the whole hop must stay under 1 ms).
   The replay's frames are checked equal to the analyser's own.
2. **Offline**: the Viterbi tracking part of ``analyze`` (``_offline_track``:
   local costs of all voiced frames, the dynamic programming, median and
   hold) per second of audio. Goal: < 1 ms per second of audio (a tenth of
   the 10 ms that offline analysis at 100x real time may spend in all).
"""

from __future__ import annotations

import copy
import time
from typing import Callable

import numpy as np

from livevowel.benchmarks import percentiles_ms, verdict

HOP_GOAL_P99_MS = 0.06
OFFLINE_GOAL_MS_PER_S = 1.0

# Peterson & Barney (1952) means (Hz), from memory: F1, F2, F3
_MEN = {"i": (270, 2290, 3010), "ɑ": (730, 1090, 2440), "ɛ": (530, 1840, 2480), "u": (300, 870, 2240),
        "ɔ": (570, 840, 2410)}
_WOMEN = {"i": (310, 2790, 3310), "ɑ": (850, 1220, 2810), "ɛ": (610, 2330, 2990), "u": (370, 950, 2670),
          "ɔ": (590, 920, 2710)}


def _signal(rate: int, voice: str, table: dict, seconds: float, f0: float, seed: int) -> np.ndarray:
    from livevowel.dsp.synth import Schedule, Segment, render

    segs = [Segment(duration_s=0.3, kind="silent")]
    vowels = list(table.values())
    t, k = 0.3, 0
    while t < seconds - 0.3:
        segs.append(Segment(duration_s=0.5, f0_start_hz=f0 * (1 + 0.05 * (k % 3)), f0_end_hz=f0,
                            formants_hz=vowels[k % len(vowels)], transition_s=0.05 * (k % 3)))
        t += 0.5
        if k % 4 == 3:
            segs.append(Segment(duration_s=0.08, kind="silent"))
            t += 0.08
        k += 1
    segs.append(Segment(duration_s=0.2, kind="silent"))
    y, _ = render(Schedule(tuple(segs), voice=voice), rate_hz=rate, seed=seed, peak_dbfs=-6.0)
    return y + np.random.default_rng(seed).normal(0.0, 1e-3, y.shape)


def _record(rate: int, settings, y: np.ndarray):
    """Run the analyser once, keeping what each hop hands to the tracking stage."""
    from livevowel.dsp.engine import StreamingAnalyzer
    from livevowel.dsp.types import FrameTrack

    recs: list = []

    class Recording(StreamingAnalyzer):
        def _make_record(self, k, p, cand):
            recs.append((k, copy.deepcopy(p), copy.deepcopy(cand)))
            return super()._make_record(k, p, cand)

    sa = Recording(rate, settings=settings)
    track = FrameTrack.concat([sa.process(y), sa.flush()])
    return recs, track


def _replay(rate: int, settings, recs) -> tuple[list, np.ndarray]:
    from livevowel.dsp.engine import StreamingAnalyzer

    sa = StreamingAnalyzer(rate, settings=settings)
    outs, per = [], np.empty(len(recs))
    pc = time.perf_counter
    for i, (k, p, cand) in enumerate(recs):
        t0 = pc()
        sa._queue.append(sa._make_record(k, p, cand))
        while len(sa._queue) >= 2:
            outs.append(sa._finalize(sa._queue.pop(0), sa._queue[0]))
        per[i] = pc() - t0
    while sa._queue:
        outs.append(sa._finalize(sa._queue.pop(0), sa._queue[1] if len(sa._queue) > 1 else None))
    return outs, per


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    from livevowel.dsp import engine
    from livevowel.dsp.engine import AnalysisSettings

    seconds = 3.0 if quick else 10.0
    repeats = 3 if quick else 7
    cases = [("voice auto, 44.1 kHz, man", 44100, "auto", "man", _MEN, 110.0),
             ("voice adult_male, 16 kHz", 16000, "adult_male", "man", _MEN, 110.0),
             ("voice adult_female, 16 kHz", 16000, "adult_female", "woman", _WOMEN, 210.0)]
    res: dict = {}
    out(f"Tracking and smoothing per hop (replay of the recorded per-frame measures, {seconds:g} s each, "
        f"best of {repeats} per hop), voiced hops:")
    out(f"  {'case':<30} {'hops':>6} {'median ms':>10} {'p99 ms':>8} {'max ms':>8}   goal: p99 < {HOP_GOAL_P99_MS} ms")
    worst = 0.0
    for i, (label, rate, voice, synth_voice, table, f0) in enumerate(cases):
        s = AnalysisSettings(voice=voice)
        y = _signal(rate, synth_voice, table, seconds, f0, seed=i)
        recs, track = _record(rate, s, y)
        _replay(rate, s, recs)          # warm-up (caches, first calls), not counted
        runs = []
        for _ in range(repeats):
            outs, per = _replay(rate, s, recs)
            runs.append(per)
        per = np.min(np.array(runs), axis=0)
        got = np.array([[f.f1_hz, f.f2_hz, f.f3_hz, f.confidence] for f in outs])
        want = np.column_stack([track.f1_hz, track.f2_hz, track.f3_hz, track.confidence])
        same = got.shape == want.shape and np.array_equal(got, want, equal_nan=True)
        voiced = np.array([f.voiced for f in outs])[: len(per)]
        pc = percentiles_ms(per[voiced])
        worst = max(worst, pc["p99_ms"])
        out(f"  {label:<30} {int(voiced.sum()):>6} {pc['median_ms']:>10.4f} {pc['p99_ms']:>8.4f} {pc['max_ms']:>8.4f}"
            f"   {verdict(pc['p99_ms'] < HOP_GOAL_P99_MS)}{'' if same else '  (REPLAY DIFFERS from the analyser)'}")
        res[f"hop_{voice}_{rate}"] = {**pc, "replay_equal": bool(same)}
    res["hop_p99_worst_ms"] = worst

    out("Offline tracking (_offline_track: local costs, Viterbi, median, hold), per second of audio:")
    s = AnalysisSettings(voice="adult_male")
    y = _signal(16000, "man", _MEN, seconds, 110.0, seed=9)
    took: list[float] = []
    orig = engine._offline_track

    def timed_track(*a, **kw):
        t0 = time.perf_counter()
        r = orig(*a, **kw)
        took.append(time.perf_counter() - t0)
        return r

    engine._offline_track = timed_track
    try:
        for _ in range(repeats):
            engine.analyze(y, 16000, settings=s)
    finally:
        engine._offline_track = orig
    per_s = min(took) / (len(y) / 16000) * 1e3
    out(f"  voice adult_male, 16 kHz, {len(y) / 16000:.1f} s: {min(took) * 1e3:.2f} ms = {per_s:.3f} ms per s of audio"
        f"   (goal < {OFFLINE_GOAL_MS_PER_S} ms/s: {verdict(per_s < OFFLINE_GOAL_MS_PER_S)})")
    res["offline_track_ms_per_s"] = per_s
    return res
