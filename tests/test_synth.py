"""Checks of the Klatt (1980) cascade synthesiser against outside references.

Sources named beside the values: Klatt (1980) JASA 67, 971-995 (resonator
equations); Klatt & Klatt (1990) JASA 87, 820-857 (KLGLOTT88 pulse);
Peterson & Barney (1952) JASA 24, 175-184 (men's vowel means, from memory);
the local jitter / shimmer (dB) definitions as used in voice analysis
(mean absolute difference of consecutive periods over the mean period; mean
absolute dB ratio of consecutive amplitudes; common practice, from memory).
"""

from __future__ import annotations

import functools
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.linalg import solve_toeplitz
from scipy.signal import freqz, lfilter, sosfilt

from livevowel.dsp import synth
from livevowel.dsp.synth import (
    DEFAULT_BANDWIDTHS_HZ,
    KlattVoice,
    Schedule,
    ScheduleError,
    Segment,
    add_noise,
    antiresonator_coefficients,
    klglott88_flow,
    render,
    resonator_coefficients,
    synthesize_vowel,
)
from livevowel.errors import UserError

# Peterson & Barney (1952), men's means (F0, F1, F2, F3 in Hz), from memory.
PB_MEN = {
    "i": (136.0, 270.0, 2290.0, 3010.0),
    "ɑ": (124.0, 730.0, 1090.0, 2440.0),
    "u": (141.0, 300.0, 870.0, 2240.0),
    "ɛ": (130.0, 530.0, 1840.0, 2480.0),
}


# ------------------------------------------------------------------ helpers
def lpc_formants(y: np.ndarray, rate_hz: float, *, order: int, max_bw_hz: float = 500.0) -> np.ndarray:
    """Formant frequencies (Hz, ascending) from one long-window LPC fit.

    Autocorrelation method (Hamming window, Toeplitz normal equations solved
    by scipy), roots of the predictor polynomial with bandwidth below
    ``max_bw_hz``.
    """
    w = y * np.hamming(len(y))
    r = np.correlate(w, w, mode="full")[len(w) - 1:len(w) + order]
    a = solve_toeplitz(r[:order], r[1:order + 1])
    roots = np.roots(np.concatenate([[1.0], -a]))
    roots = roots[np.imag(roots) > 0]
    freq = np.angle(roots) * rate_hz / (2 * np.pi)
    bw = -np.log(np.abs(roots)) * rate_hz / np.pi
    keep = (bw < max_bw_hz) & (freq > 90.0)
    return np.sort(freq[keep])


def f0_autocorrelation(y: np.ndarray, rate_hz: float, *, f0_min: float, f0_max: float) -> float:
    """F0 (Hz) from the highest normalised autocorrelation peak, with
    parabolic interpolation of the lag."""
    y = y - y.mean()
    n = len(y)
    spec = np.fft.rfft(y, 2 * n)
    r = np.fft.irfft(np.abs(spec) ** 2)[:n]
    r = r / (r[0] * (n - np.arange(n)) / n)      # unbiased, normalised
    lo, hi = int(rate_hz / f0_max), int(rate_hz / f0_min) + 1
    k = lo + int(np.argmax(r[lo:hi]))
    a, b, c = r[k - 1], r[k], r[k + 1]
    shift = 0.5 * (a - c) / (a - 2 * b + c)
    return rate_hz / (k + shift)


def inverse_filter(y: np.ndarray, rate_hz: float, formants, bandwidths) -> np.ndarray:
    """Undo a fixed cascade with Klatt (1980) antiresonators (exact inverse)."""
    x = y
    for f, b in zip(formants, bandwidths):
        a0, a1, a2 = antiresonator_coefficients(f, b, rate_hz=rate_hz)
        x = lfilter([a0, a1, a2], [1.0], x)
    return x


def local_jitter_pct(periods: np.ndarray) -> float:
    return 100.0 * np.mean(np.abs(np.diff(periods))) / np.mean(periods)


def local_shimmer_db(amps: np.ndarray) -> float:
    return float(np.mean(np.abs(20.0 * np.log10(amps[1:] / amps[:-1]))))


def closures_and_peaks(flow: np.ndarray, rate_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Glottal closure instants (s) and per-pulse peak flow of a recovered
    KLGLOTT88 flow: closure = where the open phase returns to zero, found by
    linear extrapolation of two open-phase samples taken 2 and 3 samples
    before the last non-zero one (clear of the smoothing at closure)."""
    thr = 1e-4 * np.max(flow)
    open_ = flow > thr
    ends = np.flatnonzero(open_[:-1] & ~open_[1:])          # last open sample
    starts = np.flatnonzero(~open_[:-1] & open_[1:]) + 1    # first open sample
    ends = ends[ends > starts[0]]
    gci, peaks = [], []
    for e in ends:
        s = starts[starts <= e][-1]
        u1, u2 = flow[e - 3], flow[e - 2]
        gci.append((e - 2 + u2 / (u1 - u2)) / rate_hz)
        peaks.append(flow[s:e + 1].max())
    return np.array(gci), np.array(peaks)


# --------------------------------------------------------------- resonators
@pytest.mark.parametrize("f, bw, rate", [
    (500.0, 60.0, 10000.0),     # Klatt (1980) ran at 10 kHz
    (1500.0, 100.0, 16000.0),
    (2500.0, 200.0, 44100.0),
    (300.0, 50.0, 8000.0),
])
def test_resonator_peak_and_bandwidth_match_klatt_1980(f, bw, rate):
    a, b, c = resonator_coefficients(f, bw, rate_hz=rate)
    w, h = freqz([a], [1.0, -b, -c], worN=1 << 18, fs=rate)
    mag = np.abs(h)
    k = int(np.argmax(mag))
    # the two-pole peak sits at F to within 1% (Klatt 1980 closed form)
    assert abs(w[k] - f) <= 0.01 * f
    half = mag >= mag[k] / np.sqrt(2.0)
    lo = k - np.argmax(~half[k::-1])
    hi = k + np.argmax(~half[k:])
    measured_bw = w[hi] - w[lo]
    # -3 dB bandwidth equals BW to within 3% for BW << rate (Klatt 1980)
    assert abs(measured_bw - bw) <= 0.03 * bw


@pytest.mark.parametrize("f, bw, rate", [(500.0, 60.0, 10000.0), (3500.0, 250.0, 16000.0)])
def test_resonator_has_unity_gain_at_dc(f, bw, rate):
    # A = 1 - B - C gives H(z=1) = 1 (Klatt 1980)
    a, b, c = resonator_coefficients(f, bw, rate_hz=rate)
    assert a / (1.0 - b - c) == pytest.approx(1.0, abs=1e-12)
    _, h = freqz([a], [1.0, -b, -c], worN=[0.0], fs=rate)
    assert abs(h[0]) == pytest.approx(1.0, abs=1e-12)


def test_antiresonator_inverts_resonator_and_nulls_at_f():
    rate = 10000.0
    a, b, c = resonator_coefficients(700.0, 80.0, rate_hz=rate)
    a0, a1, a2 = antiresonator_coefficients(700.0, 80.0, rate_hz=rate)
    impulse = np.zeros(256)
    impulse[0] = 1.0
    y = lfilter([a0, a1, a2], [1.0], lfilter([a], [1.0, -b, -c], impulse))
    np.testing.assert_allclose(y, impulse, atol=1e-12)
    w, h = freqz([a0, a1, a2], [1.0], worN=1 << 16, fs=rate)
    assert abs(h[0]) == pytest.approx(1.0, abs=1e-12)           # unity DC gain (Klatt 1980)
    assert abs(w[np.argmin(np.abs(h))] - 700.0) < 7.0            # zero pair at F


def test_resonator_rejects_bad_values():
    with pytest.raises(ValueError):
        resonator_coefficients(6000.0, 100.0, rate_hz=10000.0)
    with pytest.raises(ValueError):
        resonator_coefficients(500.0, 0.0, rate_hz=10000.0)


def test_klglott88_pulse_shape():
    # Klatt & Klatt (1990): U = a t^2 - b t^3 over the open phase; normalised
    # here to peak 1 at tau = 2/3 and zero at both ends.
    tau = np.linspace(0.0, 1.0, 3001)
    u = klglott88_flow(tau)
    assert u[0] == 0.0 and u[-1] == 0.0
    assert tau[np.argmax(u)] == pytest.approx(2.0 / 3.0, abs=1e-3)
    assert u.max() == pytest.approx(1.0, abs=1e-6)


def test_fast_cascade_kernel_equals_scipy_sosfilt():
    rng = np.random.default_rng(5)
    A, B, C = resonator_coefficients(np.array([500.0, 1500.0, 2500.0]), np.array([60.0, 90.0, 120.0]),
                                     rate_hz=16000.0)
    sos = np.zeros((3, 6))
    sos[:, 0], sos[:, 3], sos[:, 4], sos[:, 5] = A, 1.0, -B, -C
    x = rng.standard_normal(300)
    zi = rng.standard_normal((3, 2))
    ref, zf = sosfilt(sos, x, zi=zi)
    buf = x.reshape(1, -1).copy()
    z = zi.reshape(1, 3, 2).copy()
    synth._cascade(sos, buf, z)
    np.testing.assert_array_equal(buf[0], ref)
    np.testing.assert_array_equal(z[0], zf)


# ----------------------------------------------------------- steady vowels
@pytest.mark.parametrize("vowel", ["ɑ", "i", "u", "ɛ"])
def test_spectrum_envelope_peaks_at_peterson_barney_formants(vowel):
    f0, f1, f2, f3 = PB_MEN[vowel]
    rate = 10000.0
    y = synthesize_vowel(formants_hz=(f1, f2, f3), f0_hz=f0, duration_s=0.5, rate_hz=rate)
    found = lpc_formants(y[1000:4000], rate, order=12)
    for target in (f1, f2, f3):
        nearest = found[np.argmin(np.abs(found - target))]
        # within 6% or 40 Hz (harmonic bias of LPC at male F0)
        assert abs(nearest - target) <= max(40.0, 0.06 * target), (vowel, target, found)


@pytest.mark.parametrize("formants, f0, rate, n_formants", [
    ((730.0, 1090.0, 2440.0), 125.0, 10000.0, 4),    # P&B men /ɑ/ (from memory), F0 rounded
    ((270.0, 2290.0, 3010.0), 200.0, 16000.0, 5),    # P&B men /i/ (from memory)
])
def test_output_spectrum_is_klglott88_source_times_klatt_cascade(formants, f0, rate, n_formants):
    # With an integer period (rate / F0 samples), the steady output is exactly
    # periodic: its harmonics must be the harmonics of the sampled, first-
    # differenced KLGLOTT88 pulse (Klatt & Klatt 1990; closure kink smoothed
    # by a two-point polyBLAMP, Esqueda, Valimaki & Bilbao 2016) times the
    # response of the cascade of Klatt (1980) resonators (F4/F5 of the man's
    # voice; F5 is left out at 10 kHz), up to one real constant gain.
    oq = 0.6
    period = int(round(rate / f0))
    y = synthesize_vowel(formants_hz=formants, f0_hz=f0, duration_s=1.0, rate_hz=rate, open_quotient=oq,
                         peak_dbfs=None)
    n = np.arange(period)
    tau = (n - (1.0 - oq) * period) / (oq * period)
    u = np.where(tau >= 0.0, 6.75 * tau ** 2 * (1.0 - tau), 0.0)
    # closure falls on sample 0 of the next period: polyBLAMP residual
    # S Ts (1 - |x|)^3 / 6 at x = 0, slope jump S = 6.75 / (OQ T)
    u[0] += 6.75 / (oq * period) / 6.0
    e = u - np.roll(u, 1)                                    # radiation: first difference
    reps = 40
    E = np.fft.rfft(np.tile(e, reps))
    Y = np.fft.rfft(y[reps * period:2 * reps * period])     # after the onset transient
    k = np.arange(1, int(0.45 * rate / f0))
    H = np.ones(len(k), complex)
    fm = tuple(formants) + synth.VOICE_GROUPS["man"]
    for f, bw in list(zip(fm, DEFAULT_BANDWIDTHS_HZ))[:n_formants]:
        a, b, c = resonator_coefficients(f, bw, rate_hz=rate)
        H *= freqz([a], [1.0, -b, -c], worN=k * f0, fs=rate)[1]
    ratio = Y[reps * k] / (E[reps * k] * H)
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-8)
    assert abs(ratio[0].imag) < 1e-8 * abs(ratio[0]) and ratio[0].real > 0


def test_harmonic_peaks_sit_at_peterson_barney_formants():
    # an independent look at the envelope: local maxima of the harmonic
    # amplitudes lie within one harmonic of each formant (P&B 1952 men, from memory)
    rate, f0 = 10000.0, 125.0
    period = 80
    for vowel in ("ɑ", "i", "u", "ɛ"):
        _, f1, f2, f3 = PB_MEN[vowel]
        y = synthesize_vowel(formants_hz=(f1, f2, f3), f0_hz=f0, duration_s=0.7, rate_hz=rate)
        seg = y[int(0.2 * rate):int(0.2 * rate) + 40 * period]
        spec = np.abs(np.fft.rfft(seg))
        k = np.arange(1, 38)
        amp = 20 * np.log10(spec[40 * k])
        peaks = k[1:-1][(amp[1:-1] > amp[:-2]) & (amp[1:-1] > amp[2:])] * f0
        for target in (f1, f2, f3):
            assert np.min(np.abs(peaks - target)) <= f0, (vowel, target, peaks)


@pytest.mark.parametrize("f0, rate", [
    (100.0, 16000.0), (124.0, 10000.0), (220.0, 16000.0), (480.0, 16000.0),
    (500.0, 8000.0), (310.0, 44100.0), (95.0, 96000.0),
])
def test_f0_of_output_matches_request_within_1_percent(f0, rate):
    y = synthesize_vowel(formants_hz=(600.0, 1200.0, 2500.0), f0_hz=f0, duration_s=0.4, rate_hz=rate)
    est = f0_autocorrelation(y, rate, f0_min=0.7 * f0, f0_max=1.4 * f0)
    assert est == pytest.approx(f0, rel=0.01)


def test_high_f0_periods_are_not_rounded_to_samples():
    # 480 Hz at 8 kHz is 16.67 samples a period: the pulse train must keep the
    # fractional period (pitch-synchronous source), so 0.5 s holds 240 periods
    sch = Schedule((Segment(0.5, "voiced", 480.0, formants_hz=(400.0, 1500.0, 2800.0)),))
    y, truth = render(sch, rate_hz=8000.0)
    assert np.allclose(truth.periods_s, 1.0 / 480.0, rtol=1e-12)
    assert len(truth.period_starts_s) == 240
    assert f0_autocorrelation(y, 8000.0, f0_min=300, f0_max=700) == pytest.approx(480.0, rel=0.005)


def test_output_is_float64_at_the_documented_level():
    y = synthesize_vowel(formants_hz=(730, 1090, 2440), f0_hz=124, duration_s=0.3, rate_hz=16000)
    assert y.dtype == np.float64 and len(y) == 4800
    assert np.max(np.abs(y)) == pytest.approx(10 ** (-6 / 20), rel=1e-12)
    raw = synthesize_vowel(formants_hz=(730, 1090, 2440), f0_hz=120, duration_s=0.3, rate_hz=16000,
                           peak_dbfs=None)
    peak_db = 20 * np.log10(np.max(np.abs(raw)))
    assert -9.0 < peak_db < -3.0      # calibrated: /ɑ/ at 120 Hz near -6 dBFS


# ---------------------------------------------------------- jitter, shimmer
STEADY = dict(formants=(500.0, 1500.0, 2500.0), bandwidths=DEFAULT_BANDWIDTHS_HZ[:3])


def _steady_schedule(**kw):
    seg = Segment(8.0, "voiced", 120.0, formants_hz=STEADY["formants"])
    return Schedule((seg,), **kw)


@pytest.mark.parametrize("jitter, shimmer", [(1.0, 0.4), (2.5, 0.0), (0.0, 1.0)])
def test_jitter_and_shimmer_statistics_match_request(jitter, shimmer):
    sch = _steady_schedule(jitter_pct=jitter, shimmer_db=shimmer)
    rate = 48000.0
    y, truth = render(sch, rate_hz=rate, seed=11)
    # the periods the source used (about 960 of them)
    assert local_jitter_pct(truth.periods_s) == pytest.approx(jitter, rel=0.1, abs=1e-9)
    assert local_shimmer_db(truth.pulse_amplitudes) == pytest.approx(shimmer, rel=0.1, abs=1e-9)
    # and the same measured on the output: inverse filter the cascade
    # (antiresonators, F4/F5 of the man's voice), integrate the radiation
    fm = STEADY["formants"] + synth.VOICE_GROUPS["man"]
    e = inverse_filter(y, rate, fm, DEFAULT_BANDWIDTHS_HZ)
    flow = np.cumsum(e)
    gci, peaks = closures_and_peaks(flow, rate)
    periods = np.diff(gci)
    assert len(periods) > 900
    assert np.mean(periods) == pytest.approx(1.0 / 120.0, rel=0.01)
    assert local_jitter_pct(periods) == pytest.approx(jitter, rel=0.1, abs=0.02)
    assert local_shimmer_db(peaks) == pytest.approx(shimmer, rel=0.1, abs=0.02)


def test_aspiration_level_relative_to_voicing():
    rate = 16000.0
    seg = Segment(3.0, "voiced", 150.0, formants_hz=STEADY["formants"])
    clean, _ = render(Schedule((seg,)), rate_hz=rate, seed=4)
    breathy, _ = render(Schedule((seg,), aspiration_db=-12.0), rate_hz=rate, seed=4)
    fm = STEADY["formants"] + synth.VOICE_GROUPS["man"]
    e_voice = inverse_filter(clean, rate, fm, DEFAULT_BANDWIDTHS_HZ)
    e_noise = inverse_filter(breathy - clean, rate, fm, DEFAULT_BANDWIDTHS_HZ)
    ratio_db = 20 * np.log10(np.std(e_noise[800:]) / np.std(e_voice[800:]))
    assert ratio_db == pytest.approx(-12.0, abs=0.5)
    # white: the noise excitation has no memory
    r1 = np.corrcoef(e_noise[800:-1], e_noise[801:])[0, 1]
    assert abs(r1) < 0.03


# -------------------------------------------------------- schedule, truth
GLIDE = Schedule((
    Segment(0.20, "silent"),
    Segment(0.30, "voiced", 130.0, 120.0, (300.0, 870.0, 2240.0), transition_s=0.10, label="u"),
    Segment(0.30, "voiced", 120.0, 110.0, (270.0, 2290.0, 3010.0), transition_s=0.05,
            transition="linear", label="i"),
    Segment(0.10, "noise", formants_hz=(500.0, 1500.0, 2500.0), level_db=-10.0),
    Segment(0.25, "silent"),
), jitter_pct=0.8, shimmer_db=0.3, aspiration_db=-25.0)


def test_truth_matches_schedule():
    rate = 16000.0
    _, truth = render(GLIDE, rate_hz=rate)
    t = np.array([0.1, 0.3, 0.55, 0.74, 0.85, 1.0])
    got = truth.at(t)
    np.testing.assert_array_equal(got["voiced"], [False, True, True, True, False, False])
    np.testing.assert_array_equal(got["kind"], [0, 1, 1, 1, 2, 0])
    # F0 linear within a segment: 130 -> 120 over 0.2..0.5 s
    assert got["f0_hz"][1] == pytest.approx(130.0 - 10.0 * (0.1 / 0.3), abs=1e-9)
    assert got["f0_hz"][3] == pytest.approx(120.0 - 10.0 * (0.24 / 0.3), abs=1e-9)
    assert got["f1_hz"][1] == 300.0 and got["f2_hz"][1] == 870.0 and got["f3_hz"][1] == 2240.0
    assert got["f2_hz"][2] == 2290.0
    # the linear transition 0.75..0.80 s goes towards the noise segment
    # (not started at 0.74 s)
    assert got["f2_hz"][3] == pytest.approx(2290.0, abs=1e-9)
    mid = truth.at(np.array([0.775]))
    assert mid["f2_hz"][0] == pytest.approx(0.5 * (2290.0 + 1500.0), abs=30.0)
    for key in ("f0_hz", "f1_hz", "f2_hz", "f3_hz"):
        assert np.isnan(got[key][[0, 4, 5]]).all()
    # smooth (raised-cosine) glide /u/ -> /i/ over 0.40..0.50 s: halfway at 0.45 s
    g = truth.at(np.array([0.40, 0.45, 0.4999]))
    assert g["f2_hz"][0] == pytest.approx(870.0, abs=5.0)
    assert g["f2_hz"][1] == pytest.approx(0.5 * (870.0 + 2290.0), abs=20.0)
    assert g["f2_hz"][2] == pytest.approx(2290.0, abs=5.0)
    assert truth.label_at([0.3, 0.6, 2.0]) == ["u", "i", ""]
    # glottal periods only start inside voiced stretches
    starts = truth.period_starts_s
    assert starts.min() >= 0.2 and starts.max() < 0.8


def test_truth_formants_are_the_ones_the_resonators_used():
    # hold one resonator frequency per 1 ms update: Truth reports that value
    rate = 16000.0
    _, truth = render(GLIDE, rate_hz=rate)
    plan = synth._Plan(GLIDE, rate)
    n = np.arange(int(0.2 * rate), int(0.8 * rate))
    chunk_mid = (n // plan.chunk + 0.5) * plan.chunk / rate
    f, _ = plan.tract_at(chunk_mid)
    got = truth.at(n / rate)
    np.testing.assert_array_equal(got["f2_hz"], f[:, 1])


def test_silence_is_silent():
    rate = 16000.0
    y, _ = render(GLIDE, rate_hz=rate)
    assert np.all(y[:int(0.2 * rate)] == 0.0)           # nothing before the first sound
    peak = np.max(np.abs(y))
    tail = y[int(1.0 * rate):]                           # 150 ms after the noise ends
    assert np.max(np.abs(tail)) < 1e-6 * peak
    only_silence = Schedule((Segment(0.1, "silent", formants_hz=(500, 1500, 2500)),))
    z, truth = render(only_silence, rate_hz=rate)
    assert np.all(z == 0.0) and len(truth.period_starts_s) == 0
    bare, _ = render(Schedule((Segment(0.05, "silent"),)), rate_hz=rate)
    assert len(bare) == 800 and np.all(bare == 0.0)


def test_deterministic_for_a_seed():
    a, _ = render(GLIDE, rate_hz=16000.0, seed=3)
    b, _ = render(GLIDE, rate_hz=16000.0, seed=3)
    c, _ = render(GLIDE, rate_hz=16000.0, seed=4)
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)


#: A shorter schedule with every kind of stretch, for the block property test.
SHORT = replace(GLIDE, segments=(
    Segment(0.05, "silent"),
    Segment(0.12, "voiced", 130.0, 120.0, (300.0, 870.0, 2240.0), transition_s=0.05),
    Segment(0.12, "voiced", 450.0, 400.0, (270.0, 2290.0, 3010.0), transition_s=0.03, transition="linear"),
    Segment(0.05, "noise", formants_hz=(500.0, 1500.0, 2500.0), level_db=-10.0),
    Segment(0.06, "silent"),
), ramp_s=0.02)


@functools.lru_cache(maxsize=None)
def _whole_short(rate: float):
    return render(SHORT, rate_hz=rate, seed=7)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.integers(min_value=1, max_value=900), min_size=1, max_size=60),
       st.sampled_from([8000.0, 16000.0, 22050.0]))
def test_block_rendering_equals_whole(blocks, rate):
    whole, truth = _whole_short(rate)
    voice = KlattVoice(SHORT, rate_hz=rate, seed=7)
    parts = []
    i = 0
    while voice.position < len(whole):
        parts.append(voice.render(blocks[i % len(blocks)]))
        i += 1
    got = np.concatenate(parts)
    np.testing.assert_array_equal(got[:len(whole)], whole)
    np.testing.assert_array_equal(voice.truth.periods_s, truth.periods_s)


def test_render_after_end_gives_tail_then_zeros():
    voice = KlattVoice(GLIDE, rate_hz=16000.0)
    voice.render(voice.n_samples)
    assert voice.finished
    more = voice.render(1600)
    assert more.shape == (1600,) and np.max(np.abs(more)) < 1e-6
    assert voice.render(0).shape == (0,)


def test_noise_segment_is_shaped_by_the_formants():
    rate = 16000.0
    sch = Schedule((Segment(1.0, "noise", formants_hz=(700.0, 1200.0, 2600.0)),))
    y, truth = render(sch, rate_hz=rate)
    assert np.std(y) > 0
    assert not truth.at(np.array([0.5]))["voiced"][0]
    found = lpc_formants(y, rate, order=18)
    for target in (700.0, 1200.0, 2600.0):
        assert np.min(np.abs(found - target)) < 0.06 * target


# ---------------------------------------------------------- input checks
@pytest.mark.parametrize("kwargs, words", [
    (dict(rate_hz=4000.0), "rate_hz"),
    (dict(f0_hz=2000.0), "F0"),
    (dict(formants_hz=(500.0, 1500.0, 7900.0)), "formants"),
    (dict(formants_hz=(500.0, 1500.0)), "3 to 5"),
    (dict(jitter_pct=-1.0), "jitter"),
    (dict(duration_s=0.0), "duration"),
])
def test_bad_parameters_raise_clear_errors(kwargs, words):
    args = dict(formants_hz=(500.0, 1500.0, 2500.0), f0_hz=120.0, duration_s=0.1, rate_hz=16000.0)
    args.update(kwargs)
    with pytest.raises(ScheduleError, match=words):
        synthesize_vowel(**args)
    assert issubclass(ScheduleError, UserError) and issubclass(ScheduleError, ValueError)


def test_schedule_errors():
    with pytest.raises(ScheduleError, match="f0_start_hz"):
        render(Schedule((Segment(0.1, "voiced", formants_hz=(500, 1500, 2500)),)), rate_hz=16000)
    with pytest.raises(ScheduleError, match="transition_s"):
        render(Schedule((Segment(0.1, "voiced", 100, formants_hz=(500, 1500, 2500), transition_s=0.2),)),
               rate_hz=16000)
    with pytest.raises(ScheduleError, match="no segments"):
        render(Schedule(()), rate_hz=16000)
    with pytest.raises(ScheduleError, match="f5_hz"):
        render(Schedule((Segment(0.1, "voiced", 100, formants_hz=(500, 1500, 2500)),), f5_hz=4500.0),
               rate_hz=8000)


def test_default_high_formants_dropped_at_low_rates():
    # at 8 kHz the man's F5 (4500 Hz) is above Nyquist and is left out; F4
    # (3500 Hz) is below 0.45 x rate = 3600 Hz and stays
    assert synth._Plan(GLIDE, 8000.0).n_sections == 4
    assert synth._Plan(GLIDE, 8000.0).high_f.tolist() == [3500.0]
    assert synth._Plan(replace(GLIDE, voice="woman"), 8000.0).n_sections == 3
    assert synth._Plan(GLIDE, 16000.0).n_sections == 5


# ------------------------------------------------------------- add_noise
def test_add_noise_reaches_requested_snr():
    rate = 16000.0
    y, truth = render(GLIDE, rate_hz=rate)
    mask = truth.at(np.arange(len(y)) / rate)["voiced"]
    noisy = add_noise(y, snr_db=15.0, seed=2, mask=mask)
    noise = noisy - y
    snr = 10 * np.log10(np.mean(y[mask] ** 2) / np.mean(noise ** 2))
    assert snr == pytest.approx(15.0, abs=0.1)
    np.testing.assert_array_equal(noisy, add_noise(y, snr_db=15.0, seed=2, mask=mask))
    default = add_noise(y, snr_db=15.0, seed=2)
    assert default.shape == y.shape and not np.array_equal(default, y)
    with pytest.raises(ValueError):
        add_noise(np.zeros(100), snr_db=10.0, seed=0)


# --------------------------------------------------------- live extension
def test_extend_while_rendering_equals_rendering_the_longer_schedule():
    rate = 16000.0
    head = Schedule(GLIDE.segments[:3], jitter_pct=0.8, shimmer_db=0.3, aspiration_db=-25.0)
    tail = GLIDE.segments[3:]
    full, truth = render(replace(head, segments=head.segments + tail), rate_hz=rate, seed=2)
    voice = KlattVoice(head, rate_hz=rate, seed=2)
    first = voice.render(int(0.5 * rate))          # well before the end of head (0.8 s)
    voice.extend(tail)
    rest = voice.render(len(full) - len(first))
    np.testing.assert_array_equal(np.concatenate([first, rest]), full)
    np.testing.assert_array_equal(voice.truth.period_starts_s, truth.period_starts_s)


def test_extend_after_the_end_inserts_silence_and_keeps_truth():
    rate = 16000.0
    one = Schedule((Segment(0.2, "voiced", 120.0, formants_hz=(730.0, 1090.0, 2440.0)),))
    voice = KlattVoice(one, rate_hz=rate)
    voice.render(int(0.5 * rate))                  # 0.3 s past the end
    voice.extend([Segment(0.2, "voiced", 140.0, formants_hz=(270.0, 2290.0, 3010.0))])
    y = voice.render(int(0.2 * rate))
    truth = voice.truth
    got = truth.at(np.array([0.1, 0.35, 0.6]))
    np.testing.assert_array_equal(got["voiced"], [True, False, True])
    assert got["f2_hz"][2] == 2290.0
    assert truth.duration_s == pytest.approx(0.7)
    assert np.std(y) > 0
    starts = truth.period_starts_s
    assert not np.any((starts > 0.21) & (starts < 0.5))
    assert starts[-1] >= 0.5


def test_flutter_moves_f0_as_klatt_and_klatt_1990_and_truth_follows():
    # FL = 25 %: dF0 = 0.5 (F0/100) (sum of three sines) Hz (Klatt & Klatt 1990, from memory)
    seg = Segment(3.0, "voiced", 100.0, formants_hz=(500.0, 1500.0, 2500.0))
    y, truth = render(Schedule((seg,), flutter_pct=25.0), rate_hz=16000.0)
    t = np.arange(0.0, 3.0, 0.001)
    f0 = truth.at(t)["f0_hz"]
    wave = sum(np.sin(2 * np.pi * fr * t) for fr in (12.7, 7.1, 4.7))
    np.testing.assert_allclose(f0, 100.0 + 0.5 * wave, atol=1e-9)
    assert 0.3 < np.std(f0) < 1.5
    # each period is 1 / F0 at its start (jitter off)
    f0_starts = truth.at(truth.period_starts_s)["f0_hz"]
    np.testing.assert_allclose(truth.periods_s, 1.0 / f0_starts, rtol=1e-9)


@st.composite
def schedules(draw):
    segs = []
    for _ in range(draw(st.integers(1, 5))):
        kind = draw(st.sampled_from(["voiced", "voiced", "noise", "silent"]))
        dur = draw(st.floats(0.005, 0.15))
        f1 = draw(st.floats(200.0, 900.0))
        f2 = draw(st.floats(f1 + 100.0, 2600.0))
        f3 = draw(st.floats(max(f2 + 100.0, 1800.0), 3500.0))
        segs.append(Segment(
            dur, kind,
            draw(st.floats(60.0, 450.0)) if kind == "voiced" else None,
            draw(st.floats(60.0, 450.0)) if kind == "voiced" else None,
            (f1, f2, f3) if kind != "silent" or draw(st.booleans()) else None,
            transition_s=draw(st.floats(0.0, 1.0)) * dur,
            transition=draw(st.sampled_from(["smooth", "linear"])),
            level_db=draw(st.floats(-20.0, 6.0))))
    return Schedule(tuple(segs), voice=draw(st.sampled_from(["man", "woman", "child"])),
                    jitter_pct=draw(st.floats(0.0, 3.0)), shimmer_db=draw(st.floats(0.0, 1.0)),
                    aspiration_db=draw(st.one_of(st.none(), st.floats(-40.0, 0.0))),
                    ramp_s=draw(st.floats(0.0, 0.03)), flutter_pct=draw(st.floats(0.0, 30.0)))


def _steady_peak(schedule: Schedule, rate: float, seed: int) -> float:
    """Largest peak of the schedule's sounds each held steady for 60 ms (no changes).

    A segment glides towards the next one's formants, so each sound is held at
    its own formants and at the next segment's."""
    peak = 0.0
    segs = schedule.segments
    for i, s in enumerate(segs):
        if s.kind == "silent":
            continue
        ahead = [f for f in (s.formants_hz, segs[i + 1].formants_hz if i + 1 < len(segs) else None) if f]
        for fm in ahead:
            for f0 in {s.f0_start_hz, s.f0_end_hz}:
                held = replace(s, duration_s=0.06, f0_start_hz=f0, f0_end_hz=f0, formants_hz=fm, transition_s=0.0)
                one = replace(schedule, segments=(held,), ramp_s=0.0, flutter_pct=0.0)
                peak = max(peak, float(np.max(np.abs(render(one, rate_hz=rate, seed=seed)[0]))))
    return peak


@settings(max_examples=20, deadline=None)
@given(schedules(), st.sampled_from([8000.0, 16000.0]), st.integers(1, 400), st.integers(0, 2**31 - 1))
def test_any_schedule_renders_finite_and_splits_exactly(schedule, rate, block, seed):
    whole, truth = render(schedule, rate_hz=rate, seed=seed)
    assert whole.shape == (int(round(schedule.duration_s * rate)),)
    assert np.all(np.isfinite(whole))
    if all(s.transition_s >= 0.005 for s in schedule.segments[:-1]):
        # The level is bounded relative to each sound held steady, not absolutely:
        # a steady sound alone can peak far above 1 where formants crowd together
        # near half the rate (F3 3397 Hz beside the man's fixed F4 of 3500 Hz at
        # 8 kHz peaks near 37, see the synth module's notes; unity-DC-gain resonators, Klatt 1980). Known limit:
        # an instant jump (transition_s 0) while the resonators ring can overshoot
        # both sounds many times over, so the bound is held only where every
        # change glides over 5 ms or more.
        assert np.max(np.abs(whole), initial=0.0) <= 4.0 * _steady_peak(schedule, rate, seed) + 1e-6
    voice = KlattVoice(schedule, rate_hz=rate, seed=seed)
    parts = []
    while voice.position < len(whole):
        parts.append(voice.render(min(block, len(whole) - voice.position)))
    if parts:
        np.testing.assert_array_equal(np.concatenate(parts), whole)
    t = np.arange(len(whole)) / rate
    got = truth.at(t)
    kinds = {"silent": 0, "voiced": 1, "noise": 2}
    edges = np.cumsum([0.0] + [s.duration_s for s in schedule.segments])
    for s, a, b in zip(schedule.segments, edges[:-1], edges[1:]):
        inside = (t >= a + 1.0 / rate) & (t < b - 1.0 / rate)
        assert np.all(got["kind"][inside] == kinds[s.kind])
        assert np.all(np.isnan(got["f1_hz"][inside]) == (s.kind != "voiced"))


def test_truth_keeps_the_shape_of_the_times_and_is_nan_outside():
    _, truth = render(GLIDE, rate_hz=16000.0)
    got = truth.at(np.array([[-0.5, 0.3], [0.6, 9.0]]))
    assert got["f1_hz"].shape == (2, 2)
    np.testing.assert_array_equal(got["voiced"], [[False, True], [True, False]])
    assert np.isnan(got["f0_hz"][0, 0]) and np.isnan(got["f2_hz"][1, 1])


def test_inverse_filtering_with_truth_recovers_the_klglott88_source():
    # Undo the time-varying cascade sample by sample with the formants and
    # bandwidths Truth reports (x[n] = (y[n] - B y[n-1] - C y[n-2]) / A, the
    # exact inverse of a Klatt 1980 resonator), then compare with the source
    # rebuilt from Truth's glottal periods (KLGLOTT88, Klatt & Klatt 1990):
    # both must agree if Truth holds what the synthesiser used.
    rate, oq = 16000.0, 0.6
    sch = Schedule((
        Segment(0.25, "voiced", 140.0, 120.0, (300.0, 870.0, 2240.0), transition_s=0.15),
        Segment(0.25, "voiced", 120.0, 150.0, (270.0, 2290.0, 3010.0), transition_s=0.1, transition="linear"),
        Segment(0.20, "voiced", 150.0, 110.0, (730.0, 1090.0, 2440.0), bandwidths_hz=(80.0, 110.0, 160.0)),
    ), jitter_pct=1.5, shimmer_db=0.5, open_quotient=oq)
    y, truth = render(sch, rate_hz=rate, seed=9)
    n = np.arange(len(y))
    got = truth.at(n / rate)
    f4, f5 = synth.VOICE_GROUPS["man"]
    tracks = [(got[f"f{j}_hz"], got[f"b{j}_hz"]) for j in (1, 2, 3)]
    tracks += [(np.full(len(y), f4), np.full(len(y), DEFAULT_BANDWIDTHS_HZ[3])),
               (np.full(len(y), f5), np.full(len(y), DEFAULT_BANDWIDTHS_HZ[4]))]
    x = y.copy()
    for f, bw in reversed(tracks):
        a, b, c = resonator_coefficients(f, bw, rate_hz=rate)
        prev = np.concatenate([[0.0], x[:-1]])
        prev2 = np.concatenate([[0.0, 0.0], x[:-2]])
        x = (x - b * prev - c * prev2) / a
    # the source from Truth's periods
    t = n / rate
    g, T, amp = truth.period_starts_s, truth.periods_s, truth.pulse_amplitudes
    k = np.clip(np.searchsorted(g, t, side="right") - 1, 0, None)
    tau = (t - g[k] - (1.0 - oq) * T[k]) / (oq * T[k])
    inside = (t >= g[k]) & (t < g[k] + T[k]) & (tau >= 0)
    u = np.where(inside, amp[k] * 6.75 * tau ** 2 * (1.0 - tau), 0.0)
    # polyBLAMP at each closure (Esqueda, Valimaki & Bilbao 2016): the two
    # samples within one sample of it get S Ts (1 - |x|)^3 / 6
    for c, per, a_k in zip(g + T, T, amp):
        for i in (int(np.floor(c * rate)), int(np.floor(c * rate)) + 1):
            d = abs(i - c * rate)
            if i < len(u) and d < 1.0:
                u[i] += a_k * 6.75 / (oq * per) / rate / 6.0 * (1.0 - d) ** 3
    e = np.diff(np.concatenate([[0.0], u]))
    scale = np.dot(x, e) / np.dot(e, e)
    assert scale > 0
    np.testing.assert_allclose(x / scale, e, atol=1e-7 * np.max(np.abs(e)))


@pytest.mark.parametrize("f0, rate, limit_db", [(120.0, 8000.0, -32.0), (480.0, 8000.0, -28.0),
                                                (120.0, 16000.0, -65.0), (480.0, 16000.0, -60.0)])
def test_aliasing_of_the_source_stays_low(f0, rate, limit_db):
    # a steady vowel is periodic: energy away from the harmonics of F0 (more
    # than 15 Hz off, Hann window over 1.5 s) can only be aliasing of the
    # sampled pulse. The polyBLAMP at closure keeps it this far down.
    y = synthesize_vowel(formants_hz=(400.0, 1500.0, 2800.0), f0_hz=f0, duration_s=2.0, rate_hz=rate)
    seg = y[int(0.5 * rate):]
    power = np.abs(np.fft.rfft(seg * np.hanning(len(seg)))) ** 2
    f = np.fft.rfftfreq(len(seg), 1.0 / rate)
    harmonic = np.abs(f / f0 - np.round(f / f0)) * f0 < 15.0
    assert 10 * np.log10(power[~harmonic].sum() / power[harmonic].sum()) < limit_db
