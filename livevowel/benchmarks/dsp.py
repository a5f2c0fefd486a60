"""DSP engine: streaming per-hop time, offline speed against a plain loop, formant accuracy.

Figures (all measured in the same run, on this machine):

* **Streaming**: :class:`~livevowel.dsp.engine.StreamingAnalyzer` fed 10 ms
  blocks of a 16 kHz synthetic voice; wall-clock time of each ``process``
  call (the first block, which builds the plans, is left out). Goal: p99
  below 1 ms per 10 ms hop.
* **Offline**: :func:`~livevowel.dsp.engine.analyze` (``causal=False``) on
  the same signal, as a real-time factor (seconds of audio per second of
  work; goal >= 100x), and a *plain per-frame loop* on the same signal, in
  numpy throughout: for each 10 ms hop, level, a textbook YIN F0 (steps 2-5
  of de Cheveigné & Kawahara 2002: difference function over all lags at
  once, CMND, absolute threshold 0.15, parabolic interpolation), pre-emphasis
  and Hamming window, ``numpy.correlate`` autocorrelation,
  ``scipy.linalg.solve_toeplitz`` (Levinson) and ``numpy.roots``, then the
  first three roots above 90 Hz narrower than 400 Hz. Goal: engine >= 5x
  the loop. For comparison, the same loop is also timed with livevowel's
  own compiled YIN in place of the numpy one (one frame per call). The
  loop's YIN uses the paper's threshold 0.15 (the engine 0.1 with its dip
  rule). Until the engine's loops were compiled, the plain loop called the
  engine's YIN (then numpy, FFT-based); its figures are not comparable with
  runs from before that change.
* **Accuracy**: steady vowels from the project synthesiser
  (:mod:`livevowel.dsp.synth`, Klatt 1980 cascade) at the Peterson & Barney
  (1952) speaker-group means (from memory) for men, women and children, at
  F0 in two bands (100-250 Hz and 300-400 Hz). On the same frames (the
  steady middle of each vowel), the engine's F1/F2 and those of plain
  autocorrelation LPC (same analysis rate and order as the engine, Hamming
  25 ms, pre-emphasis 0.97, formants = first roots above 90 Hz narrower than
  400 Hz; common practice) are compared with the synthesiser's formants:
  median absolute error in per cent, and the share of frames more than 20 %
  off (a frame with no estimate counts as off). A second table repeats the
  engine's figures with white noise at 20 dB SNR added to the same signals,
  with the ratio of each median to the clean one (goal: at most 1.5).
* **Shown**: on the same frames of the live (causal) path, which the
  practice screen gets, the share it would show as a dot (confidence at or
  above its default ``min_confidence``), and how many of those have F1 or
  F2 more than 20 % off: what a user sees, where the accuracy tables count
  every frame. No goal; it follows the confidence rules
  (``livevowel.dsp.engine.ON_HARMONIC``).
"""

from __future__ import annotations

import time
from typing import Callable

import numpy as np

from livevowel.benchmarks import percentiles_ms, verdict
from livevowel.config import defaults as config_defaults

#: Input rate of the benchmark signals, Hz (a common microphone rate).
RATE_HZ = 16000

#: Peterson & Barney (1952) mean F1, F2, F3 (Hz) per speaker group, from memory.
PB1952: dict[str, dict[str, tuple[float, float, float]]] = {
    "men": {
        "i": (270, 2290, 3010), "ɪ": (390, 1990, 2550), "ɛ": (530, 1840, 2480), "æ": (660, 1720, 2410),
        "ɑ": (730, 1090, 2440), "ɔ": (570, 840, 2410), "ʊ": (440, 1020, 2240), "u": (300, 870, 2240),
        "ʌ": (640, 1190, 2390), "ɝ": (490, 1350, 1690),
    },
    "women": {
        "i": (310, 2790, 3310), "ɪ": (430, 2480, 3070), "ɛ": (610, 2330, 2990), "æ": (860, 2050, 2850),
        "ɑ": (850, 1220, 2810), "ɔ": (590, 920, 2710), "ʊ": (470, 1160, 2680), "u": (370, 950, 2670),
        "ʌ": (760, 1400, 2780), "ɝ": (500, 1640, 1960),
    },
    "children": {
        "i": (370, 3200, 3730), "ɪ": (530, 2730, 3600), "ɛ": (690, 2610, 3570), "æ": (1010, 2320, 3320),
        "ɑ": (1030, 1370, 3170), "ɔ": (680, 1060, 3180), "ʊ": (560, 1410, 3310), "u": (430, 1170, 3260),
        "ʌ": (850, 1590, 3360), "ɝ": (560, 1820, 2160),
    },
}

#: speaker group -> (synthesiser voice, engine voice)
GROUP_VOICES = {"men": ("man", "adult_male"), "women": ("woman", "adult_female"), "children": ("child", "child")}

#: F0 band label -> F0 values (Hz) synthesised in that band.
F0_BANDS = {"100-250 Hz": (110.0, 170.0, 240.0), "300-400 Hz": (300.0, 350.0, 400.0)}

#: SNR (dB) of the noisy accuracy table, and the goal for its errors (x the clean ones).
NOISE_SNR_DB = 20.0
NOISE_GOAL_RATIO = 1.5
#: A clean median below this (%, under the table's resolution) gets no ratio ("-"):
#: a --quick run's few frames can read 0.00x % clean.
RATIO_MIN_CLEAN_PCT = 0.05

#: Frames at or above this confidence show a dot on the practice screen
#: (the default of config.yaml's ``practice.min_confidence``).
SHOWN_MIN_CONFIDENCE = float(config_defaults()["practice"]["min_confidence"])

#: Accuracy goals on the clean table: median |error| of F1 and of F2 at most this (%) per F0 band ...
GOAL_MEDIAN_PCT = {"100-250 Hz": 3.0, "300-400 Hz": 5.0}
#: ... and frames with F1 or F2 more than 20 % off (or missing) at most this share (%).
GOAL_OFF_PCT = 2.0

GOAL_P99_MS = 1.0
GOAL_RTF = 100.0
GOAL_RATIO = 5.0


# ---------------------------------------------------------------------------
# signals


def _speech_like(duration_s: float, seed: int = 0, *, f0s: dict[str, float] | None = None) -> np.ndarray:
    """Vowels of the groups of ``f0s`` in turn (0.4 s each, 60 ms pauses), 16 kHz.

    ``f0s``: F0 per group, Hz (default men 120, women 220, children 300)."""
    from livevowel.dsp.synth import synthesize_vowel

    parts = []
    total = 0
    i = 0
    f0s = f0s or {"men": 120.0, "women": 220.0, "children": 300.0}
    groups = list(f0s)
    while total < duration_s * RATE_HZ:
        g = groups[(i // 4) % len(groups)]
        vowel = list(PB1952[g])[i % 10]
        x = synthesize_vowel(formants_hz=PB1952[g][vowel], f0_hz=(f0s[g], f0s[g] * 0.9), duration_s=0.4,
                             rate_hz=RATE_HZ, voice=GROUP_VOICES[g][0], jitter_pct=0.5, shimmer_db=0.2,
                             seed=seed + i, peak_dbfs=-12.0)
        parts += [x, np.zeros(int(0.06 * RATE_HZ))]
        total += len(x) + int(0.06 * RATE_HZ)
        i += 1
    return np.concatenate(parts)[: int(duration_s * RATE_HZ)]


# ---------------------------------------------------------------------------
# plain per-frame reference


def _plain_formants(frame: np.ndarray, *, order: int, rate_hz: float, n_formants: int) -> list[float]:
    """Plain autocorrelation LPC of one frame: the textbook recipe (common practice)."""
    import scipy.linalg

    x = np.append(frame[0], frame[1:] - 0.97 * frame[:-1]) * np.hamming(len(frame))
    r = np.correlate(x, x, mode="full")[len(x) - 1: len(x) + order]
    out = [float("nan")] * n_formants
    if r[0] <= 0:
        return out
    a = np.concatenate(([1.0], scipy.linalg.solve_toeplitz(r[:order], -r[1:])))
    roots = np.roots(a)
    roots = roots[roots.imag > 0]
    f = np.angle(roots) * rate_hz / (2 * np.pi)
    b = -np.log(np.abs(roots)) * rate_hz / np.pi
    keep = np.sort(f[(f > 90.0) & (b < 400.0)])
    for j in range(min(n_formants, len(keep))):
        out[j] = float(keep[j])
    return out


def _plain_yin(frame: np.ndarray, *, rate_hz: float, f0_min_hz: float, f0_max_hz: float,
               threshold: float = 0.15) -> float:
    """Textbook YIN of one frame in numpy (de Cheveigné & Kawahara 2002, steps 2-5), F0 in Hz."""
    tau_max = int(np.ceil(rate_hz / f0_min_hz))
    tau_min = max(2, int(rate_hz // f0_max_hz))
    w = len(frame) - tau_max - 1
    view = np.lib.stride_tricks.sliding_window_view(frame, w)[: tau_max + 2]   # lags 0 .. tau_max + 1
    d = np.sum((view[0][None, :] - view) ** 2, axis=1)
    cs = np.cumsum(d[1:])
    dp = np.ones_like(d)
    dp[1:] = d[1:] * np.arange(1, len(d)) / np.where(cs > 0, cs, 1.0)
    below = np.flatnonzero(dp[tau_min: tau_max + 1] < threshold)
    if len(below):
        tau = tau_min + int(below[0])
        while tau + 1 <= tau_max and dp[tau + 1] < dp[tau]:
            tau += 1
    else:
        tau = tau_min + int(np.argmin(dp[tau_min: tau_max + 1]))
    den = d[tau - 1] - 2.0 * d[tau] + d[tau + 1]
    shift = 0.5 * (d[tau - 1] - d[tau + 1]) / den if den > 0 else 0.0
    return float(rate_hz / (tau + np.clip(shift, -1.0, 1.0))) if d.max() > 0 else float("nan")


def plain_loop(x: np.ndarray, *, rate_hz: float, analysis_rate_hz: float, order: int,
               pitch: str = "numpy") -> np.ndarray:
    """Per-frame loop over a whole signal: level, F0, F1-F3 per 10 ms hop -> (n, 5).

    ``pitch``: ``"numpy"`` (:func:`_plain_yin`) or ``"livevowel"`` (the
    engine's compiled :func:`~livevowel.dsp.pitch.yin`, one frame per call).
    """
    from scipy.signal import resample_poly

    from livevowel.dsp.pitch import frame_level_db, yin, yin_frame_length

    from math import gcd

    g = gcd(int(rate_hz), int(analysis_rate_hz))
    xa = resample_poly(x, int(analysis_rate_hz) // g, int(rate_hz) // g)
    n = int(round(0.025 * analysis_rate_hz))
    hop = int(round(0.010 * analysis_rate_hz))
    n_pitch = yin_frame_length(rate_hz=analysis_rate_hz, f0_min_hz=60.0)
    ext = max(0, (n_pitch - n + 1) // 2)
    xp = np.concatenate([np.zeros(ext), xa, np.zeros(ext)])
    rows = []
    for start in range(0, len(xa) - n + 1, hop):
        frame = xa[start:start + n]
        level = frame_level_db(frame)[0]
        seg = xp[start:start + n + 2 * ext]
        f0_max = min(700.0, analysis_rate_hz / 4)
        if pitch == "numpy":
            f0 = _plain_yin(seg, rate_hz=analysis_rate_hz, f0_min_hz=60.0, f0_max_hz=f0_max)
        else:
            f0 = yin(seg, rate_hz=analysis_rate_hz, f0_min_hz=60.0, f0_max_hz=f0_max)[0][0]
        rows.append([level, f0] + _plain_formants(frame, order=order, rate_hz=analysis_rate_hz, n_formants=3))
    return np.array(rows)


# ---------------------------------------------------------------------------
# parts of the run


def streaming_hop_times(x: np.ndarray, *, settings=None, block: int = 160) -> tuple[list[float], list[float]]:
    """Wall-clock and thread-CPU seconds per ``StreamingAnalyzer.process`` call
    on ``block``-sample blocks (first call dropped)."""
    from livevowel.dsp.engine import StreamingAnalyzer

    sa = StreamingAnalyzer(RATE_HZ, settings=settings)
    wall, cpu = [], []
    for i in range(0, len(x) - block + 1, block):
        b = x[i:i + block]
        c0 = time.thread_time()
        t0 = time.perf_counter()
        sa.process(b)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.thread_time() - c0)
    sa.flush()
    return wall[1:], cpu[1:]


def offline_speed(x: np.ndarray, *, repeat: int) -> dict[str, float]:
    """Real-time factors of ``analyze`` (default threads, and one thread) and of
    the plain loop on ``x``, and their ratios. The four are timed in turn within
    each repeat, so a change of load on the machine falls on all of them."""
    from livevowel.dsp.engine import AnalysisSettings, _thread_count, analyze

    dur = len(x) / RATE_HZ
    res = analyze(x, RATE_HZ)
    one = AnalysisSettings(threads=1)
    names = ("engine", "engine_1", "plain", "mixed")
    wall: dict[str, list[float]] = {k: [] for k in names}
    cpu: dict[str, list[float]] = {k: [] for k in names}
    runs = {
        "engine": lambda: analyze(x, RATE_HZ),
        "engine_1": lambda: analyze(x, RATE_HZ, settings=one),
        "plain": lambda: plain_loop(x, rate_hz=RATE_HZ, analysis_rate_hz=res.analysis_rate_hz, order=res.order),
        "mixed": lambda: plain_loop(x, rate_hz=RATE_HZ, analysis_rate_hz=res.analysis_rate_hz, order=res.order,
                                    pitch="livevowel"),
    }
    for _ in range(repeat):
        for k in names:
            c0, t0 = time.process_time(), time.perf_counter()
            runs[k]()
            wall[k].append(time.perf_counter() - t0)
            cpu[k].append(time.process_time() - c0)
    rtf = {k: dur / float(np.median(wall[k])) for k in names}
    crtf = {k: dur / float(np.median(cpu[k])) for k in names}
    n_frames = int(round(dur / 0.010))
    return {"audio_s": dur, "engine_rtf": rtf["engine"], "plain_rtf": rtf["plain"],
            "ratio": rtf["engine"] / rtf["plain"], "engine_cpu_rtf": crtf["engine"], "plain_cpu_rtf": crtf["plain"],
            "cpu_ratio": crtf["engine"] / crtf["plain"], "threads": _thread_count(AnalysisSettings(), n_frames),
            "engine_1_rtf": rtf["engine_1"], "engine_1_cpu_rtf": crtf["engine_1"],
            "ratio_1": rtf["engine_1"] / rtf["plain"],
            "plain_livevowel_yin_rtf": rtf["mixed"], "plain_livevowel_yin_cpu_rtf": crtf["mixed"],
            "analysis_rate_hz": float(res.analysis_rate_hz), "order": int(res.order), "method": res.method}


def frames_off(est: np.ndarray, true: np.ndarray) -> np.ndarray:
    """Frames (rows of F1, F2 estimates in Hz) with F1 or F2 more than 20 % off ``true`` (or missing)."""
    return ~np.all(np.abs(est - true) <= 0.2 * true, axis=1)


def accuracy(*, quick: bool, snr_db: float | None = None) -> list[dict]:
    """Rows of the accuracy table: group x F0 band, engine and plain LPC.

    ``snr_db``: white noise at this SNR over the vowel
    (:func:`livevowel.dsp.synth.add_noise`, same seed as the vowel) on the
    same signals; None = clean.
    """
    from livevowel.dsp.engine import AnalysisSettings, analyze
    from livevowel.dsp.synth import add_noise, synthesize_vowel

    dur = 0.35 if quick else 0.6
    vowels = ("i", "ɑ", "u") if quick else tuple(PB1952["men"])
    rows = []
    seed = 100
    for group, table in PB1952.items():
        synth_voice, engine_voice = GROUP_VOICES[group]
        settings = AnalysisSettings(voice=engine_voice)
        for band, f0s in F0_BANDS.items():
            f0s = f0s[1:2] if quick else f0s
            err = {"engine": ([], []), "plain": ([], [])}
            shown, shown_off = [], []
            for vowel in vowels:
                fm = table[vowel]
                for f0 in f0s:
                    seed += 1
                    x = synthesize_vowel(formants_hz=fm, f0_hz=f0, duration_s=dur, rate_hz=RATE_HZ,
                                         voice=synth_voice, jitter_pct=0.5, shimmer_db=0.2, seed=seed,
                                         peak_dbfs=-12.0)
                    if snr_db is not None:
                        x = add_noise(x, snr_db=snr_db, seed=seed)
                    res = analyze(x, RATE_HZ, settings=settings)
                    fr = res.frames
                    steady = (fr.time_s >= 0.1) & (fr.time_s <= dur - 0.1)
                    times = fr.time_s[steady]
                    eng = np.column_stack([fr.f1_hz[steady], fr.f2_hz[steady]])
                    # what the screen gets: the live (causal) path's frames at the same times
                    live = analyze(x, RATE_HZ, settings=settings, causal=True).frames
                    sh = live.confidence[steady] >= SHOWN_MIN_CONFIDENCE
                    got = np.column_stack([live.f1_hz[steady], live.f2_hz[steady]])
                    far = frames_off(got, np.asarray(fm[:2]))
                    shown.append(sh)
                    shown_off.append(sh & far)
                    plain = (_plain_on_frames(x, times, rate_hz=res.analysis_rate_hz, order=res.order)
                             if snr_db is None else np.full_like(eng, np.nan))   # noisy table: engine only
                    for name, est in (("engine", eng), ("plain", plain)):
                        for j in range(2):
                            err[name][j].append(100.0 * np.abs(est[:, j] - fm[j]) / fm[j])
            row = {"group": group, "band": band}
            for name in ("engine", "plain"):
                for j, fn in enumerate(("f1", "f2")):
                    e = np.concatenate(err[name][j])
                    row[f"{name}_{fn}_median_pct"] = float(np.nanmedian(e)) if np.any(np.isfinite(e)) else float("nan")
                    row[f"{name}_{fn}_over20_pct"] = float(100.0 * np.mean(~(e <= 20.0)))
            row["frames"] = int(sum(len(a) for a in err["engine"][0]))
            n_shown = int(np.concatenate(shown).sum())
            row["engine_shown_pct"] = float(100.0 * n_shown / max(row["frames"], 1))
            row["engine_shown_over20_pct"] = (float(100.0 * np.concatenate(shown_off).sum() / n_shown) if n_shown
                                              else float("nan"))      # none shown: no share to report
            rows.append(row)
    return rows


def clean_row_meets_goal(row: dict) -> bool:
    """Whether a clean accuracy row (:func:`accuracy`) meets the issue's goals for its F0 band."""
    limit = GOAL_MEDIAN_PCT[row["band"]]
    return all(row[f"engine_{j}_median_pct"] <= limit and row[f"engine_{j}_over20_pct"] <= GOAL_OFF_PCT
               for j in ("f1", "f2"))


def noisy_row_meets_goal(row: dict) -> bool:
    """Whether a noisy row (with ``engine_f*_clean_median_pct`` filled in) meets the noise goal.

    Medians: at most ``NOISE_GOAL_RATIO`` x the measured clean medians (a
    clean median under ``RATIO_MIN_CLEAN_PCT`` counts as that). Frames more
    than 20 % off: at most ``NOISE_GOAL_RATIO`` x the clean goal's share
    (a clean share of 0 would allow none at all).
    """
    return all(row[f"engine_{j}_median_pct"]
               <= NOISE_GOAL_RATIO * max(row[f"engine_{j}_clean_median_pct"], RATIO_MIN_CLEAN_PCT)
               and row[f"engine_{j}_over20_pct"] <= NOISE_GOAL_RATIO * GOAL_OFF_PCT for j in ("f1", "f2"))


def _plain_on_frames(x: np.ndarray, times_s: np.ndarray, *, rate_hz: float, order: int) -> np.ndarray:
    """Plain LPC F1/F2 of 25 ms frames centred at ``times_s`` (resampled to ``rate_hz``)."""
    from math import gcd

    from scipy.signal import resample_poly

    g = gcd(RATE_HZ, int(rate_hz))
    xa = resample_poly(x, int(rate_hz) // g, RATE_HZ // g)
    n = int(round(0.025 * rate_hz))
    out = np.full((len(times_s), 2), np.nan)
    for i, t in enumerate(times_s):
        start = int(round(t * rate_hz - (n - 1) / 2))
        if start < 0 or start + n > len(xa):
            continue
        out[i] = _plain_formants(xa[start:start + n], order=order, rate_hz=rate_hz, n_formants=2)
    return out


def estimator_costs(*, quick: bool) -> list[dict]:
    """CPU microseconds per frame of each frame-level estimator, one frame per call and in batches.

    Frames as the engine uses them for a woman's voice: 25 ms at 11 kHz
    (275 samples), order 12, YIN window of two periods of 60 Hz (369 samples).
    """
    from livevowel.dsp.lpc import formant_candidates, lpc
    from livevowel.dsp.pitch import frame_level_db, yin, yin_frame_length

    rate = 11000.0
    rng = np.random.default_rng(0)
    n_batch = 100 if quick else 1000
    reps_one = 50 if quick else 400
    x = rng.standard_normal((n_batch, 275))
    xp = rng.standard_normal((n_batch, yin_frame_length(rate_hz=rate, f0_min_hz=60.0)))
    a = lpc(x, order=12)
    jobs = [
        ("frame_level_db", lambda f, p, c: frame_level_db(f)),
        ("yin", lambda f, p, c: yin(p, rate_hz=rate, f0_min_hz=60.0, f0_max_hz=700.0, fallback=True)),
        ("lpc autocorrelation", lambda f, p, c: lpc(f, order=12, method="autocorrelation")),
        ("lpc burg", lambda f, p, c: lpc(f, order=12, method="burg")),
        ("lpc weighted (SWLP)", lambda f, p, c: lpc(f, order=12, method="weighted", rate_hz=rate)),
        ("lpc weighted (WLP)", lambda f, p, c: lpc(f, order=12, method="weighted", rate_hz=rate, stabilized=False)),
        ("formant_candidates", lambda f, p, c: formant_candidates(c, rate_hz=rate, max_bandwidth_hz=700.0)),
    ]
    rows = []
    for name, fn in jobs:
        c0 = time.thread_time()
        for _ in range(reps_one):
            fn(x[:1], xp[:1], a[:1])
        one = (time.thread_time() - c0) / reps_one
        c0 = time.thread_time()
        fn(x, xp, a)
        batch = (time.thread_time() - c0) / n_batch
        rows.append({"estimator": name, "one_frame_us": one * 1e6, "batched_us_per_frame": batch * 1e6})
    return rows


# ---------------------------------------------------------------------------
# the suite


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    """Print the DSP tables; return the figures."""
    from livevowel.dsp.engine import AnalysisSettings, warm_up

    figures: dict = {}
    dur = 1.0 if quick else 10.0
    x = _speech_like(dur)
    # as the live path does before capture: compiled kernels loaded (or compiled) first,
    # so the figures are steady-state hops, not the one-off loading of machine code
    for voice in ("auto", "adult_male", "adult_female", "child"):
        warm_up(AnalysisSettings(voice=voice))
    out("(compiled kernels loaded before timing, as LivePipeline.start does; not part of the figures)")

    out(f"Streaming: StreamingAnalyzer.process on 10 ms blocks (160 samples at {RATE_HZ} Hz), "
        f"{dur:g} s of synthetic vowels")
    out(f"  {'settings':<24}{'blocks':>7}{'median ms':>11}{'p99 ms':>9}{'max ms':>9}{'CPU med':>9}{'CPU p99':>9}"
        f"   goal: wall p99 < {GOAL_P99_MS:g} ms")
    figures["streaming"] = {}
    c_start, w_start = time.process_time(), time.perf_counter()
    # high voices (women F0 380, children 400 Hz): where F1 falls near or under F0 and the
    # closed-phase step runs on top of the harmonic fit
    high = _speech_like(dur, seed=50, f0s={"women": 380.0, "children": 400.0})
    for label, s, sig in (("default (voice auto)", None, x),
                          ("voice adult_female", AnalysisSettings(voice="adult_female"), x),
                          ("voice child", AnalysisSettings(voice="child"), x),
                          ("high voices, F0 380-400", AnalysisSettings(voice="adult_female"), high)):
        wall, cpu = streaming_hop_times(sig, settings=s)
        p = percentiles_ms(wall)
        pc = percentiles_ms(cpu)
        ok = p["p99_ms"] < GOAL_P99_MS
        out(f"  {label:<24}{len(wall):>7}{p['median_ms']:>11.3f}{p['p99_ms']:>9.3f}{p['max_ms']:>9.3f}"
            f"{pc['median_ms']:>9.3f}{pc['p99_ms']:>9.3f}   {verdict(ok)}")
        figures["streaming"][label] = dict(p, blocks=len(wall), cpu_median_ms=pc["median_ms"],
                                           cpu_p99_ms=pc["p99_ms"], meets_goal=ok)
    share = (time.process_time() - c_start) / max(time.perf_counter() - w_start, 1e-9)
    out(f"  (CPU = this thread's CPU time per call; this process got {100 * share:.0f} % of one core "
        f"over the streaming runs -- well below 100 % means other load on the machine)")
    figures["streaming_cpu_share"] = share

    out("")
    out("Frame-level estimators (livevowel.dsp.lpc / pitch): CPU time per frame, woman's-voice frame sizes")
    out(f"  {'estimator':<24}{'1 frame/call us':>17}{'batched us/frame':>18}")
    costs = estimator_costs(quick=quick)
    for r in costs:
        out(f"  {r['estimator']:<24}{r['one_frame_us']:>17.1f}{r['batched_us_per_frame']:>18.1f}")
    figures["estimators"] = costs

    sp = offline_speed(x, repeat=1 if quick else 3)
    ok_rtf = sp["engine_rtf"] >= GOAL_RTF
    ok_ratio = sp["ratio"] >= GOAL_RATIO
    out("")
    out(f"Offline: {sp['audio_s']:g} s of audio, analysis rate {sp['analysis_rate_hz']:g} Hz, order {sp['order']}, "
        f"engine method {sp['method']}")
    out(f"  {'path':<40}{'x real time':>12}{'(CPU time)':>12}")
    out(f"  {'analyze (batched, Viterbi tracking)':<40}{sp['engine_rtf']:>12.1f}{sp['engine_cpu_rtf']:>12.1f}"
        f"   goal >= {GOAL_RTF:g}x: {verdict(ok_rtf)}   ({sp['threads']} threads)")
    out(f"  {'  the same on one thread':<40}{sp['engine_1_rtf']:>12.1f}{sp['engine_1_cpu_rtf']:>12.1f}"
        f"   (ratio to the plain loop {sp['ratio_1']:.2f}; for comparison)")
    out(f"  {'plain per-frame loop (numpy.roots)':<40}{sp['plain_rtf']:>12.1f}{sp['plain_cpu_rtf']:>12.1f}")
    out(f"  {'ratio engine / plain loop':<40}{sp['ratio']:>12.2f}{sp['cpu_ratio']:>12.2f}"
        f"   goal >= {GOAL_RATIO:g}x: {verdict(ok_ratio)}")
    out(f"  {'  same loop with livevowel compiled YIN':<40}{sp['plain_livevowel_yin_rtf']:>12.1f}"
        f"{sp['plain_livevowel_yin_cpu_rtf']:>12.1f}   (ratio "
        f"{sp['engine_rtf'] / sp['plain_livevowel_yin_rtf']:.2f}; for comparison, no goal)")
    out("  (x real time = seconds of audio per wall-clock second; the CPU-time column divides by this"
        " process's CPU seconds instead, which other load on the machine does not inflate; with threads"
        " it adds up the cores' time, so it reads as one core's speed; the plain loop is one thread)")
    figures["offline"] = dict(sp, rtf_meets_goal=ok_rtf, ratio_meets_goal=ok_ratio)

    out("")
    out("Accuracy: synthetic steady vowels at Peterson & Barney (1952) group means (from memory); "
        "|error| in % of the true formant")
    out("  engine = analyze() with the group's voice; plain = autocorrelation LPC, same frames, rate and order")
    hdr = (f"  {'group':<9}{'F0 band':<12}{'frames':>7} | {'F1 med%':>8}{'F1 >20%':>8}{'F2 med%':>8}{'F2 >20%':>8}"
           f" | {'F1 med%':>8}{'F1 >20%':>8}{'F2 med%':>8}{'F2 >20%':>8}")
    out(f"  {'':<28} | {'engine':^32} | {'plain autocorrelation LPC':^32}")
    out(hdr)
    rows = accuracy(quick=quick)
    for r in rows:
        r["meets_goal"] = clean_row_meets_goal(r)
        out(f"  {r['group']:<9}{r['band']:<12}{r['frames']:>7} | "
            f"{r['engine_f1_median_pct']:>8.1f}{r['engine_f1_over20_pct']:>8.1f}"
            f"{r['engine_f2_median_pct']:>8.1f}{r['engine_f2_over20_pct']:>8.1f} | "
            f"{r['plain_f1_median_pct']:>8.1f}{r['plain_f1_over20_pct']:>8.1f}"
            f"{r['plain_f2_median_pct']:>8.1f}{r['plain_f2_over20_pct']:>8.1f}   {verdict(r['meets_goal'])}")
    out(f"  goal (engine): F1 and F2 medians at most {GOAL_MEDIAN_PCT['100-250 Hz']:g} % (F0 100-250 Hz) / "
        f"{GOAL_MEDIAN_PCT['300-400 Hz']:g} % (300-400 Hz); F1 and F2 each > 20 % off in at most "
        f"{GOAL_OFF_PCT:g} % of frames")
    better = sum(r["engine_f1_median_pct"] <= r["plain_f1_median_pct"] for r in rows)
    out(f"  engine F1 median error at or below plain LPC's in {better} of {len(rows)} rows")
    figures["accuracy"] = rows

    out("")
    out(f"Accuracy in white noise at {NOISE_SNR_DB:g} dB SNR: the same signals plus noise; engine only. "
        f"Goal: median errors at most {NOISE_GOAL_RATIO:g} x the clean ones (the 'x clean' columns), and "
        f"frames > 20 % off at most {NOISE_GOAL_RATIO:g} x the clean goal ({NOISE_GOAL_RATIO * GOAL_OFF_PCT:g} %)")
    out(f"  {'group':<9}{'F0 band':<12}{'frames':>7} | {'F1 med%':>8}{'x clean':>8}{'F1 >20%':>8}"
        f"{'F2 med%':>8}{'x clean':>8}{'F2 >20%':>8}")
    noisy = accuracy(quick=quick, snr_db=NOISE_SNR_DB)
    for r, c in zip(noisy, rows):
        cells = []
        for j in ("f1", "f2"):
            clean = c[f"engine_{j}_median_pct"]
            r[f"engine_{j}_clean_median_pct"] = clean
            r[f"engine_{j}_ratio_to_clean"] = r[f"engine_{j}_median_pct"] / max(clean, 1e-9)
            ratio = f"{r[f'engine_{j}_ratio_to_clean']:>8.2f}" if clean >= RATIO_MIN_CLEAN_PCT else f"{'-':>8}"
            cells.append(f"{r[f'engine_{j}_median_pct']:>8.1f}{ratio}{r[f'engine_{j}_over20_pct']:>8.1f}")
        r["meets_goal"] = noisy_row_meets_goal(r)
        out(f"  {r['group']:<9}{r['band']:<12}{r['frames']:>7} | " + "".join(cells) + f"   {verdict(r['meets_goal'])}")
    figures["accuracy_noise"] = {"snr_db": NOISE_SNR_DB, "rows": noisy}
    out("")
    out(f"What the practice screen shows: live-path frames (analyze(causal=True)) at or above its default "
        f"min_confidence {SHOWN_MIN_CONFIDENCE:g} (the others show no dot), and the share of those with F1 or F2 "
        "more than 20 % off")
    out(f"  {'group':<9}{'F0 band':<12} | {'clean shown%':>13}{'of them off%':>13} | "
        f"{f'{NOISE_SNR_DB:g} dB shown%':>13}{'of them off%':>13}")
    for c, r in zip(rows, noisy):
        out(f"  {c['group']:<9}{c['band']:<12} | {c['engine_shown_pct']:>13.1f}{c['engine_shown_over20_pct']:>13.1f} | "
            f"{r['engine_shown_pct']:>13.1f}{r['engine_shown_over20_pct']:>13.1f}")
    if quick:
        out("  (--quick: fewer vowels, one F0 per band, shorter signals; a smoke run, not a measurement)")
    _voice_auto_rows(quick=quick, out=out, figures=figures)
    return figures


def _voice_auto_rows(*, quick: bool, out: Callable[[str], None], figures: dict) -> None:
    """Summary of :mod:`livevowel.benchmarks.autovoice` (the full table is its ``__main__``)."""
    from livevowel.benchmarks import autovoice

    res = autovoice.confusion(quick=quick)
    out("")
    out("voice=auto: Klatt vowels at Hillenbrand et al. (1995) means (from memory), men F0 100-160, "
        "women 180-300, children 230-300 Hz")
    out(f"  {'path':<10}" + "".join(f"{g + ' ok':>14}" for g in autovoice.GROUPS) + f"{'all':>9}")
    figures["voice_auto"] = {}
    for mode in ("offline", "causal"):
        tab = res[mode]
        cells = [f"{tab[g][autovoice.GROUPS[g][3]]}/{sum(tab[g].values())}" for g in autovoice.GROUPS]
        share = autovoice.correct_share(tab)
        out(f"  {mode:<10}" + "".join(f"{c:>14}" for c in cells) + f"{100 * share:>8.1f}%")
        figures["voice_auto"][mode] = {"correct_share": share, "table": tab}
    out("  (full confusion table: python -m livevowel.benchmarks.autovoice)")
