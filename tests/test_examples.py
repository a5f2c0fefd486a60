"""The built-in example take: file, level and ground truth.

Formant targets: Peterson & Barney (1952) men's means (from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from livevowel.errors import UserError
from livevowel.examples import EXAMPLE_DESCRIPTION, example_schedule, example_signal, make_example

from scipy.linalg import solve_toeplitz


def lpc_formants(y, rate_hz, *, order, max_bw_hz=500.0):
    """Formants (Hz) from one long-window autocorrelation LPC fit (Hamming)."""
    w = y * np.hamming(len(y))
    r = np.correlate(w, w, mode="full")[len(w) - 1:len(w) + order]
    a = solve_toeplitz(r[:order], r[1:order + 1])
    roots = np.roots(np.concatenate([[1.0], -a]))
    roots = roots[np.imag(roots) > 0]
    freq = np.angle(roots) * rate_hz / (2 * np.pi)
    bw = -np.log(np.abs(roots)) * rate_hz / np.pi
    return np.sort(freq[(bw < max_bw_hz) & (freq > 90.0)])


def f0_autocorrelation(y, rate_hz, *, f0_min, f0_max):
    """F0 (Hz) at the highest normalised autocorrelation peak."""
    y = y - y.mean()
    n = len(y)
    r = np.fft.irfft(np.abs(np.fft.rfft(y, 2 * n)) ** 2)[:n]
    r = r / (r[0] * (n - np.arange(n)) / n)
    lo, hi = int(rate_hz / f0_max), int(rate_hz / f0_min) + 1
    k = lo + int(np.argmax(r[lo:hi]))
    a, b, c = r[k - 1], r[k], r[k + 1]
    return rate_hz / (k + 0.5 * (a - c) / (a - 2 * b + c))


def test_make_example_writes_a_wav_and_returns_truth(tmp_path):
    path = tmp_path / "take.wav"
    truth = make_example(path, rate_hz=16000)
    assert [p.name for p in tmp_path.iterdir()] == ["take.wav"]      # no temporary left behind
    y, rate = sf.read(path)
    assert rate == 16000 and y.ndim == 1
    assert len(y) / rate == pytest.approx(example_schedule().duration_s, abs=1e-3)
    assert 5.5 <= len(y) / rate <= 7.0
    assert 20 * np.log10(np.max(np.abs(y))) == pytest.approx(-6.0, abs=0.1)
    # ground truth at the middle of each sustained vowel (P&B 1952 men, from memory)
    mids = {"i": 0.75, "ɛ": 1.975, "ɑ": 3.175, "u": 4.35}
    targets = {"i": (270, 2290, 3010), "ɛ": (530, 1840, 2480), "ɑ": (730, 1090, 2440), "u": (300, 870, 2240)}
    got = truth.at(np.array(list(mids.values())))
    assert got["voiced"].all()
    for j, sym in enumerate(mids):
        assert (got["f1_hz"][j], got["f2_hz"][j], got["f3_hz"][j]) == targets[sym]
    assert truth.label_at(list(mids.values())) == list(mids)
    # pauses are unvoiced and carry only the faint room noise
    pause = truth.at(np.array([0.1, 1.4]))
    assert not pause["voiced"].any()
    assert np.std(y[int(1.35 * rate):int(1.5 * rate)]) < 0.01 * np.std(y[int(0.6 * rate):int(0.9 * rate)])
    # F0 declines across the take
    f0 = truth.at(np.array([0.35, 5.8]))["f0_hz"]
    assert f0[0] > 125 and f0[1] < 105


def test_example_audio_has_the_truth_formants_and_f0():
    rate = 10000.0
    y, truth = example_signal(rate_hz=rate)
    seg = y[int(2.85 * rate):int(3.5 * rate)]            # the /ɑ/
    found = lpc_formants(seg, rate, order=12)
    for target in (730.0, 1090.0, 2440.0):
        assert np.min(np.abs(found - target)) <= max(40.0, 0.06 * target)
    f0 = f0_autocorrelation(seg, rate, f0_min=80, f0_max=200)
    assert f0 == pytest.approx(float(truth.at(np.array([3.175]))["f0_hz"][0]), rel=0.03)


def test_example_glide_moves_f2_up():
    _, truth = example_signal(rate_hz=16000)
    g = truth.at(np.array([5.16, 5.24, 5.32]))
    assert g["f2_hz"][0] == 870.0 and g["f2_hz"][2] == 2290.0
    assert 870.0 < g["f2_hz"][1] < 2290.0


def test_example_description_and_bad_folder(tmp_path):
    assert "synthetic" in EXAMPLE_DESCRIPTION and "Peterson & Barney" in EXAMPLE_DESCRIPTION
    with pytest.raises(UserError):
        make_example(tmp_path / "missing" / "take.wav")
