"""Discrete all-pole modelling (El-Jaroudi & Makhoul 1991) on spectra with a known answer.

The harmonic powers are samples of an exact all-pole spectrum ``1 / |A|^2``
whose poles are chosen here, so the fit should give those poles back.
"""

from __future__ import annotations

import numpy as np
import pytest

from livevowel.dsp.dap import CENSORED_COUNT, HARMONICS_PER_PARAMETER, MAX_ORDER_DROP, dap, dap_orders
from livevowel.dsp.lpc import formant_candidates

RATE = 11000.0
# resonances (Hz) and bandwidths (Hz) of the known model: a vowel-like order-8 filter
POLES_HZ = np.array([600.0, 1200.0, 2600.0, 3800.0])
BW_HZ = np.array([80.0, 100.0, 150.0, 200.0])


def _model_a() -> np.ndarray:
    a = np.array([1.0])
    for f, b in zip(POLES_HZ, BW_HZ):
        r = np.exp(-np.pi * b / RATE)
        a = np.convolve(a, [1.0, -2.0 * r * np.cos(2.0 * np.pi * f / RATE), r * r])
    return a


def _harmonics(f0: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    m = int(np.floor((RATE / 2.0 - 90.0) / f0))
    f = f0 * np.arange(1, m + 1)
    z = np.exp(-1j * 2.0 * np.pi * f[:, None] / RATE * np.arange(9)[None, :])
    power = 1.0 / np.abs(z @ _model_a()) ** 2
    return f[None, :], power[None, :], np.ones((1, m))


def test_orders_keep_enough_harmonics_per_parameter():
    w = np.ones((4, 40))
    w[1, 14:] = 0.0      # 14 harmonics: 14 / 1.4 = 10 parameters -> order 8 (even)
    w[2, 20:] = 0.0      # 20 harmonics: 14.3 parameters -> order 12
    w[3, 5:] = 0.0       # 5 harmonics: at most MAX_ORDER_DROP lower
    got = dap_orders(w, order=12)
    np.testing.assert_array_equal(got, [12, 8, 12, 12 - MAX_ORDER_DROP])
    m = w.sum(axis=1)
    assert np.all((m >= HARMONICS_PER_PARAMETER * (got + 1)) | (got == 12 - MAX_ORDER_DROP))
    # men's order 14 stops at 10
    assert dap_orders(w[3:], order=14)[0] == 14 - MAX_ORDER_DROP
    # a censored harmonic (weight < 0) counts CENSORED_COUNT of a measured one:
    # 14 measured + 12 censored at 0.5 = 20 -> order 12, as 20 measured
    wc = np.zeros((1, 40))
    wc[0, :14] = 1.0
    wc[0, 14:26] = -0.1
    assert CENSORED_COUNT == 0.5
    assert dap_orders(wc, order=12)[0] == 12
    assert dap_orders(wc[:, :14], order=12)[0] == 8


@pytest.mark.parametrize("f0", [160.0, 380.0])
def test_dap_recovers_known_poles_from_harmonic_samples(f0):
    f, p, w = _harmonics(f0)
    a, ok = dap(f, p, w, order=12, rate_hz=RATE, iterations=200)   # the fixed point converges slowly
    assert ok[0]
    cf, _ = formant_candidates(a, rate_hz=RATE, min_hz=90.0, max_bandwidth_hz=700.0)
    got = cf[0][np.isfinite(cf[0])]
    # each known resonance has a candidate within 1 % (a fixed order 12 at F0 380 Hz, 14
    # harmonics for 13 parameters, measured after 200 iterations: F1 588 Hz, F2 1163 Hz)
    err = np.min(np.abs(got[None, :] / POLES_HZ[:, None] - 1.0), axis=1)
    assert np.all(err < 0.01), (got, err)


@pytest.mark.parametrize("f0", [120.0, 240.0])
def test_harmonic_powers_in_white_noise_known_comb(f0):
    """Harmonic comb with known amplitudes plus white noise of known power.

    Known answers (common practice): a sinusoid of amplitude A under a taper
    w peaks in the DFT at power (A sum(w) / 2)^2; white noise of variance s^2
    gives s^2 sum(w^2) per bin. Harmonics 15 dB or more above that floor
    must come back within 1 dB on average over frames once the floor is
    subtracted; harmonics with no power (above 2 kHz here) must mostly be marked lost.
    """
    from livevowel.dsp.dap import LOST_WEIGHT

    k, amp, true_p, noise_p, (hf, hp, hw) = _harmonics_in_white_noise(f0, sigma=0.002)
    strong = true_p > noise_p * 10 ** 1.5
    assert strong.sum() >= 5
    got_db = 10 * np.log10(np.mean(hp[:, : len(k)][:, strong], axis=0))
    np.testing.assert_allclose(got_db, 10 * np.log10(true_p[strong]), atol=1.0)
    np.testing.assert_allclose(np.median(hf[:, : len(k)][:, strong], axis=0), (k * f0)[strong], rtol=0.01)
    silent = amp == 0
    # measured: 0.85 at F0 120 Hz (unresolved harmonics: the lower threshold, and the peak
    # search takes the largest of ~10 noise bins), 0.99 at 240 Hz
    assert np.mean(hw[:, : len(k)][:, silent] <= LOST_WEIGHT + 1e-12) > 0.8


def _harmonics_in_white_noise(f0: float, *, sigma: float):
    """60 Gaussian-tapered 25 ms frames of harmonics of ``f0`` (amplitude 0.1 (f / 500 Hz)^-0.5 below
    2 kHz, none above; random phases) in white noise of standard deviation ``sigma``, through
    :func:`harmonic_powers`. Returns the harmonic numbers, amplitudes, the known peak power of each
    (A sum(w) / 2)^2 and noise power per bin s^2 sum(w^2), and (freq, power, weight)."""
    from livevowel.dsp.dap import harmonic_powers
    from livevowel.dsp.framing import taper

    n = int(0.025 * RATE)
    w = taper("gaussian", n)
    t = np.arange(n) / RATE
    k = np.arange(1, int((RATE / 2 - 90.0) // f0) + 1)
    amp = np.where(k * f0 < 2000.0, 0.1 * (k * f0 / 500.0) ** -0.5, 0.0)
    true_p = (amp * w.sum() / 2.0) ** 2
    noise_p = sigma ** 2 * np.sum(w ** 2)
    rng = np.random.default_rng(5)
    frames = []
    for _ in range(60):
        ph = rng.uniform(0, 2 * np.pi, len(k))
        x = (amp[:, None] * np.cos(2 * np.pi * f0 * k[:, None] * t[None, :] + ph[:, None])).sum(axis=0)
        frames.append((x + sigma * rng.standard_normal(n)) * w)
    got = harmonic_powers(np.array(frames), np.full(60, f0), rate_hz=RATE, max_hz=RATE / 2 - 90.0,
                          nfft=1024, window=w)
    return k, amp, true_p, noise_p, got


def _hidden_band_errors(f0: float, cut_hz: float) -> dict[str, np.ndarray]:
    """|relative error| of F1, F2 of the known model when the harmonics above
    ``cut_hz`` are hidden under a flat bound 6 dB above the strongest of them
    (as a noise floor hides them): censored (weight < 0), or the level guess
    that censoring replaced (bound - 10 dB, weight 0.3, taken as measured)."""
    f, p, w = _harmonics(f0)
    hidden = f[0] > cut_hz
    bound = p[0, hidden].max() * 10 ** 0.6
    assert np.all(p[0, hidden] < bound)
    errs = {}
    for name, level, weight in (("censored", bound, -0.1), ("guessed", 0.1 * bound, 0.3)):
        pp, ww = p.copy(), w.copy()
        pp[0, hidden] = level
        ww[0, hidden] = weight
        a, ok = dap(f, pp, ww, order=12, rate_hz=RATE, iterations=200)
        assert ok[0]
        cf, _ = formant_candidates(a, rate_hz=RATE, min_hz=90.0, max_bandwidth_hz=700.0)
        got = cf[0][np.isfinite(cf[0])]
        errs[name] = np.array([np.min(np.abs(got / t - 1.0)) for t in POLES_HZ[:2]])
    return errs


HIDDEN_CASES = [(f0, cut) for f0 in (110.0, 130.0, 160.0) for cut in (1800.0, 2200.0)]


@pytest.mark.parametrize("f0,cut_hz", HIDDEN_CASES)
def test_censored_harmonics_leave_known_poles_in_place(f0, cut_hz):
    """The true powers under the bound are up to ~30 dB below it and the fit
    is not told them: F1 and F2 of the known model (600, 1200 Hz) must still
    come back within 1 % (measured: at most 0.31 %; the level guess: up to 2.1 %)."""
    errs = _hidden_band_errors(f0, cut_hz)
    assert np.all(errs["censored"] < 0.01), errs


def test_censoring_beats_the_level_guess_it_replaced():
    # summed F1 + F2 error over the six cases; measured 1.5 % censored, 14.5 % guessed
    c = sum(_hidden_band_errors(f0, cut)["censored"].sum() for f0, cut in HIDDEN_CASES)
    g = sum(_hidden_band_errors(f0, cut)["guessed"].sum() for f0, cut in HIDDEN_CASES)
    assert c < 0.5 * g, (c, g)


def test_harmonics_in_loud_white_noise_are_censored_at_the_noise_floor():
    """The comb of :func:`test_harmonic_powers_in_white_noise_known_comb` at
    F0 120 Hz (45 harmonics: the censoring regime) with white noise 20 dB
    stronger, i.e. within 50 dB of the strongest harmonic. Known answers
    (common practice, as there): the noise power per DFT bin is
    ``s^2 sum(w^2)``; a harmonic of no power is censored (weight < 0) with
    a bound near that floor (measured: median 2.2 dB under it, as the floor
    is a median of valley means); harmonics 15 dB or more above the floor
    keep their level within 1 dB."""
    from livevowel.dsp.dap import CENSOR_MIN_HARMONICS

    f0 = 120.0
    k, amp, true_p, noise_p, (hf, hp, hw) = _harmonics_in_white_noise(f0, sigma=0.02)
    assert len(k) >= CENSOR_MIN_HARMONICS
    silent = amp == 0
    ws, ps = hw[:, : len(k)][:, silent], hp[:, : len(k)][:, silent]
    assert np.mean(ws < 0) > 0.9                     # measured 0.98
    assert abs(10 * np.log10(np.median(ps[ws < 0]) / noise_p)) < 3.0
    strong = true_p > noise_p * 10 ** 1.5
    assert strong.sum() >= 5
    assert np.all(hw[:, : len(k)][:, strong] > 0)
    got_db = 10 * np.log10(np.mean(hp[:, : len(k)][:, strong], axis=0))
    np.testing.assert_allclose(got_db, 10 * np.log10(true_p[strong]), atol=1.0)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_toeplitz_inverse_matches_numpy_on_lpc_like_matrices(seed):
    # Trench's (1964) O(n^2) inverse against numpy.linalg.inv of scipy.linalg.toeplitz:
    # the autocorrelation (order 12) of a strongly resonant AR signal, the ill-conditioned
    # case DAP meets on voiced frames
    import scipy.linalg
    import scipy.signal

    from livevowel.dsp.dap import _toeplitz_inverse

    rng = np.random.default_rng(seed)
    x = scipy.signal.lfilter([1.0], _model_a(), rng.standard_normal(4000))
    r = np.correlate(x, x, mode="full")[len(x) - 1: len(x) + 12]
    t = scipy.linalg.toeplitz(r)
    got = np.empty_like(t)
    assert _toeplitz_inverse(r, got)
    ref = np.linalg.inv(t)
    cond = np.linalg.cond(t)
    assert cond > 1e3                        # not a trivially conditioned case
    np.testing.assert_allclose(got, ref, atol=1e-13 * cond * np.abs(ref).max())
    np.testing.assert_allclose(got @ t, np.eye(13), atol=1e-12 * cond)


def test_toeplitz_inverse_refuses_a_matrix_that_is_not_positive_definite():
    from livevowel.dsp.dap import _toeplitz_inverse

    out = np.empty((3, 3))
    assert not _toeplitz_inverse(np.array([1.0, 1.0, 1.0]), out)     # rank one: singular
    assert not _toeplitz_inverse(np.array([1.0, 2.0, 0.0]), out)     # indefinite
    assert not _toeplitz_inverse(np.array([0.0, 0.0, 0.0]), out)
    assert _toeplitz_inverse(np.array([2.0, 1.0, 0.0]), out)
    np.testing.assert_allclose(out, np.linalg.inv([[2.0, 1.0, 0.0], [1.0, 2.0, 1.0], [0.0, 1.0, 2.0]]), rtol=1e-14)


def test_harmonic_evidence_counts_only_harmonics_measured_above_the_noise():
    from livevowel.dsp.dap import EVIDENCE_FULL, EVIDENCE_NONE, LOST_WEIGHT, harmonic_evidence

    lost, censored, pad = LOST_WEIGHT, -0.1, 0.0
    w = np.array([
        [1.0, 1.0, lost, lost, censored, pad],            # 2 measured: F1 and F2 not determined
        [1.0, 0.7, 1.0, lost, lost, pad],                 # 3
        [1.0, 1.0, 1.0, 0.8, censored, pad],              # 4
        [1.0] * 6,
    ])
    assert (EVIDENCE_NONE, EVIDENCE_FULL) == (2, 4)      # the documented rule: 0 at 2 measured, 1 from 4
    np.testing.assert_allclose(harmonic_evidence(w), [0.0, 0.5, 1.0, 1.0])
    assert harmonic_evidence(w[1]).shape == (1,)
    with pytest.raises(ValueError, match="weight"):
        harmonic_evidence(np.zeros((2, 3, 4)))


def test_harmonic_evidence_falls_when_noise_hides_the_upper_harmonics():
    # the known order-8 model's harmonics at F0 400 Hz (levels 0 to -55 dB re the strongest),
    # rendered as a sum of cosines, then white noise with an RMS 10 dB below the strongest
    # harmonic's amplitude: only the three strongest stay measurable, and the evidence halves
    from livevowel.dsp.dap import LOST_WEIGHT, harmonic_evidence, harmonic_powers

    f, p, _ = _harmonics(400.0)
    n = 275                                       # 25 ms at 11 kHz
    t = np.arange(n) / RATE
    x = (np.sqrt(p[0])[:, None] * np.cos(2 * np.pi * f[0][:, None] * t[None, :])).sum(axis=0)
    win = np.hanning(n)

    def weights(y):
        return harmonic_powers((y * win)[None, :], np.array([400.0]), rate_hz=RATE, max_hz=RATE / 2 - 90.0,
                               window=win)[2]

    assert harmonic_evidence(weights(x))[0] == 1.0
    strongest = set(np.argsort(p[0])[-3:])                   # h1-h3 here: 600 and 1200 Hz lie among them
    for seed in range(3):
        noise = np.sqrt(p.max()) * 10 ** (-10 / 20) * np.random.default_rng(seed).standard_normal(n)
        w = weights(x + noise)[0]
        assert set(np.flatnonzero(w > LOST_WEIGHT)) == strongest, (seed, w)
        assert harmonic_evidence(w)[0] == 0.5
