"""Frequency scales against their published formulas, and exact round trips."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from livevowel.dsp import scales as sc


# --- check values worked from the published formulas ------------------------

def test_bark_1000_hz():
    # Traunmüller (1990): 26.81*1000/(1960+1000) - 0.53 = 8.527 Bark (no correction applies).
    assert sc.hz_to_bark(1000.0) == pytest.approx(8.5274, abs=1e-4)


def test_bark_low_and_high_corrections():
    # Traunmüller (1990) corrections worked by hand:
    # 100 Hz: z = 26.81*100/2060 - 0.53 = 0.77146; z' = z + 0.15*(2 - z) = 0.95574
    assert sc.hz_to_bark(100.0) == pytest.approx(0.95574, abs=1e-4)
    # 10000 Hz: z = 26.81*10000/11960 - 0.53 = 21.88639; z' = z + 0.22*(z - 20.1) = 22.27940
    assert sc.hz_to_bark(10000.0) == pytest.approx(22.27940, abs=1e-4)
    # The corrected scale is continuous at both seams (2 and 20.1 Bark).
    f_at_2 = 1960 * (2 + 0.53) / (26.28 - 2)
    f_at_20 = 1960 * (20.1 + 0.53) / (26.28 - 20.1)
    for f in (f_at_2, f_at_20):
        lo, hi = sc.hz_to_bark(np.array([f * (1 - 1e-9), f * (1 + 1e-9)]))
        assert hi - lo < 1e-6


def test_erb_rate_1000_hz():
    # Glasberg & Moore (1990): 21.4*log10(1 + 4.37) = 15.62
    assert sc.hz_to_erb_rate(1000.0) == pytest.approx(15.62, abs=0.005)


def test_mel_1000_hz():
    # O'Shaughnessy (1987): 2595*log10(1 + 1000/700) = 999.99 (1000 mel by design)
    assert sc.hz_to_mel(1000.0) == pytest.approx(999.99, abs=0.01)


def test_log_is_natural_log_ratio():
    assert sc.hz_to_log(np.e * 100.0, ref_hz=100.0) == pytest.approx(1.0)
    assert sc.log_to_hz(0.0, ref_hz=250.0) == pytest.approx(250.0)


def test_vectorised_shape_and_nan_pass_through():
    f = np.array([[100.0, np.nan], [1000.0, 5000.0]])
    for name in sc.SCALES:
        fwd, inv = sc.scale_by_name(name)
        z = fwd(f)
        assert z.shape == f.shape
        assert np.isnan(z[0, 1])
        np.testing.assert_allclose(inv(z), f, rtol=1e-12, equal_nan=True)


def test_bad_input_raises():
    with pytest.raises(ValueError, match="below"):
        sc.hz_to_bark(-1.0)
    with pytest.raises(ValueError, match="below"):
        sc.bark_to_hz(28.0)
    with pytest.raises(ValueError, match="positive"):
        sc.hz_to_log(0.0)
    with pytest.raises(ValueError, match="unknown scale"):
        sc.scale_by_name("semitones")


# --- properties ----------------------------------------------------------------

freqs = st.floats(min_value=0.0, max_value=24000.0, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(freqs)
def test_round_trip_every_scale(f):
    for name, (fwd, inv) in sc.SCALES.items():
        if name == "log" and f <= 0:
            continue
        back = float(inv(fwd(f)))
        assert back == pytest.approx(f, rel=1e-9, abs=1e-7), name


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=float(sc.hz_to_bark(0.0)), max_value=27.0, allow_nan=False))
def test_bark_inverse_round_trip_from_bark_side(z):
    # Covers the corrected ranges (below 2 and above 20.1 Bark) from the Bark side.
    assert float(sc.hz_to_bark(sc.bark_to_hz(z))) == pytest.approx(z, abs=1e-9)


@settings(max_examples=100, deadline=None)
@given(freqs, freqs)
def test_scales_are_increasing(a, b):
    lo, hi = min(a, b), max(a, b)
    if hi - lo < 1e-6 or lo <= 0:
        return
    for name, (fwd, _) in sc.SCALES.items():
        assert fwd(hi) > fwd(lo), name
