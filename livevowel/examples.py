"""An example recording livevowel can make itself, with its ground truth.

The scenario is our own: an adult man (synthetic, :mod:`livevowel.dsp.synth`)
sustains four vowels with pauses in between, then says a /wi/-like glide
("we"). F0 falls gently across the take (declination, about 132 -> 100 Hz)
and within each vowel; the voice has a little jitter, shimmer and breath, and
the room a faint noise floor. Formant targets are Peterson & Barney (1952)
men's means (from memory).

``livevowel analyze --example`` writes it with :func:`make_example` and
analyses it.
"""

from __future__ import annotations

import os

import numpy as np

from livevowel.dsp.synth import Schedule, Segment, Truth, add_noise, render

#: One-paragraph description shown with the example.
EXAMPLE_DESCRIPTION = (
    "Example voice (synthetic, made by livevowel's own Klatt-style formant synthesiser): "
    "an adult man sustains /i/ (as in FLEECE), /ɛ/ (DRESS), /ɑ/ (PALM) and /u/ (GOOSE) for "
    "about 0.85 s each with short pauses, then glides from /u/ to /i/ as in \"we\". "
    "F0 falls from about 132 Hz to 100 Hz over the 6.1 s take with a slight slow wander; "
    "jitter 0.6 %, shimmer 0.3 dB, "
    "light breath noise, room noise 40 dB below the voice. "
    "Targets: Peterson & Barney (1952) men's means F1/F2/F3 in Hz: "
    "/i/ 270/2290/3010, /ɛ/ 530/1840/2480, /ɑ/ 730/1090/2440, /u/ 300/870/2240."
)

# Peterson & Barney (1952), men's mean formants F1, F2, F3 in Hz (from memory).
_PB_MEN = {
    "i": (270.0, 2290.0, 3010.0),
    "ɛ": (530.0, 1840.0, 2480.0),
    "ɑ": (730.0, 1090.0, 2440.0),
    "u": (300.0, 870.0, 2240.0),
}

#: Signal-to-noise ratio of the room noise over the voiced part, dB.
EXAMPLE_SNR_DB = 40.0
#: Peak level of the example, dB re full scale.
EXAMPLE_PEAK_DBFS = -6.0


def example_schedule() -> Schedule:
    """The synthesis schedule of the example take (about 6.1 s)."""
    sil = lambda d: Segment(d, "silent")  # noqa: E731
    v = lambda d, a, b, sym: Segment(d, "voiced", a, b, _PB_MEN[sym], label=sym)  # noqa: E731
    segs = [
        sil(0.30),
        v(0.90, 132.0, 126.0, "i"),
        sil(0.35),
        v(0.85, 128.0, 121.0, "ɛ"),
        sil(0.35),
        v(0.85, 124.0, 116.0, "ɑ"),
        sil(0.35),
        v(0.80, 119.0, 112.0, "u"),
        sil(0.40),
        # "we": a short /u/-like onset that glides (raised cosine) into /i/
        Segment(0.15, "voiced", 114.0, 112.0, _PB_MEN["u"], transition_s=0.12, label="w"),
        v(0.55, 112.0, 100.0, "i"),
        sil(0.30),
    ]
    return Schedule(tuple(segs), voice="man", jitter_pct=0.6, shimmer_db=0.3,
                    aspiration_db=-28.0, ramp_s=0.03, flutter_pct=10.0)


def example_signal(*, rate_hz: float = 16000.0, seed: int = 0) -> tuple[np.ndarray, Truth]:
    """The example take as samples (float64, peak -6 dBFS) and its :class:`Truth`."""
    schedule = example_schedule()
    y, truth = render(schedule, rate_hz=rate_hz, seed=seed)
    voiced = truth.at(np.arange(len(y)) / rate_hz)["voiced"]
    y = add_noise(y, snr_db=EXAMPLE_SNR_DB, seed=seed + 1, mask=voiced)
    y *= 10.0 ** (EXAMPLE_PEAK_DBFS / 20.0) / np.max(np.abs(y))
    return y, truth


def make_example(path: "str | os.PathLike", *, rate_hz: float = 16000.0, seed: int = 0) -> Truth:
    """Write the example take to ``path`` (16-bit WAV, atomically); return its Truth.

    Parameters
    ----------
    path : str or path-like
        Destination file; its folder must exist.
    rate_hz : float
        Sampling rate in Hz (8000..96000).
    seed : int
        Seed of jitter, shimmer, breath and room noise.
    """
    from livevowel.audiofile import write_wav

    y, truth = example_signal(rate_hz=rate_hz, seed=seed)
    write_wav(path, y, rate_hz)
    return truth
