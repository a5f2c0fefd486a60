"""Streaming = causal batch: any block split gives exactly the frames of ``analyze(..., causal=True)``.

The signals are Klatt-synthesised vowels (livevowel.dsp.synth); formant
values are Peterson & Barney (1952) group means (from memory) -- only the
equality of the two paths is checked here, accuracy is in test_engine_accuracy.
"""

from __future__ import annotations

from dataclasses import fields

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings as hsettings, strategies as st

from livevowel.dsp.engine import AnalysisSettings, StreamingAnalyzer, analyze
from livevowel.dsp.synth import Schedule, Segment, render, synthesize_vowel
from livevowel.dsp.types import FrameTrack
from streams import stream_in_blocks

# Peterson & Barney (1952), men's /ɑ/ and /i/ means (from memory)
MEN_A = (730.0, 1090.0, 2440.0)
MEN_I = (270.0, 2290.0, 3010.0)


def _glide(rate: int, seconds: float = 0.45) -> np.ndarray:
    sch = Schedule((
        Segment(duration_s=0.05, kind="silent"),
        Segment(duration_s=seconds / 2, f0_start_hz=110.0, f0_end_hz=140.0, formants_hz=MEN_A,
                transition_s=0.1),
        Segment(duration_s=seconds / 2, f0_start_hz=140.0, f0_end_hz=120.0, formants_hz=MEN_I),
        Segment(duration_s=0.04, kind="silent"),
    ), voice="man", jitter_pct=0.5)
    y, _ = render(sch, rate_hz=rate, seed=2, peak_dbfs=-6.0)
    return y


def _stream(x, rate, s, sizes) -> FrameTrack:
    return stream_in_blocks(x, rate, s, sizes)[0]


def _assert_same(a: FrameTrack, b: FrameTrack) -> None:
    assert len(a) == len(b)
    for f in fields(FrameTrack):
        np.testing.assert_array_equal(getattr(a, f.name), getattr(b, f.name), err_msg=f.name)


SIG_16K = _glide(16000)
SIG_441 = _glide(44100, seconds=0.3)
SETTINGS_MALE = AnalysisSettings(voice="adult_male")
REF_16K = analyze(SIG_16K, 16000, settings=SETTINGS_MALE, causal=True).frames


@hsettings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sizes=st.lists(st.integers(min_value=1, max_value=3000), min_size=1, max_size=6))
def test_any_block_split_gives_the_causal_frames(sizes):
    _assert_same(_stream(SIG_16K, 16000, SETTINGS_MALE, sizes), REF_16K)


@pytest.mark.parametrize("sizes", [[1], [7], [159, 161], [441], [1024], [10**6]])
def test_awkward_block_sizes_at_44k1(sizes):
    # 1 sample; sizes that do not divide the hop (441 input samples = 10 ms)
    x = SIG_441 if sizes != [1] else SIG_441[: int(0.15 * 44100)]
    ref = analyze(x, 44100, settings=SETTINGS_MALE, causal=True).frames
    assert len(ref) > 5
    _assert_same(_stream(x, 44100, SETTINGS_MALE, sizes), ref)


@pytest.mark.parametrize("sizes", [[333], [1000, 17]])
def test_auto_voice_block_split(sizes):
    s = AnalysisSettings(voice="auto", auto_settle_s=0.2)
    ref = analyze(SIG_16K, 16000, settings=s, causal=True)
    assert ref.voice == "adult_male"      # F0 110-140 Hz settles as an adult male voice
    _assert_same(_stream(SIG_16K, 16000, s, sizes), ref.frames)


def test_stereo_int16_blocks():
    x = np.round(SIG_16K * 32767).astype(np.int16)
    stereo = np.column_stack([x, x])
    ref = analyze(stereo, 16000, settings=SETTINGS_MALE, causal=True).frames
    _assert_same(_stream(stereo, 16000, SETTINGS_MALE, [500, 77]), ref)
    # same as the mono float signal it encodes
    mono = analyze(x.astype(np.float64) / 32768.0, 16000, settings=SETTINGS_MALE, causal=True).frames
    _assert_same(mono, ref)


def test_frames_come_out_while_streaming_not_only_at_flush():
    sa = StreamingAnalyzer(16000, settings=SETTINGS_MALE)
    got = [len(sa.process(SIG_16K[i:i + 160])) for i in range(0, len(SIG_16K), 160)]
    # after the start-up (window + lookahead) every 10 ms block yields one frame
    assert sum(got[10:]) >= len(got[10:]) - 1
    assert max(got) <= 2


def test_delay_budget_is_reported_per_stage():
    sa = StreamingAnalyzer(48000, settings=SETTINGS_MALE)
    d = sa.delay_s
    for key in ("resampler", "window", "lookahead", "smoother", "total"):
        assert key in d and d[key] >= 0
    assert d["total"] == pytest.approx(sum(v for k, v in d.items() if k != "total"))
    # 48 kHz -> 10 kHz: resample_poly's filter puts 11 output samples of delay (1.1 ms)
    assert d["resampler"] == pytest.approx(0.0011)
    assert d["lookahead"] == pytest.approx(0.010)
    assert d["total"] < 0.06


def test_first_frames_latency_matches_delay():
    """A frame is released once its window, the resampler delay and one hop of lookahead are in."""
    rate = 16000
    sa = StreamingAnalyzer(rate, settings=SETTINGS_MALE)
    fed = 0
    while True:
        out = sa.process(SIG_16K[fed:fed + 16])
        fed += 16
        if len(out):
            break
    t_first = out.time_s[0]
    lag = fed / rate - t_first
    d = sa.delay_s
    assert lag <= d["resampler"] + d["resampler_block"] + d["window"] + d["lookahead"] + 16 / rate + 1e-9


def test_process_after_flush_is_an_error():
    sa = StreamingAnalyzer(16000, settings=SETTINGS_MALE)
    sa.process(np.zeros(1000))
    sa.flush()
    with pytest.raises(RuntimeError):
        sa.process(np.zeros(10))
    assert len(sa.flush()) == 0


def test_steady_vowel_streaming_matches_offline_medians():
    x = synthesize_vowel(formants_hz=MEN_A, f0_hz=120.0, duration_s=0.5, rate_hz=16000, seed=1)
    c = analyze(x, 16000, settings=SETTINGS_MALE, causal=True).frames
    o = analyze(x, 16000, settings=SETTINGS_MALE).frames
    for name in ("f1_hz", "f2_hz"):
        mc = np.nanmedian(getattr(c, name)[c.voiced])
        mo = np.nanmedian(getattr(o, name)[o.voiced])
        assert abs(mc / mo - 1) < 0.01
