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

Everything is batched over frames; frames have different harmonic counts,
handled by a 0/1 weight per harmonic slot.

References
----------
El-Jaroudi, A. & Makhoul, J. (1991). Discrete all-pole modeling. *IEEE
Trans. Signal Processing* 39(2), 411-423.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from livevowel.dsp.lpc import _toeplitz_index, _toeplitz_solve

__all__ = ["harmonic_powers", "dap", "dap_orders"]

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
#: Their weight in the fit (and the least weight any harmonic gets).
LOST_WEIGHT = 0.3

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


@functools.lru_cache(maxsize=16)
def _bin_index(n: int) -> np.ndarray:
    out = np.arange(n, dtype=np.float64)
    out.setflags(write=False)
    return out


def harmonic_powers(frames: np.ndarray, f0_hz: np.ndarray, *, rate_hz: float, max_hz: float,
                    nfft: int = 2048, search: float = 0.25, noise_floor: bool = True,
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
        Subtract the mean power of the valleys on either side of each
        harmonic (noise plus leakage; keeping at least 10 % of the peak) and
        weight each harmonic by its local SNR (full weight from 12 dB).
        Harmonics less than ``NOISE_DROP_DB`` above the floor
        (``NOISE_DROP_RESOLVED_DB`` where ``window`` is given and its leakage
        at F0 / 2 is below ``RESOLVED_LEAK_DB``) count as lost in noise: in
        the run above the last reliable harmonic they are taken to be
        ``LOST_BELOW_NOISE_DB`` under the floor (not below ``FLOOR_DB`` re the
        strongest harmonic), with weight ``LOST_WEIGHT``.

    Returns
    -------
    freq_hz, power, weight : ndarray, shape (n, M)
        ``M`` slots (the most harmonics any frame has); ``weight`` is 1 for a
        real harmonic, 0 for padding (whose power is 1 and frequency 0).
    """
    frames = np.asarray(frames, dtype=np.float64)
    n, big_n = frames.shape
    nfft = max(nfft, 1 << int(np.ceil(np.log2(big_n))))
    if n == 1:
        return _harmonic_powers_one(frames[0], float(np.asarray(f0_hz, dtype=np.float64).reshape(-1)[0]),
                                    float(rate_hz), float(max_hz), nfft, float(search), noise_floor, window)
    spec = np.abs(np.fft.rfft(frames, nfft, axis=1)) ** 2
    df = rate_hz / nfft
    f0 = np.asarray(f0_hz, dtype=np.float64)
    ok = np.isfinite(f0) & (f0 > 0)
    counts = np.where(ok, np.floor(max_hz / np.where(ok, f0, 1.0)), 0).astype(int)
    m = int(counts.max()) if n else 0
    if m == 0:
        z = np.zeros((n, 1))
        return z, np.ones((n, 1)), z
    k = np.arange(1, m + 1)
    centre = (k[None, :] * np.where(ok, f0, 0.0)[:, None]) / df          # bins
    half = np.maximum(1.0, search * np.where(ok, f0, 0.0) / df)[:, None]
    width = int(np.ceil(np.nanmax(np.where(ok, search * f0 / df, 1.0)))) + 1
    offs = np.arange(-width, width + 1)
    bins = np.rint(centre)[:, :, None] + offs[None, None, :]
    inside = (np.abs(bins - centre[:, :, None]) <= half[:, :, None]) & (bins >= 1) & (bins < spec.shape[1] - 1)
    b_idx = np.clip(bins, 1, spec.shape[1] - 2).astype(int)
    rows = np.arange(n)[:, None, None]
    vals = np.where(inside, spec[rows, b_idx], -np.inf)
    j = np.argmax(vals, axis=2)
    peak_bin = np.take_along_axis(b_idx, j[:, :, None], axis=2)[:, :, 0]
    p0 = spec[np.arange(n)[:, None], peak_bin]
    with np.errstate(divide="ignore", invalid="ignore"):
        lm = np.log(spec[np.arange(n)[:, None], peak_bin - 1] + 1e-300)
        l0 = np.log(p0 + 1e-300)
        lp = np.log(spec[np.arange(n)[:, None], peak_bin + 1] + 1e-300)
        den = lm - 2 * l0 + lp
        shift = np.where(den < 0, 0.5 * (lm - lp) / np.where(den < 0, den, -1.0), 0.0)
    shift = np.clip(shift, -0.5, 0.5)
    freq = (peak_bin + shift) * df
    snr_w = np.ones_like(p0)
    if noise_floor:
        # mean power in the middle of the valleys either side of each harmonic
        # (noise plus leakage; with the Gaussian taper leakage there is about
        # -48 dB at F0 = 300 Hz). Harmonics close to that floor are down-weighted
        # rather than trusted: weight = local SNR / 12 dB, between 0.05 and 1.
        vc = ((k[None, :] + 0.5) * np.where(ok, f0, 0.0)[:, None]) / df
        vhalf = np.maximum(1.0, 0.15 * np.where(ok, f0, 0.0) / df)[:, None]
        vb = np.rint(vc)[:, :, None] + offs[None, None, :]
        vin = (np.abs(vb - vc[:, :, None]) <= vhalf[:, :, None]) & (vb >= 0) & (vb < spec.shape[1])
        vidx = np.clip(vb, 0, spec.shape[1] - 1).astype(int)
        vv = np.where(vin, spec[rows, vidx], 0.0)
        valley = vv.sum(axis=2) / np.maximum(vin.sum(axis=2), 1)
        if window is not None:
            # remove what the taper leaks into the valley from the two
            # harmonics beside it (matters at low F0, where valleys are shallow)
            wspec = _window_power(np.asarray(window, dtype=np.float64), nfft)
            half_bins = 0.5 * np.where(ok, f0, 0.0) / df
            leak = np.interp(half_bins, _bin_index(len(wspec)), wspec)[:, None]
            nxt = np.concatenate([p0[:, 1:], p0[:, -1:]], axis=1)
            valley = np.maximum(valley - leak * (p0 + nxt), 0.0)
            drop_db = np.where(leak < 10.0 ** (RESOLVED_LEAK_DB / 10.0), NOISE_DROP_RESOLVED_DB, NOISE_DROP_DB)
        else:
            drop_db = NOISE_DROP_DB
        below = np.concatenate([valley[:, :1], valley[:, :-1]], axis=1)   # valley under the harmonic
        noise = 0.5 * (valley + below)
        with np.errstate(divide="ignore", invalid="ignore"):
            snr_db = 10.0 * np.log10(p0 / np.maximum(noise, 1e-300))
        snr_db[np.isnan(snr_db)] = 0.0
        clean = np.maximum(p0 - noise, 0.1 * p0)
        # noise-dominated harmonics: the voice there is somewhere below the
        # noise; assume it is LOST_BELOW_NOISE_DB under the local noise floor
        # (but not below FLOOR_DB re the strongest harmonic) and give it little
        # weight, rather than fitting the noise as a resonance
        top = np.max(np.where(k[None, :] <= counts[:, None], clean, 0.0), axis=1, keepdims=True)
        lost = snr_db < drop_db
        guess = np.maximum(noise * 10.0 ** (-LOST_BELOW_NOISE_DB / 10.0), top * 10.0 ** (FLOOR_DB / 10.0))
        # only the run of lost harmonics above the last reliable one (the band
        # where the voice has sunk into the noise) gets the guess; a lost
        # harmonic among reliable ones keeps its noise-subtracted power
        kk = np.broadcast_to(k[None, :], lost.shape)
        last_ok = np.max(np.where(~lost & (kk <= counts[:, None]), kk, 0), axis=1, keepdims=True)
        sunk = lost & (kk > last_ok)
        p0 = np.where(sunk, np.minimum(p0, guess),
                      np.where(lost, np.maximum(p0 - noise, top * 10.0 ** (FLOOR_DB / 10.0)), clean))
        snr_w = np.where(lost, LOST_WEIGHT, np.clip(snr_db / 12.0, LOST_WEIGHT, 1.0))
    weight = ((k[None, :] <= counts[:, None]) & (p0 > 0)).astype(np.float64) * snr_w
    power = np.where(weight > 0, p0, 1.0)
    freq = np.where(weight > 0, freq, 0.0)
    return freq, power, weight


def _harmonic_powers_one(frame: np.ndarray, f0: float, rate_hz: float, max_hz: float, nfft: int, search: float,
                         noise_floor: bool, window: np.ndarray | None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`harmonic_powers` for one frame (the streaming case), same steps on 1-D arrays."""
    if not (math.isfinite(f0) and f0 > 0) or math.floor(max_hz / f0) < 1:
        z = np.zeros((1, 1))
        return z, np.ones((1, 1)), z
    spec = np.fft.rfft(frame, nfft)
    spec = spec.real * spec.real + spec.imag * spec.imag
    n_bins = len(spec)
    df = rate_hz / nfft
    m = int(math.floor(max_hz / f0))
    k = np.arange(1, m + 1)
    centre = k * (f0 / df)
    half = max(1.0, search * f0 / df)
    width = int(math.ceil(search * f0 / df)) + 1
    offs = np.arange(-width, width + 1)
    bins = np.rint(centre)[:, None] + offs
    inside = (np.abs(bins - centre[:, None]) <= half) & (bins >= 1) & (bins < n_bins - 1)
    b_idx = np.clip(bins, 1, n_bins - 2).astype(np.intp)
    vals = np.where(inside, spec[b_idx], -np.inf)
    peak_bin = b_idx[np.arange(m), vals.argmax(axis=1)]
    p0 = spec[peak_bin]
    with np.errstate(divide="ignore", invalid="ignore"):
        lm = np.log(spec[peak_bin - 1] + 1e-300)
        l0 = np.log(p0 + 1e-300)
        lp = np.log(spec[peak_bin + 1] + 1e-300)
        den = lm - 2 * l0 + lp
        neg = den < 0
        shift = np.where(neg, 0.5 * (lm - lp) / np.where(neg, den, -1.0), 0.0)
    np.clip(shift, -0.5, 0.5, out=shift)
    freq = (peak_bin + shift) * df
    snr_w = 1.0
    if noise_floor:
        vc = (k + 0.5) * (f0 / df)
        vhalf = max(1.0, 0.15 * f0 / df)
        vb = np.rint(vc)[:, None] + offs
        vin = (np.abs(vb - vc[:, None]) <= vhalf) & (vb >= 0) & (vb < n_bins)
        vidx = np.clip(vb, 0, n_bins - 1).astype(np.intp)
        vv = np.where(vin, spec[vidx], 0.0)
        valley = vv.sum(axis=1) / np.maximum(vin.sum(axis=1), 1)
        if window is not None:
            wspec = _window_power(np.asarray(window, dtype=np.float64), nfft)
            leak = float(np.interp(0.5 * f0 / df, _bin_index(len(wspec)), wspec))
            nxt = np.concatenate([p0[1:], p0[-1:]])
            valley = np.maximum(valley - leak * (p0 + nxt), 0.0)
            drop_db = NOISE_DROP_RESOLVED_DB if leak < 10.0 ** (RESOLVED_LEAK_DB / 10.0) else NOISE_DROP_DB
        else:
            drop_db = NOISE_DROP_DB
        below = np.concatenate([valley[:1], valley[:-1]])
        noise = 0.5 * (valley + below)
        with np.errstate(divide="ignore", invalid="ignore"):
            snr_db = 10.0 * np.log10(p0 / np.maximum(noise, 1e-300))
        snr_db[np.isnan(snr_db)] = 0.0
        clean = np.maximum(p0 - noise, 0.1 * p0)
        top = max(float(clean.max()), 0.0)
        lost = snr_db < drop_db
        floor = top * 10.0 ** (FLOOR_DB / 10.0)
        guess = np.maximum(noise * 10.0 ** (-LOST_BELOW_NOISE_DB / 10.0), floor)
        reliable = np.flatnonzero(~lost)
        last_ok = int(k[reliable[-1]]) if len(reliable) else 0
        sunk = lost & (k > last_ok)
        p0 = np.where(sunk, np.minimum(p0, guess), np.where(lost, np.maximum(p0 - noise, floor), clean))
        snr_w = np.where(lost, LOST_WEIGHT, np.clip(snr_db / 12.0, LOST_WEIGHT, 1.0))
    weight = (p0 > 0) * snr_w
    live = weight > 0
    power = np.where(live, p0, 1.0)
    freq = np.where(live, freq, 0.0)
    return freq[None, :], power[None, :], np.asarray(weight, dtype=np.float64)[None, :]


def dap_orders(weight: np.ndarray, *, order: int, harmonics_per_parameter: float | None = None) -> np.ndarray:
    """Order of each frame's fit: ``order``, lowered in steps of 2 (by at most
    ``MAX_ORDER_DROP``, and not below 2) until the frame has at least
    ``harmonics_per_parameter`` (default ``HARMONICS_PER_PARAMETER``)
    harmonics per parameter (``M >= harmonics_per_parameter * (p + 1)``).
    ``weight`` is ``(n, M)`` from :func:`harmonic_powers`; returns ``(n,)`` ints."""
    h = HARMONICS_PER_PARAMETER if harmonics_per_parameter is None else float(harmonics_per_parameter)
    if not h > 0:
        raise ValueError(f"harmonics_per_parameter must be > 0, got {harmonics_per_parameter}")
    m = (np.asarray(weight) > 0).sum(axis=1)
    fit = 2 * np.floor((m / h - 1.0) / 2.0)
    low = max(min(2, int(order)), int(order) - MAX_ORDER_DROP)
    return np.clip(fit, low, int(order)).astype(np.int64)


def dap(freq_hz: np.ndarray, power: np.ndarray, weight: np.ndarray, *, order: int, rate_hz: float,
        iterations: int = 12, harmonics_per_parameter: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Discrete all-pole model of harmonic powers (El-Jaroudi & Makhoul 1991).

    Parameters
    ----------
    freq_hz, power, weight : ndarray, shape (n, M)
        From :func:`harmonic_powers`.
    order : int
        Highest model order p. Frames with few harmonics are fitted with a
        lower order (see :func:`dap_orders`); their coefficients are
        padded with zeros to ``p + 1`` (the same polynomial, with extra roots
        at z = 0).
    harmonics_per_parameter : float, optional
        See :func:`dap_orders` (default ``HARMONICS_PER_PARAMETER``).
    rate_hz : float
        Sampling rate, Hz.
    iterations : int
        Fixed-point iterations after the LPC start.

    Returns
    -------
    a : ndarray, shape (n, p + 1)
        Inverse filters with ``a[:, 0] == 1`` (rows with fewer than
        ``(p + 1) / 2`` harmonics keep the LPC start).
    ok : ndarray of bool, shape (n,)
        True where the iteration ran.
    """
    w = np.asarray(weight, dtype=np.float64)
    p = int(order)
    orders = dap_orders(w, order=p, harmonics_per_parameter=harmonics_per_parameter)
    if np.all(orders == p):
        return _dap_fixed(freq_hz, power, w, order=p, rate_hz=rate_hz, iterations=iterations)
    f = np.asarray(freq_hz, dtype=np.float64)
    pw = np.asarray(power, dtype=np.float64)
    a = np.zeros((len(w), p + 1))
    ok = np.zeros(len(w), dtype=bool)
    for q in np.unique(orders):
        rows = np.flatnonzero(orders == q)
        a_q, ok_q = _dap_fixed(f[rows], pw[rows], w[rows], order=int(q), rate_hz=rate_hz, iterations=iterations)
        a[rows, : q + 1] = a_q
        ok[rows] = ok_q
    return a, ok


def _dap_fixed(freq_hz: np.ndarray, power: np.ndarray, weight: np.ndarray, *, order: int, rate_hz: float,
               iterations: int) -> tuple[np.ndarray, np.ndarray]:
    """:func:`dap` with the same order for every frame."""
    w = np.asarray(weight, dtype=np.float64)
    n, m = w.shape
    p = int(order)
    if n == 1:
        return _dap_one(np.asarray(freq_hz, dtype=np.float64)[0], np.asarray(power, dtype=np.float64)[0], w[0],
                        p, float(rate_hz), int(iterations))
    omega = 2.0 * np.pi * np.asarray(freq_hz, dtype=np.float64) / rate_hz
    cnt = w.sum(axis=1)
    pw = np.asarray(power, dtype=np.float64) * w
    scale = np.where(cnt > 0, pw.sum(axis=1) / np.maximum(cnt, 1), 1.0)
    pw = pw / np.where(scale > 0, scale, 1.0)[:, None]
    lags = np.arange(p + 1)
    cosm = np.cos(lags[None, :, None] * omega[:, None, :])         # (n, p+1, M)
    r = np.einsum("nkm,nm->nk", cosm, pw) / np.maximum(cnt, 1)[:, None]
    r[:, 0] *= 1.0 + 1e-9
    a = _toeplitz_solve(r)
    ok = (w > 0).sum(axis=1) >= (p + 1) / 2.0
    if not ok.any():
        return a, ok
    sel = np.flatnonzero(ok)
    toe = r[sel][:, _toeplitz_index(p + 1)]                           # (n', p+1, p+1), fixed
    try:
        tinv = np.linalg.inv(toe)
    except np.linalg.LinAlgError:
        return a, np.zeros_like(ok)
    ws = w[sel]
    cos_s = cosm[sel]                                                # cos(k w_m), (n', p+1, M)
    if len(sel) == 1:
        # one frame (streaming): drop the padding slots, work on 1-D arrays
        live1 = ws[0] > 0
        cos_s = cos_s[:, :, live1]
        ws = ws[:, live1]
        om = omega[sel][:, live1]
        live = None
    else:
        om = omega[sel]
        live = np.concatenate([ws > 0, ws > 0], axis=1)[:, None, :]
    sin_s = np.sin(lags[None, :, None] * om[:, None, :])             # sin(k w_m)
    m_ = cos_s.shape[2]
    fwd = np.concatenate([cos_s, -sin_s], axis=2)                    # a @ fwd = [Re A, Im A]
    # h(-k) = 1/M sum_m w_m (Hr cos + Hi sin) with [Hr, Hi] = [ar, -ai] / |A|^2, and the
    # next coefficients are tinv @ h (then a[0] = 1, so the 1/M factor drops out):
    # fold the weights, the sign of Hi and tinv into one (2M, p+1) matrix per frame
    ws2 = np.concatenate([ws, -ws], axis=1)[:, :, None]
    back_t = np.concatenate([cos_s, sin_s], axis=2).transpose(0, 2, 1) * ws2     # (n', 2M, p+1)
    gmat = back_t @ tinv.transpose(0, 2, 1)
    aa = a[sel][:, None, :].copy()                                   # (n', 1, p+1)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if live is None:
            av, fw, gm = aa[0, 0], fwd[0], gmat[0]
            for _ in range(int(iterations)):
                ri = av @ fw                                         # [Re A, Im A] at the harmonics
                sq = ri * ri
                mag = sq[:m_] + sq[m_:]
                c = (ri / np.concatenate([mag, mag])) @ gm
                c0 = c[0]
                if c0 != 0 and np.isfinite(c).all():
                    av = c / c0
            a[sel[0]] = av
            return a, ok
        for _ in range(int(iterations)):
            # A(e^{jw}) = sum_k a_k e^{-jkw} = ar + j ai;  H = 1/A = (ar - j ai)/|A|^2
            ri = aa @ fwd                                            # (n', 1, 2M)
            sq = ri * ri
            mag = sq[:, :, :m_] + sq[:, :, m_:]
            q = np.where(live, ri / np.concatenate([mag, mag], axis=2), 0.0)
            c = q @ gmat                                             # (n', 1, p+1)
            nxt = c / c[:, :, :1]
            good = np.isfinite(nxt).all(axis=2, keepdims=True)     # also False where c[0] == 0
            aa = np.where(good, nxt, aa)
    a[sel] = aa[:, 0, :]
    return a, ok


def _dap_one(freq_hz: np.ndarray, power: np.ndarray, w: np.ndarray, p: int, rate_hz: float,
             iterations: int) -> tuple[np.ndarray, np.ndarray]:
    """:func:`dap` for one frame (the streaming case): the same equations on
    1-D arrays, padding slots dropped, in complex form. With
    ``E[k, m] = exp(-j k w_m)``: ``A_m = a @ E``, ``h = Re(E @ (w / A))`` and
    the update ``c = T^-1 h``, folded into ``c = Re((1 / A) @ G)`` with
    ``G = (w E^T) T^-T`` fixed (a[0] = 1 afterwards, so the 1/M factor drops out).
    """
    live = w > 0
    cnt = w.sum()
    pw = power * w
    scale = pw.sum() / max(cnt, 1) if cnt > 0 else 1.0
    pw = pw / (scale if scale > 0 else 1.0)
    wl = w[live]
    om = 2.0 * np.pi * freq_hz[live] / rate_hz
    e = np.exp(-1j * np.arange(p + 1)[:, None] * om[None, :])        # (p+1, M')
    r = (e.real @ pw[live]) / max(cnt, 1)
    r[0] *= 1.0 + 1e-9
    ok = np.array([int(live.sum()) >= (p + 1) / 2.0])
    if not ok[0]:
        return _toeplitz_solve(r[None, :]), ok
    try:
        tinv = np.linalg.inv(r[_toeplitz_index(p + 1)])
    except np.linalg.LinAlgError:
        return _toeplitz_solve(r[None, :]), np.zeros_like(ok)
    # the LPC start: T a = err e_0, so a is the first column of T^-1 scaled to a[0] = 1
    a = (tinv[:, 0] / tinv[0, 0])[None, :]
    if not (r[0] > 0 and np.isfinite(a).all()):
        return _toeplitz_solve(r[None, :]), np.zeros_like(ok)
    g = (e.T * wl[:, None]) @ tinv.T                                 # (M', p+1) complex
    av = a[0]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for _ in range(iterations):
            c = (1.0 / (av @ e) @ g).real
            c0 = c[0]
            # a non-finite or degenerate update would repeat for ever: keep the last good one
            if c0 == 0 or not math.isfinite(c @ c):
                break
            av = c / c0
    a[0] = av
    return a, ok
