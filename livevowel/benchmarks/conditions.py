"""Accuracy away from the ideal signal: voice quality, noise, room and channel.

The ``dsp`` suite's accuracy tables use one kind of signal: the project
synthesiser's vowels at open quotient 0.6, clean or in white noise. This
suite plays the same Peterson & Barney (1952) vowel means (from memory;
:data:`livevowel.benchmarks.dsp.PB1952`) under other conditions a recording
meets, and reports, per condition and speaker group, the engine beside two
references measured on the same frames: the engine with its closed-phase F1
step switched off (``closed_phase_below=0``; the step reads the free decay
of the tract between glottal closures, which these conditions disturb) and
plain autocorrelation LPC.

The conditions are scenarios of this project's own, not measurements of any
room or device: a pressed and a breathy voice (open quotient 0.4 and 0.8),
aspiration noise 10 dB under the voicing, white noise at 30 dB SNR, an
exponentially decaying reverberant tail (50 ms time constant, direct-to-
reverberant ratio +3.5 dB), a strongly phase-distorting channel (two
second-order all-pass sections at 500 and 2000 Hz, pole radius 0.9: the
magnitude spectrum is untouched) and a 100 Hz low cut (second-order
Butterworth high-pass, as many sound cards and microphones have). No goal
is set here; the figures show where each method holds up and where the
closed-phase step helps or hurts.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from scipy import signal

from livevowel.benchmarks.dsp import F0_BANDS, GROUP_VOICES, PB1952, RATE_HZ, _plain_on_frames, frames_off

#: condition -> (label, keyword arguments of synthesize_vowel, channel name or None)
CONDITIONS: dict[str, tuple[str, dict, str | None]] = {
    "clean": ("clean, open quotient 0.6", {}, None),
    "pressed": ("pressed voice, open quotient 0.4", {"open_quotient": 0.4}, None),
    "breathy": ("breathy voice, open quotient 0.8", {"open_quotient": 0.8}, None),
    "aspiration": ("aspiration noise -10 dB", {"aspiration_db": -10.0}, None),
    "noise30": ("white noise, 30 dB SNR", {}, "noise30"),
    "room": ("reverberant tail, DRR +3.5 dB", {}, "room"),
    "allpass": ("phase-distorting channel", {}, "allpass"),
    "lowcut": ("100 Hz low cut", {}, "lowcut"),
}

DURATION_S = 0.6
QUICK_DURATION_S = 0.35


def channel(x: np.ndarray, name: str | None, *, seed: int) -> np.ndarray:
    """``x`` (at :data:`RATE_HZ`) through the named condition's channel (None: unchanged)."""
    from livevowel.dsp.synth import add_noise

    if name is None:
        return x
    if name == "noise30":
        return add_noise(x, snr_db=30.0, seed=seed)
    if name == "room":
        rng = np.random.default_rng(seed)
        n = int(0.3 * RATE_HZ)
        tail = rng.standard_normal(n) * np.exp(-np.arange(n) / (0.05 * RATE_HZ))
        tail[0] = 0.0
        tail *= np.sqrt(10.0 ** (-3.5 / 10.0) / np.sum(tail ** 2))    # reverberant energy 3.5 dB under the direct
        tail[0] = 1.0
        return signal.fftconvolve(x, tail)[: len(x)]
    if name == "allpass":
        y = x
        for fc in (500.0, 2000.0):
            r, th = 0.9, 2.0 * np.pi * fc / RATE_HZ
            a = np.array([1.0, -2.0 * r * np.cos(th), r * r])
            y = signal.lfilter(a[::-1], a, y)
        return y
    if name == "lowcut":
        return signal.sosfilt(signal.butter(2, 100.0, "highpass", fs=RATE_HZ, output="sos"), x)
    raise ValueError(f"unknown channel {name!r}")


def measure(*, quick: bool) -> list[dict]:
    """One row per condition, group and F0 band: median F1 error (%) and share of frames with F1
    or F2 more than 20 % off, for the engine, the engine without its closed-phase step and plain LPC."""
    from livevowel.dsp.engine import AnalysisSettings, analyze
    from livevowel.dsp.synth import synthesize_vowel

    dur = QUICK_DURATION_S if quick else DURATION_S
    vowels = ("i", "ɑ", "u") if quick else tuple(PB1952["men"])
    rows = []
    for cond, (label, kw, chan) in CONDITIONS.items():
        seed = 700
        for group, table in PB1952.items():
            synth_voice, engine_voice = GROUP_VOICES[group]
            variants = {"engine": AnalysisSettings(voice=engine_voice),
                        "no_cp": AnalysisSettings(voice=engine_voice, closed_phase_below=0.0)}
            for band, f0s in F0_BANDS.items():
                f0s = f0s[1:2] if quick else f0s
                f1_err = {k: [] for k in ("engine", "no_cp", "plain")}
                off = {k: [] for k in ("engine", "no_cp", "plain")}
                for vowel in vowels:
                    fm = np.asarray(table[vowel][:2])
                    for f0 in f0s:
                        seed += 1
                        x = synthesize_vowel(formants_hz=table[vowel], f0_hz=f0, duration_s=dur, rate_hz=RATE_HZ,
                                             voice=synth_voice, jitter_pct=0.5, shimmer_db=0.2, seed=seed,
                                             peak_dbfs=-12.0, **kw)
                        x = channel(x, chan, seed=seed)
                        for name, st in variants.items():
                            res = analyze(x, RATE_HZ, settings=st)
                            fr = res.frames
                            steady = (fr.time_s >= 0.1) & (fr.time_s <= dur - 0.1)
                            est = np.column_stack([fr.f1_hz[steady], fr.f2_hz[steady]])
                            f1_err[name].append(100.0 * np.abs(est[:, 0] - fm[0]) / fm[0])
                            off[name].append(frames_off(est, fm))
                            if name == "engine":
                                plain = _plain_on_frames(x, fr.time_s[steady], rate_hz=res.analysis_rate_hz,
                                                         order=res.order)
                                f1_err["plain"].append(100.0 * np.abs(plain[:, 0] - fm[0]) / fm[0])
                                off["plain"].append(frames_off(plain, fm))
                row = {"condition": cond, "label": label, "group": group, "band": band}
                for k in f1_err:
                    e = np.concatenate(f1_err[k])
                    row[f"{k}_f1_median_pct"] = float(np.nanmedian(e)) if np.any(np.isfinite(e)) else float("nan")
                    row[f"{k}_off_pct"] = float(100.0 * np.mean(np.concatenate(off[k])))
                rows.append(row)
    return rows


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    """Print the conditions table; return its rows."""
    out("Accuracy under other recording conditions: synthetic steady vowels at Peterson & Barney (1952) "
        "group means (from memory), offline analyze() with the group's voice")
    out("  cells: median F1 error % / frames with F1 or F2 more than 20 % off (or missing), %; "
        "no CP = the engine with closed_phase_below 0; plain = autocorrelation LPC on the same frames")
    bands = list(F0_BANDS)
    head = " | ".join(f"{b + ': engine':>16}{'no CP':>12}{'plain':>12}" for b in bands)
    out(f"  {'condition':<34}{'group':<9}| {head}")
    rows = measure(quick=quick)
    by = {(r["condition"], r["group"], r["band"]): r for r in rows}
    for cond, (label, _, _) in CONDITIONS.items():
        for group in PB1952:
            cells = []
            for b in bands:
                r = by[(cond, group, b)]
                cells.append("".join(f"{r[f'{k}_f1_median_pct']:>{w - 6}.1f} /{r[f'{k}_off_pct']:>4.0f}"
                                     for k, w in (("engine", 16), ("no_cp", 12), ("plain", 12))))
            out(f"  {label if group == 'men' else '':<34}{group:<9}| " + " | ".join(cells))
    if quick:
        out("  (--quick: three vowels, one F0 per band, shorter signals; a smoke run, not a measurement)")
    return {"rows": rows}
