"""Discrete all-pole modelling of harmonic spectra (for high-pitched voices).

When F0 is high the spectrum of a voiced frame is known only at the
harmonics ``k * F0``. Autocorrelation LPC matches the autocorrelation of the
whole (line) spectrum, which is aliased by the harmonic sampling, and its
poles drift towards strong harmonics. Discrete all-pole (DAP) modelling
(El-Jaroudi & Makhoul 1991) instead fits the all-pole model ``g^2 / |A|^2``
to the harmonic powers ``P_m`` at the harmonic frequencies ``w_m`` only, by
minimising the discrete Itakura-Saito distance::

    E = 1/M sum_m [ P_m / Phat_m - ln(P_m / Phat_m) - 1 ]

Setting the derivatives to zero gives ``sum_i a_i R(i - k) = g^2 h(-k)``,
``k = 0..p``, where ``R(j) = 1/M sum_m P_m cos(j w_m)`` is the
autocorrelation of the discrete spectrum and
``h(n) = 1/M sum_m Re(e^{j n w_m} / A(e^{j w_m}))`` is the impulse response of
the model "sampled" at the same frequencies. The equations are solved by the
fixed-point iteration of the paper: start from the autocorrelation-LPC
solution of ``R``, then repeatedly solve the Toeplitz system with the
right-hand side from the current model and renormalise ``a[0] = 1``.

In noise, harmonics that sink below the local noise floor carry no level,
only a bound: the harmonic is at most about as strong as the noise around
it (the "bounded" view of spectral values masked by noise, Cooke, Green,
Josifovski & Vizinho 2001). Frames with many harmonics fit such *censored*
harmonics that way: after a fit, each is set to the model's level there,
clipped to its bound, and the fit is repeated (an imputation in the manner of
the EM algorithm for censored data, Dempster, Laird & Rubin 1977), so the
model is held down where the noise is but not pulled to a guessed level.

Each frame is one call of a compiled kernel (:mod:`livevowel.dsp._jit`);
batches loop over frames and pad to the largest harmonic count, the
padding slots having weight 0. Live and offline analysis therefore run the
same arithmetic.

References
----------
El-Jaroudi, A. & Makhoul, J. (1991). Discrete all-pole modeling. *IEEE
Trans. Signal Processing* 39(2), 411-423.

Cooke, M., Green, P., Josifovski, L. & Vizinho, A. (2001). Robust automatic
speech recognition with missing and unreliable acoustic data. *Speech
Communication* 34(3), 267-285 (from memory).

Dempster, A. P., Laird, N. M. & Rubin, D. B. (1977). Maximum likelihood from
incomplete data via the EM algorithm. *J. Royal Statistical Society B*
39(1), 1-38 (from memory).
"""

from __future__ import annotations

import math

import numpy as np

from livevowel.dsp._jit import jit
from livevowel.dsp.lpc import _levinson_kernel

__all__ = ["harmonic_powers", "harmonic_evidence", "dap", "dap_orders"]

#: Harmonics less than this many dB above the local noise floor count as lost in noise ...
NOISE_DROP_DB = 8.0
#: ... or this many where the harmonics are resolved: where the taper's power
#: response midway between two harmonics (at F0 / 2 from each) is below
#: ``RESOLVED_LEAK_DB`` re its peak, the valleys hold noise only, and a
#: harmonic 8-12 dB above them is mostly noise (peak picking takes the largest
#: of the bins around ``k F0``). Where the harmonics overlap (low F0; the
#: 25 ms Gaussian taper leaks -11 dB at 50 Hz, i.e. F0 = 100 Hz) the valley
#: keeps some leakage after the correction below, the measured local SNR
#: understates the true one, and the lower threshold applies.
NOISE_DROP_RESOLVED_DB = 12.0
#: Leakage (dB re the taper's peak) at F0 / 2 below which harmonics count as resolved.
RESOLVED_LEAK_DB = -30.0
#: Level assumed for such harmonics, dB below the local noise floor ...
LOST_BELOW_NOISE_DB = 10.0
#: ... but not below this, dB re the strongest harmonic of the frame.
FLOOR_DB = -50.0
#: A harmonic's noise floor is the median of the valley powers (between
#: neighbouring harmonics) from the two beside it out to this many Hz
#: further on each side (``floor(NOISE_SPAN_HZ / F0)`` more valleys per side;
#: none from F0 = 351 Hz, where it is the mean of the two). One valley is a
#: few correlated bins, so the floor of two valleys scatters by several dB in
#: white noise; the median of up to eight is steadier and ignores a valley
#: filled by a neighbouring formant. Measured on the Peterson & Barney (1952)
#: vowels (from memory) from the project synthesiser, F0 100-250 Hz, three
#: seed sets of ``livevowel.benchmarks.dsp.accuracy``, median F1 error
#: clean / in 20 dB white noise: men 2.31 / 2.34 -> 2.28 / 2.21 %, women
#: 1.41 / 2.07 -> 1.37 / 1.70 %, children 1.18 / 1.75 -> 0.99 / 1.57 %
#: (F2 in noise 0.71, 0.57, 0.68 -> 0.70, 0.53, 0.70 %). A fixed run of 3
#: valleys per side at every F0 did worse for men at F0 300-400 Hz
#: (median F1 error 6.7 -> 7.3 % clean), hence the span in Hz.
NOISE_SPAN_HZ = 350.0
#: Their weight in the fit (and the least weight any harmonic gets).
LOST_WEIGHT = 0.3
#: Harmonic evidence of a frame (:func:`harmonic_evidence`): 0 with this many
#: measured harmonics or fewer ...
EVIDENCE_NONE = 2
#: ... 1 from this many (linear between). Two vowel resonances have four
#: parameters (frequency and bandwidth each): two or three measured levels do
#: not determine F1 and F2. Measured on the project's synthetic vowels in white
#: noise at 20 dB SNR, F0 350-400 Hz: back vowels keep 2-4 measured harmonics
#: (9-11 clean), and the fit then puts F1 and F2 on the first harmonics (a
#: man's /u/ at F0 400 Hz reads F1 395 and F2 800 Hz for 300 and 870;
#: Peterson & Barney 1952 means, from memory).
EVIDENCE_FULL = 4
#: The valley noise is measured twice: first with the leakage of the raw
#: harmonic peaks taken out, then with that of their noise-free part only
#: (peak minus the first floor). Peaks that are themselves noise otherwise
#: take their own leakage out of the noise, the floor reads low where the
#: harmonics have sunk, and noise peaks 8-10 dB above it pass as harmonics
#: (children's /u/ at F0 110 Hz in 20 dB white noise, one pass: "reliable"
#: harmonics at 1.5, 1.9, 2.5 and 7.9 kHz, 20-30 dB above the vowel's true
#: levels there). Measured on the Peterson & Barney (1952) vowels (from
#: memory) from the project synthesiser, ``livevowel.benchmarks.dsp.accuracy``
#: (``quick=False``, F0 100-250 Hz, 20 dB white noise), with the censoring
#: below: children's F2 frames > 20 % off 8.0 % with one pass, 0 with two.
#: (A second pass that dropped the leakage of lost harmonics altogether made
#: the floor read high next to strong ones: men's /ɔ/ at F0 100 Hz then lost
#: its F1-F2 harmonics, 65 % of frames merged.)
LEAK_PASSES = 2

#: Frames with at least this many harmonics (F0 below ~180 Hz for men,
#: ~200 Hz for women, ~290 Hz for children) treat a harmonic lost in noise as
#: *censored*: its power is not known, only bounded by the local noise floor
#: (or by its own peak, if lower); the fit may go anywhere below the bound
#: (see :func:`dap`). Before, such harmonics were given a guessed level (10 dB
#: under the floor above the last reliable harmonic, peak minus floor below
#: it), and the fit followed the guesses: the upper envelope of the noise
#: peaks filled the valley above a weak F2, which merged with F1 (children's
#: /ɔ/ and /u/ at F0 110-170 Hz, 85-100 % of their frames). With few
#: harmonics the bounds leave the model too free, so those frames keep the
#: guessed levels: censoring every frame, women's /ɔ/ and /u/ at F0 350-400 Hz
#: read F1 20-30 % off in most frames; from 20 harmonics, children at F0
#: 300-400 Hz had 12 % of frames > 20 % off in noise (2.8 % as before) and
#: men's /i/ at F0 240 Hz 15 %. Harmonics whose bound is under ``FLOOR_DB``
#: re the strongest one also keep the guess (the clean case: censoring a tail
#: 50 dB down moved children's clean median F2 error 0.28 -> 0.47 % at F0 170
#: Hz), and so do harmonics more than ``CENSOR_DROP_DB`` above the frame's
#: noise level (the median of all its valleys): next to a strong harmonic the
#: local floor holds that harmonic's leakage, and the first harmonic of a
#: clean /i/ (men's, F0 140 Hz, F1 270 Hz at 2 F0) was censored, which moved
#: F1 to 302 Hz (277 Hz with this condition; women's clean median F2 error at
#: F0 100-250 Hz 0.23 -> 0.21 %, as before censoring).
CENSOR_MIN_HARMONICS = 27
#: ... and a harmonic counts as lost there when it is less than this many dB
#: above the floor, resolved or not (the two-pass floor no longer reads low
#: between overlapping harmonics). 8 dB let noise peaks through (children's
#: /u/ at F0 110 Hz and /ɔ/ at 170 Hz: 42 and 35 % of frames > 20 % off in 20
#: dB noise); 12 dB measured about the same as 10.
CENSOR_DROP_DB = 10.0
#: Weight of a censored harmonic in the fit, and what it counts for in the
#: frame's order (:func:`dap_orders`; a bound says less than a measurement).
#: Measured as above (F0 100-250 Hz, median F2 error clean / 20 dB noise; two
#: rounds of imputation and 12 dB for resolved harmonics at the time): weight
#: 0.3: men 0.48 / 0.61 %, women 0.25 / 0.44 %, children 0.29 / 0.35 %; 1.0:
#: 0.55 / 0.64, 0.28 / 0.50, 0.31 / 0.51 %; 0.1: 0.50 / 0.60, 0.24 / 0.41,
#: 0.27 / 0.32 %. Counting censored harmonics fully kept order 12 where only
#: a few harmonics were measured, and F1 just above F0 sat between two
#: harmonics on a pole of ~0 Hz bandwidth (measured while every frame was
#: censored: women's /i/ at F0 240 Hz, 38 % of frames > 20 % off); counting
#: them 0.25 lowered the order of children's back vowels at F0 240 Hz too far
#: (/ɔ/: F1 and F2 merged in 85 % of frames).
CENSORED_WEIGHT = 0.1
CENSORED_COUNT = 0.5
#: Censored harmonics enter the first fit at this fraction of their bound ...
CENSORED_START = 0.1
#: ... then, up to ``IMPUTE_ROUNDS`` times, are set to the fitted model's
#: level (kept within ``CENSORED_LOW`` .. 1 of the bound) and the fit goes on
#: from there for ``iterations // IMPUTE_SPLIT`` more steps, until no
#: censored level moves by more than ``IMPUTE_SETTLED`` (relative). Measured
#: as above, women's median F2 error in 20 dB noise / clean: 2 rounds of the
#: full 20 steps 0.39 / 0.23 % (1.71 x); 4 rounds of 20 0.36 / 0.23 % (1.56
#: x) but offline analysis at ~105 x real time; 8 rounds of 5 with the
#: settling stop 0.36 / 0.23 % (1.58 x), ~130 x real time. Men and children
#: moved by 0.01 % or less. (With the frame-level condition above: 0.34 /
#: 0.21 %, 1.61 x.)
IMPUTE_ROUNDS = 8
IMPUTE_SPLIT = 4
IMPUTE_SETTLED = 0.02
CENSORED_LOW = 0.01

#: Default half-width of each harmonic's peak search, fraction of F0 (the engine uses it too).
HARMONIC_SEARCH = 0.25

#: The fit of a frame uses an order no higher than keeps at least this many
#: harmonics per model parameter (p coefficients plus the gain). With about
#: as many harmonics as parameters the all-pole model can pass through every
#: harmonic power and put poles anywhere between them (El-Jaroudi & Makhoul
#: 1991: the discrete fit is exact once M <= p + 1); at F0 350-400 Hz a
#: woman's 5500 Hz band holds only 13-15 harmonics for the 13 parameters of
#: order 12, and F1 locked onto a harmonic (e.g. /ɔ/ F1 590 Hz read as 696 Hz
#: = 2 F0 at F0 350 Hz). 1.4 rather than 1.5 keeps order 12 for a child's
#: 8000 Hz band at F0 400 Hz (19 harmonics): measured there on the Peterson &
#: Barney (1952) vowels (from memory) from the project synthesiser, order 10
#: merged F1 and F2 of back vowels (women's /ɔ/ and /u/ through the child
#: plan, as ``voice="auto"`` analyses them; children's in 20 dB noise:
#: 14.9 % of frames > 20 % off, 5.6 % with 1.4).
HARMONICS_PER_PARAMETER = 1.4
#: ... but by at most this much (two pole pairs): order 12 (women, children)
#: goes no lower than 8 (F1-F3 and one more resonance for the source and the
#: formants above), men's 14 no lower than 10. Measured on the Peterson &
#: Barney (1952) men's vowels (from memory) from the project synthesiser at
#: F0 170-240 Hz: a floor of 8 for men gave 3.0 % median F1 error clean and,
#: in 20 dB noise at F0 240 Hz, /u/ (F1 300 Hz) 45 % of frames > 20 % off;
#: a floor of 10: 2.5 % and none.
MAX_ORDER_DROP = 4


_WINDOW_POWER: dict[tuple[int, bytes], np.ndarray] = {}


def _window_power(window: np.ndarray, nfft: int) -> np.ndarray:
    """``|W(f)|^2 / |W(0)|^2`` of a taper on ``nfft // 2 + 1`` bins (cached: the engine uses a few tapers)."""
    key = (nfft, window.tobytes())
    got = _WINDOW_POWER.get(key)
    if got is None:
        got = np.abs(np.fft.rfft(window, nfft)) ** 2
        got = got / got[0]
        got.setflags(write=False)
        if len(_WINDOW_POWER) > 32:
            _WINDOW_POWER.clear()
        _WINDOW_POWER[key] = got
    return got


def harmonic_powers(frames: np.ndarray, f0_hz: np.ndarray, *, rate_hz: float, max_hz: float,
                    nfft: int = 2048, search: float = HARMONIC_SEARCH, noise_floor: bool = True,
                    window: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Power and frequency of each harmonic of windowed frames.

    Parameters
    ----------
    frames : ndarray, shape (n, N)
        Windowed (and pre-emphasised) frames.
    f0_hz : ndarray, shape (n,)
        F0 per frame in Hz (NaN: no harmonics).
    rate_hz : float
        Sampling rate, Hz.
    max_hz : float
        Highest harmonic frequency used, Hz.
    nfft : int
        FFT length (zero padding), samples.
    search : float
        Each harmonic's peak is the largest bin within ``+-search * F0`` of
        ``k * F0``; its frequency is refined by a parabola through the log power.
    window : ndarray, optional
        The taper the frames were multiplied by; its leakage into the
        valleys is then discounted from the noise estimate.
    noise_floor : bool
        Subtract the noise floor, the median power of the valleys between
        harmonics within ``NOISE_SPAN_HZ`` beyond the two on either side of
        each harmonic (noise plus leakage; keeping at least 10 % of the peak), and
        weight each harmonic by its local SNR (full weight from 12 dB).
        The valley leakage is taken out in ``LEAK_PASSES`` passes (the
        second with the noise-free part of each peak). Harmonics less than
        ``NOISE_DROP_DB`` above the floor (``NOISE_DROP_RESOLVED_DB`` where
        ``window`` is given and its leakage at F0 / 2 is below
        ``RESOLVED_LEAK_DB``; ``CENSOR_DROP_DB`` in frames with at least
        ``CENSOR_MIN_HARMONICS`` harmonics) count as lost in noise. In frames
        with at least ``CENSOR_MIN_HARMONICS`` harmonics they are censored:
        ``power`` is the bound ``min(peak, floor)`` and ``weight`` is
        ``-CENSORED_WEIGHT`` (unless the bound is under ``FLOOR_DB`` re the
        strongest harmonic, or the peak is more than ``CENSOR_DROP_DB``
        above the median of all the frame's valleys). Otherwise, in the run above the last reliable
        harmonic they are taken to be ``LOST_BELOW_NOISE_DB`` under the floor
        (not below ``FLOOR_DB`` re the strongest harmonic), below it at peak
        minus floor, with weight ``LOST_WEIGHT``.

    Returns
    -------
    freq_hz, power, weight : ndarray, shape (n, M)
        ``M`` slots (the most harmonics any frame has); ``weight`` is 1 for a
        real harmonic, 0 for padding (whose power is 1 and frequency 0), and
        negative for a censored one (``power`` is then an upper bound and
        ``-weight`` its weight; :func:`dap` reads it so).
    """
    frames = np.asarray(frames, dtype=np.float64)
    if frames.ndim != 2:
        raise ValueError(f"frames must have shape (n, N), got {frames.shape}")
    n, big_n = frames.shape
    nfft = max(int(nfft), 1 << int(np.ceil(np.log2(max(big_n, 1)))))
    f0 = np.broadcast_to(np.asarray(f0_hz, dtype=np.float64).reshape(-1), (n,))
    rate, top_hz = float(rate_hz), float(max_hz)
    ok = np.isfinite(f0) & (f0 > 0)
    counts = np.where(ok, np.floor(top_hz / np.where(ok, f0, 1.0)), 0).astype(np.int64)
    m = int(counts.max()) if n else 0
    if m == 0:
        z = np.zeros((n, 1))
        return z, np.ones((n, 1)), z
    spec = np.fft.rfft(frames, nfft, axis=1)
    spec = spec.real * spec.real + spec.imag * spec.imag
    wspec = _window_power(np.asarray(window, dtype=np.float64), nfft) if window is not None else _NO_WINDOW
    freq = np.zeros((n, m))
    power = np.ones((n, m))
    weight = np.zeros((n, m))
    f0c = np.require(f0, requirements="CW")
    _harmonics_rows_kernel(spec, f0c, rate / nfft, counts, float(search), bool(noise_floor), wspec, freq, power, weight)
    return freq, power, weight


@jit
def _harmonics_rows_kernel(spec, f0, df, counts, search, noise_floor, wspec, freq, power, weight):  # pragma: no cover
    """:func:`_harmonics_kernel` for every row with harmonics (one call for a batch)."""
    for i in range(spec.shape[0]):
        if counts[i] > 0:
            _harmonics_kernel(spec[i], f0[i], df, counts[i], search, noise_floor, wspec, freq[i], power[i], weight[i])


_NO_WINDOW = np.zeros(0)
_NO_WINDOW.setflags(write=False)      # read-only like _window_power's arrays: one compiled signature
_NOISE_GUESS = 10.0 ** (-LOST_BELOW_NOISE_DB / 10.0)
_FLOOR = 10.0 ** (FLOOR_DB / 10.0)
_RESOLVED_LEAK = 10.0 ** (RESOLVED_LEAK_DB / 10.0)


@jit
def _harmonics_kernel(spec, f0, df, m, search, noise_floor, wspec, freq, power, weight):  # pragma: no cover - compiled
    """One frame of :func:`harmonic_powers`: fills ``freq, power, weight[:m]`` from the power spectrum ``spec``."""
    n_bins = spec.shape[0]
    half = max(1.0, search * f0 / df)
    width = int(math.ceil(search * f0 / df)) + 1
    p0 = np.empty(m)
    fr = np.empty(m)
    for j in range(m):
        centre = (j + 1) * (f0 / df)
        c = np.rint(centre)
        best_val = -np.inf
        best_bin = -1
        for o in range(-width, width + 1):
            b = c + o
            bi = int(min(max(b, 1.0), n_bins - 2.0))
            if best_bin < 0:
                best_bin = bi                   # argmax of all -inf is the first slot
            if abs(b - centre) <= half and b >= 1 and b < n_bins - 1:
                v = spec[bi]
                if v > best_val:
                    best_val = v
                    best_bin = bi
        pk = spec[best_bin]
        lm = math.log(spec[best_bin - 1] + 1e-300)
        l0 = math.log(pk + 1e-300)
        lp = math.log(spec[best_bin + 1] + 1e-300)
        den = lm - 2.0 * l0 + lp
        shift = 0.5 * (lm - lp) / den if den < 0 else 0.0
        shift = min(max(shift, -0.5), 0.5)
        fr[j] = (best_bin + shift) * df
        p0[j] = pk
    snr_w = np.ones(m)
    if noise_floor:
        vhalf = max(1.0, 0.15 * f0 / df)
        valley = np.empty(m)
        for j in range(m):
            vc = (j + 1.5) * (f0 / df)
            c = np.rint(vc)
            tot = 0.0
            cnt = 0
            for o in range(-width, width + 1):
                b = c + o
                if abs(b - vc) <= vhalf and b >= 0 and b < n_bins:
                    tot += spec[int(b)]
                    cnt += 1
            valley[j] = tot / max(cnt, 1)
        drop_db = NOISE_DROP_DB
        leak = 0.0
        if wspec.shape[0] > 0:
            # what the taper leaks into the valley from the two harmonics beside it
            xq = 0.5 * f0 / df
            last = wspec.shape[0] - 1
            if xq >= last:
                leak = wspec[last]
            elif xq <= 0:
                leak = wspec[0]
            else:
                i0 = int(math.floor(xq))
                leak = (wspec[i0 + 1] - wspec[i0]) * (xq - i0) + wspec[i0]
            if leak < _RESOLVED_LEAK:
                drop_db = NOISE_DROP_RESOLVED_DB
        if m >= CENSOR_MIN_HARMONICS:
            drop_db = CENSOR_DROP_DB
        src = p0.copy()          # harmonic powers whose leakage is taken out of the valleys
        vc_ = np.empty(m)
        noise = np.empty(m)
        snr_db = np.empty(m)
        span = int(NOISE_SPAN_HZ / f0)
        buf = np.empty(2 * span + 2)
        passes = LEAK_PASSES if leak > 0 else 1
        for ps in range(passes):
            for j in range(m):
                nxt = src[j + 1] if j + 1 < m else src[m - 1]
                vc_[j] = max(valley[j] - leak * (src[j] + nxt), 0.0)
            for j in range(m):
                # valleys j - 1 - span .. j + span (valley j - 1 and j flank harmonic j), median
                lo = max(j - 1 - span, 0)
                hi = min(j + span, m - 1)
                cnt = 0
                for q in range(lo, hi + 1):
                    v = vc_[q]
                    t = cnt
                    while t > 0 and buf[t - 1] > v:
                        buf[t] = buf[t - 1]
                        t -= 1
                    buf[t] = v
                    cnt += 1
                noise[j] = buf[cnt // 2] if cnt % 2 else 0.5 * (buf[cnt // 2 - 1] + buf[cnt // 2])
            for j in range(m):
                # next pass: only the harmonic part of each peak leaks into the valleys
                src[j] = max(p0[j] - noise[j], 0.0)
        for j in range(m):
            # the local SNR against the last pass's floor
            sd = 10.0 * math.log10(p0[j] / max(noise[j], 1e-300)) if p0[j] > 0 else -np.inf
            if math.isnan(sd):
                sd = 0.0
            snr_db[j] = sd
        top = 0.0
        last_ok = 0
        for j in range(m):
            top = max(top, max(p0[j] - noise[j], 0.1 * p0[j]))
            if not snr_db[j] < drop_db:
                last_ok = j + 1
        floor = top * _FLOOR
        # the frame's noise level: median of all its valleys
        allv = np.sort(vc_)
        frame_noise = allv[m // 2] if m % 2 else 0.5 * (allv[m // 2 - 1] + allv[m // 2])
        frame_lost = frame_noise * 10.0 ** (drop_db / 10.0)
        for j in range(m):
            if snr_db[j] < drop_db:
                bound = min(p0[j], noise[j])
                if m >= CENSOR_MIN_HARMONICS and bound > floor and p0[j] < frame_lost:
                    snr_w[j] = -CENSORED_WEIGHT     # censored: at most ``bound``
                    p0[j] = bound
                else:
                    if j + 1 > last_ok:             # sunk into the noise above the last reliable harmonic
                        p0[j] = min(p0[j], max(noise[j] * _NOISE_GUESS, floor))
                    else:
                        p0[j] = max(p0[j] - noise[j], floor)
                    snr_w[j] = LOST_WEIGHT
            else:
                p0[j] = max(p0[j] - noise[j], 0.1 * p0[j])
                snr_w[j] = min(max(snr_db[j] / 12.0, LOST_WEIGHT), 1.0)
    for j in range(m):
        w = snr_w[j] if p0[j] > 0 else 0.0
        weight[j] = w
        if w != 0:
            power[j] = p0[j]
            freq[j] = fr[j]
        else:
            power[j] = 1.0
            freq[j] = 0.0


def dap_orders(weight: np.ndarray, *, order: int, harmonics_per_parameter: float | None = None) -> np.ndarray:
    """Order of each frame's fit: ``order``, lowered in steps of 2 (by at most
    ``MAX_ORDER_DROP``, and not below 2) until the frame has at least
    ``harmonics_per_parameter`` (default ``HARMONICS_PER_PARAMETER``)
    harmonics per parameter (``M >= harmonics_per_parameter * (p + 1)``;
    a censored harmonic, ``weight < 0``, counts ``CENSORED_COUNT``).
    ``weight`` is ``(n, M)`` from :func:`harmonic_powers`; returns ``(n,)`` ints."""
    h = _check_hpp(harmonics_per_parameter)
    w = np.asarray(weight)
    m = (w > 0).sum(axis=1) + CENSORED_COUNT * (w < 0).sum(axis=1)
    return np.array([_fit_order(float(mi), int(order), h) for mi in m], dtype=np.int64)


def _check_hpp(harmonics_per_parameter: float | None) -> float:
    h = HARMONICS_PER_PARAMETER if harmonics_per_parameter is None else float(harmonics_per_parameter)
    if not h > 0:
        raise ValueError(f"harmonics_per_parameter must be > 0, got {harmonics_per_parameter}")
    return h


@jit
def _fit_order(m, p, h):  # pragma: no cover - compiled
    """:func:`dap_orders` of one frame with ``m`` harmonics."""
    fit = 2 * math.floor((m / h - 1.0) / 2.0)
    low = max(min(2, p), p - MAX_ORDER_DROP)
    return int(min(max(fit, low), p))


def dap(freq_hz: np.ndarray, power: np.ndarray, weight: np.ndarray, *, order: int, rate_hz: float,
        iterations: int = 12, harmonics_per_parameter: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Discrete all-pole model of harmonic powers (El-Jaroudi & Makhoul 1991).

    Parameters
    ----------
    freq_hz, power, weight : ndarray, shape (n, M)
        From :func:`harmonic_powers`. A slot with ``weight < 0`` is
        censored: its ``power`` is only an upper bound. It enters at
        ``CENSORED_START`` of the bound; after each fit it is set to the
        model's level there, kept within ``CENSORED_LOW`` .. 1 of the bound,
        and the fit goes on from the last model (up to ``IMPUTE_ROUNDS``
        times, ``iterations // IMPUTE_SPLIT`` steps each, until the levels
        settle to ``IMPUTE_SETTLED``).
    order : int
        Highest model order p. Frames with few harmonics are fitted with a
        lower order (see :func:`dap_orders`); their coefficients are
        padded with zeros to ``p + 1`` (the same polynomial, with extra roots
        at z = 0).
    rate_hz : float
        Sampling rate, Hz.
    iterations : int
        Fixed-point iterations after the LPC start.
    harmonics_per_parameter : float, optional
        See :func:`dap_orders` (default ``HARMONICS_PER_PARAMETER``).

    Returns
    -------
    a : ndarray, shape (n, p + 1)
        Inverse filters with ``a[:, 0] == 1`` (rows with fewer than
        ``(p + 1) / 2`` harmonics keep the LPC start).
    ok : ndarray of bool, shape (n,)
        True where the iteration ran.
    """
    w = np.asarray(weight, dtype=np.float64)
    if w.ndim != 2:
        raise ValueError(f"weight must have shape (n, M), got {w.shape}")
    n, m = w.shape
    # writeable C arrays: one compiled signature for every caller
    f, pw, w = (np.require(np.asarray(v, dtype=np.float64), requirements="CW") for v in (freq_hz, power, w))
    if f.shape != (n, m) or pw.shape != (n, m):
        raise ValueError(f"freq_hz, power and weight must have the same shape (n, M), got {f.shape}, {pw.shape}, {w.shape}")
    p = int(order)
    if p < 1:
        raise ValueError(f"order must be at least 1, got {order!r}")
    h = _check_hpp(harmonics_per_parameter)
    a = np.empty((n, p + 1))
    ok = np.zeros(n, dtype=bool)
    _dap_rows_kernel(f, pw, w, p, float(rate_hz), int(iterations), h, a, ok)
    return a, ok


@jit
def _dap_rows_kernel(freq_hz, power, w, p, rate_hz, iterations, h, a, ok):  # pragma: no cover - compiled
    """:func:`_dap_order_kernel` for every row (one call for a batch)."""
    for i in range(w.shape[0]):
        ok[i] = _dap_order_kernel(freq_hz[i], power[i], w[i], p, rate_hz, iterations, h, a[i])


@jit
def _dap_order_kernel(freq_hz, power, w, p, rate_hz, iterations, h, a):  # pragma: no cover - compiled
    """One frame of :func:`dap`: the fit at the frame's order (:func:`dap_orders`), zero-padded to ``p + 1``."""
    live = 0.0
    for j in range(w.shape[0]):
        if w[j] > 0:
            live += 1.0
        elif w[j] < 0:
            live += CENSORED_COUNT
    q = _fit_order(live, p, h)
    a[:] = 0.0
    return _dap_kernel(freq_hz, power, w, q, rate_hz, iterations, a[:q + 1])


@jit
def _toeplitz_inverse(r, out):  # pragma: no cover - compiled
    """Inverse of the symmetric Toeplitz matrix ``T[i, j] = r[|i - j|]`` (n, n) into ``out``.

    The first column ``g`` of ``T^-1`` is the Levinson-Durbin predictor of
    ``r`` over its prediction error; the rest follows from Trench's (1964)
    recursion ``B[i+1, j+1] = B[i, j] + (g[i+1] g[j+1] - g[n-1-i] g[n-1-j]) / g[0]``
    (the Gohberg-Semencul form of the inverse): O(n^2) operations against
    O(n^3) for elimination. False when ``T`` is not positive definite to
    working precision, taken as a prediction error at or below ``1e-14 r[0]``
    (the prediction errors are the pivots of its triangular factorisation).
    Near that edge (condition numbers above about 1e15) the test is as rough
    as any pivot test in double precision; DAP's matrices, whose diagonal it
    raises by ``1e-9 r[0]``, stay far from it.

    Trench, W. F. (1964). An algorithm for the inversion of finite Toeplitz
    matrices. *J. SIAM* 12(3), 515-522 (from memory).
    """
    n = r.shape[0]
    a = np.empty(n)
    # the prediction errors fall with the order, so the last one is the smallest pivot
    err = _levinson_kernel(r, a)
    if not err > 1e-14 * r[0]:
        return False
    for j in range(n):
        g = a[j] / err
        out[0, j] = g
        out[j, 0] = g
    g0 = out[0, 0]
    for i in range(n - 1):
        for j in range(i, n - 1):
            v = out[i, j] + (out[0, i + 1] * out[0, j + 1] - out[0, n - 1 - i] * out[0, n - 1 - j]) / g0
            out[i + 1, j + 1] = v
            out[j + 1, i + 1] = v
    return True


@jit
def _inverse_filter_at(a, cosm, sinm, sr, si):  # pragma: no cover - compiled
    """``A_m = sum_k a_k e^{-j k w_m} = sr + j si`` at every frequency ``m`` (summed in k order),
    from ``cosm[k, m] = cos(k w_m)`` and ``sinm[k, m] = sin(k w_m)``."""
    sr[:] = 0.0
    si[:] = 0.0
    for k in range(a.shape[0]):
        ak = a[k]
        for j in range(sr.shape[0]):
            sr[j] += ak * cosm[k, j]
            si[j] -= ak * sinm[k, j]


@jit
def _dap_kernel(freq_hz, power, w, p, rate_hz, iterations, a):  # pragma: no cover - compiled
    """One frame of :func:`dap` into ``a`` (p + 1); returns whether the iteration ran.

    With ``E[k, m] = exp(-j k w_m)``: ``A_m = a @ E``, ``h = Re(E @ (w / A))``
    and the update ``c = T^-1 h``, then ``a = c / c[0]`` (so the 1/M factor
    of the paper drops out). ``T`` is the Toeplitz matrix of ``R``.

    Harmonics with ``w < 0`` are censored (see :func:`dap`); ``T`` is
    rebuilt for each round of imputation. The model's level at a
    harmonic is ``g^2 / |A_m|^2`` with the gain that minimises the weighted
    Itakura-Saito distance, ``g^2 = sum w P |A|^2 / sum w``.
    """
    m_all = w.shape[0]
    live = 0
    n_cens = 0
    cnt = 0.0
    psum = 0.0
    for j in range(m_all):
        if w[j] != 0:
            live += 1
            cnt += abs(w[j])
            if w[j] > 0:
                psum += power[j] * w[j]
            else:
                n_cens += 1
                psum += power[j] * CENSORED_START * (-w[j])
    scale = psum / max(cnt, 1e-300) if cnt > 0 else 1.0
    if not scale > 0:
        scale = 1.0
    om = np.empty(live)
    wl = np.empty(live)
    pv = np.empty(live)      # power / scale: measured, or the current guess of a censored one
    cap = np.empty(live)     # bound / scale (censored), else -1
    q = 0
    for j in range(m_all):
        if w[j] != 0:
            om[q] = 2.0 * math.pi * freq_hz[j] / rate_hz
            wl[q] = abs(w[j])
            if w[j] > 0:
                pv[q] = power[j] / scale
                cap[q] = -1.0
            else:
                cap[q] = power[j] / scale
                pv[q] = cap[q] * CENSORED_START
            q += 1
    cnt = max(cnt, 1e-300)
    # cos(k w_m), sin(k w_m) by complex rotation (error ~k ulp), in both layouts:
    # [k, m] for A = a @ E (vectorised over m) and [m, k] for h (vectorised over k)
    cosm = np.empty((p + 1, live))
    sinm = np.empty((p + 1, live))
    cost = np.empty((live, p + 1))
    sint = np.empty((live, p + 1))
    for j in range(live):
        c1 = math.cos(om[j])
        s1 = math.sin(om[j])
        ck, sk = 1.0, 0.0
        for k in range(p + 1):
            cosm[k, j] = ck
            sinm[k, j] = sk
            cost[j, k] = ck
            sint[j, k] = sk
            ck, sk = ck * c1 - sk * s1, sk * c1 + ck * s1
    r = np.zeros(p + 1)
    tinv = np.empty((p + 1, p + 1))
    h = np.empty(p + 1)
    c = np.empty(p + 1)
    ar = np.empty(live)
    ai = np.empty(live)
    sr = np.empty(live)
    si = np.empty(live)
    rounds = IMPUTE_ROUNDS if n_cens > 0 else 0
    for rnd in range(rounds + 1):
        r[:] = 0.0
        for j in range(live):
            pj = pv[j] * wl[j]
            for k in range(p + 1):
                r[k] += cost[j, k] * pj
        for k in range(p + 1):
            r[k] /= cnt
        r[0] *= 1.0 + 1e-9
        if rnd == 0:
            if not live >= (p + 1) / 2.0:
                _levinson_kernel(r, a)
                return False
        if not _toeplitz_inverse(r, tinv):
            if rnd == 0:
                _levinson_kernel(r, a)
                return False
            break                               # keep the last round's model
        if rnd == 0:
            # the LPC start: T a = err e_0, so a is the first column of T^-1 scaled to a[0] = 1
            for k in range(p + 1):
                a[k] = tinv[k, 0] / tinv[0, 0]
        n_it = iterations if rnd == 0 else max(1, iterations // IMPUTE_SPLIT)
        for _ in range(n_it):
            _inverse_filter_at(a, cosm, sinm, sr, si)
            for j in range(live):
                mag = sr[j] * sr[j] + si[j] * si[j]
                ar[j] = wl[j] * sr[j] / mag
                ai[j] = wl[j] * si[j] / mag
            # h_k = Re(sum_m w_m e_km / A_m), e = cos - j sin, w/A = w (ar - j ai) / |A|^2; in m order for every k
            h[:] = 0.0
            for j in range(live):
                arj, aij = ar[j], ai[j]
                for k in range(p + 1):
                    h[k] += arj * cost[j, k] - aij * sint[j, k]
            good = True
            for k in range(p + 1):
                acc = 0.0
                for j in range(p + 1):
                    acc += tinv[k, j] * h[j]
                c[k] = acc
                if not math.isfinite(acc):
                    good = False
            # a non-finite or degenerate update would repeat for ever: keep the last good one
            if not good or c[0] == 0.0:
                break
            for k in range(p + 1):
                a[k] = c[k] / c[0]
        if rnd == rounds:
            break
        # censored harmonics: the model's level there (gain by the weighted Itakura-Saito
        # optimum g^2 = sum w P |A|^2 / sum w), but not above the bound
        _inverse_filter_at(a, cosm, sinm, sr, si)
        g2 = 0.0
        for j in range(live):
            ar[j] = sr[j] * sr[j] + si[j] * si[j]
            g2 += wl[j] * pv[j] * ar[j]
        g2 /= cnt
        if not (g2 > 0 and math.isfinite(g2)):
            break
        moved = 0.0
        for j in range(live):
            if cap[j] >= 0:
                v = min(max(g2 / max(ar[j], 1e-300), cap[j] * CENSORED_LOW), cap[j])
                moved = max(moved, abs(v - pv[j]) / pv[j])
                pv[j] = v
        if moved < IMPUTE_SETTLED:
            break
    return True


@jit
def _harmonic_dap_kernel(spec, f0, df, m, search, noise_floor, wspec, p, rate_hz, iterations, h, a):  # pragma: no cover
    """:func:`harmonic_powers` then :func:`dap` for one frame's power spectrum, in one compiled call;
    returns the frame's :func:`harmonic_evidence`."""
    freq = np.zeros(m)
    power = np.ones(m)
    weight = np.zeros(m)
    _harmonics_kernel(spec, f0, df, m, search, noise_floor, wspec, freq, power, weight)
    _dap_order_kernel(freq, power, weight, p, rate_hz, iterations, h, a)
    return _evidence_kernel(weight)


@jit
def _evidence_kernel(weight):  # pragma: no cover - compiled
    """:func:`harmonic_evidence` of one frame's weights."""
    n = 0
    for j in range(weight.shape[0]):
        if weight[j] > LOST_WEIGHT:
            n += 1
    return min(max((n - EVIDENCE_NONE) / (EVIDENCE_FULL - EVIDENCE_NONE), 0.0), 1.0)


def harmonic_evidence(weight: np.ndarray) -> np.ndarray:
    """How well each frame's measured harmonics determine F1 and F2, 0..1.

    Counts the harmonics measured above the noise (weight above
    ``LOST_WEIGHT``: not lost, not censored, not padding) and maps the count
    linearly from 0 at ``EVIDENCE_NONE`` to 1 at ``EVIDENCE_FULL`` (the
    value the engine's compiled DAP step returns). The engine multiplies a
    frame's confidence by it where F1 or F2 lies on a harmonic, so that a fit
    the harmonics cannot support (a high voice in noise) shows no dot rather
    than a wrong one.

    Parameters
    ----------
    weight : ndarray, shape (n, M) or (M,)
        Harmonic weights from :func:`harmonic_powers`.

    Returns
    -------
    ndarray, shape (n,)
    """
    w = np.asarray(weight, dtype=np.float64)
    if w.ndim == 1:
        w = w[np.newaxis, :]
    if w.ndim != 2:
        raise ValueError(f"weight must have shape (n, M), got {w.shape}")
    return np.array([_evidence_kernel(np.ascontiguousarray(row)) for row in w])
