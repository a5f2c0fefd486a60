"""Linear prediction of frames and formant candidates from the predictor roots.

Every function works on a batch of frames, a 2-D array ``(n_frames, N)`` of
samples (any consistent amplitude unit; full scale 1.0 in livevowel), and is
vectorised over frames: the only Python loops run over the prediction order.

Sign convention (as in scipy.signal and most texts): the inverse filter is
``A(z) = 1 + a[1] z^-1 + ... + a[p] z^-p`` and the prediction of sample ``n``
is ``-sum_k a[k] x[n-k]``; the all-pole model of the frame is ``g / A(z)``.

Methods
-------
* autocorrelation + Levinson-Durbin (Makhoul 1975; Levinson 1947, Durbin 1960):
  always stable, needs a tapered analysis window, biased towards harmonics
  at high F0.
* Burg (Burg 1967/1975; Makhoul 1975): always stable, no window needed,
  good on short frames.
* weighted linear prediction with short-time-energy weighting (Ma, Kamp &
  Willems 1993; Alku, Pohjalainen, Vainio, Laukkanen & Story 2013) and its
  stabilised form SWLP (Magi, Pohjalainen, Bäckström & Alku 2009), which
  down-weights the samples near the main glottal excitation and so reduces
  the pull of F1 towards a harmonic at high F0.

Choosing for high voices (measured, see tests/test_lpc.py and ``livevowel
bench --only dsp``): on pulse-train vowels through known all-pole filters
(women's and children's /ɑ/ and /i/, F0 200-400 Hz, 10 kHz, order 12) the
median F1 error was 10.9 % for autocorrelation LPC, 3.7 % for plain WLP and
6.8 % for SWLP; on the project's Klatt synthesiser at F0 300-400 Hz about
7.7 %, 5-6 % and 6-6.5 % (women, 11 kHz). Plain WLP is the most accurate for
formant picking; its rare unstable roots do no harm there
(:func:`formant_candidates` mirrors them inside the unit circle). SWLP is
the choice where a stable filter matters. SWLP on a noise-excited AR
process is biased (a few per cent high in frequency, wider bandwidths): the
price of the contraction that makes it stable.

Formant candidates come from the roots of ``A(z)``: a root ``z = r e^{j w}``
with ``w > 0`` gives frequency ``w * rate / (2 pi)`` and 3-dB bandwidth
``-ln(r) * rate / pi`` (e.g. Markel & Gray 1976; Rabiner & Schafer 1978).
"""

from __future__ import annotations

import functools
import math

import numpy as np

from livevowel.dsp._jit import jit
from livevowel.dsp.framing import as_frames as _frames_2d
from livevowel.dsp.framing import float_rows

__all__ = [
    "autocorrelation",
    "lag_window",
    "levinson_durbin",
    "burg",
    "ste_weights",
    "weighted_lpc",
    "lpc",
    "METHODS",
    "polynomial_roots",
    "formant_candidates",
]

#: Methods accepted by :func:`lpc`.
METHODS: tuple[str, ...] = ("autocorrelation", "burg", "weighted")


# ---------------------------------------------------------------------------
# validation helpers (frames are checked by livevowel.dsp.framing.as_frames)


def _check_order(order, n_samples: int) -> int:
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)):
        raise ValueError(f"order must be a whole number, got {order!r}")
    order = int(order)
    if order < 1:
        raise ValueError(f"order must be at least 1, got {order}")
    if order >= n_samples:
        raise ValueError(f"order {order} needs frames longer than {order} samples, got {n_samples}")
    return order


def _check_rate(rate_hz) -> float:
    try:
        rate = float(rate_hz)
    except (TypeError, ValueError):
        raise ValueError(f"rate_hz must be a number in Hz, got {rate_hz!r}") from None
    if not np.isfinite(rate) or rate <= 0:
        raise ValueError(f"rate_hz must be positive and finite, got {rate_hz!r}")
    return rate


@functools.lru_cache(maxsize=32)
def _named_window(name: str, n: int) -> np.ndarray:
    w = {"hamming": np.hamming, "hann": np.hanning, "hanning": np.hanning, "blackman": np.blackman}[name](n)
    w.setflags(write=False)
    return w


def _window(name, n: int) -> np.ndarray | None:
    if name is None or (isinstance(name, str) and name in ("none", "rect", "rectangular", "boxcar")):
        return None
    if isinstance(name, str):
        if name in ("hamming", "hann", "hanning", "blackman"):
            return _named_window(name, n)
        raise ValueError(f"unknown window {name!r}; use 'hamming', 'hann', 'blackman', None or an array")
    w = np.asarray(name, dtype=np.float64)
    if w.shape != (n,):
        raise ValueError(f"window array must have shape ({n},), got {w.shape}")
    return w


# ---------------------------------------------------------------------------
# autocorrelation method


def autocorrelation(frames, *, order: int, lag_window_hz: float | None = None,
                    rate_hz: float | None = None, white_noise_correction: float = 0.0) -> np.ndarray:
    """Biased autocorrelation of each frame at lags ``0..order``.

    ``r[i, k] = sum_n x[i, n] x[i, n + k]`` (no normalisation by N), the
    autocorrelation used by the autocorrelation method of linear prediction
    (Makhoul 1975). Window the frames before calling (a Hamming window is
    common practice); :func:`lpc` does it for you.

    Parameters
    ----------
    frames : array (n_frames, N) or (N,)
        Samples, amplitude in full-scale units.
    order : int, keyword-only
        Highest lag, in samples (the LPC order p). Must be < N.
    lag_window_hz : float or None
        If given, multiply lag ``k`` by the Gaussian lag window
        ``exp(-0.5 (2 pi f k / rate)^2)`` with ``f = lag_window_hz`` (Hz);
        this widens each spectral peak by about that much and reduces the
        attraction of formants to single harmonics (common practice in speech
        coding, e.g. 60 Hz; Tohkura, Itakura & Hashimoto 1978). Needs ``rate_hz``.
    rate_hz : float or None
        Sampling rate in Hz (only needed with ``lag_window_hz``).
    white_noise_correction : float
        Relative amount added to lag 0, ``r[0] *= 1 + white_noise_correction``
        (e.g. 1e-4, i.e. a noise floor 40 dB down; common practice). Improves
        the conditioning of the normal equations. Must be >= 0.

    Returns
    -------
    r : array (n_frames, order + 1)
        Autocorrelation in squared amplitude units.
    """
    x = _frames_2d(frames)
    order = _check_order(order, x.shape[1])
    if white_noise_correction < 0 or not np.isfinite(white_noise_correction):
        raise ValueError(f"white_noise_correction must be >= 0, got {white_noise_correction!r}")
    n = x.shape[1]
    xpad = np.zeros((x.shape[0], n + order))
    xpad[:, :n] = x
    lagged = np.lib.stride_tricks.sliding_window_view(xpad, n, axis=1)   # (n_frames, order + 1, N)
    r = np.einsum("fkn,fn->fk", lagged, x)
    if lag_window_hz is not None:
        if rate_hz is None:
            raise ValueError("lag_window_hz needs rate_hz (the sampling rate in Hz)")
        r = r * lag_window(order, bandwidth_hz=lag_window_hz, rate_hz=rate_hz)
    if white_noise_correction:
        r[:, 0] *= 1.0 + white_noise_correction
    return r


def lag_window(order: int, *, bandwidth_hz: float, rate_hz: float) -> np.ndarray:
    """Gaussian lag window ``w[k] = exp(-0.5 (2 pi f k / rate)^2)``, k = 0..order.

    Multiplying an autocorrelation by it convolves the power spectrum with a
    Gaussian of standard deviation ``bandwidth_hz`` (Hz) (common practice in
    speech coding; Tohkura, Itakura & Hashimoto 1978).
    """
    rate = _check_rate(rate_hz)
    if not np.isfinite(bandwidth_hz) or bandwidth_hz < 0:
        raise ValueError(f"bandwidth_hz must be >= 0 Hz, got {bandwidth_hz!r}")
    k = np.arange(int(order) + 1)
    return np.exp(-0.5 * (2.0 * np.pi * bandwidth_hz * k / rate) ** 2)


def levinson_durbin(r) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Solve the Toeplitz normal equations by the Levinson-Durbin recursion.

    Batched over all leading axes (Levinson 1947; Durbin 1960; Makhoul 1975).

    Parameters
    ----------
    r : array (..., p + 1)
        Autocorrelation at lags 0..p (squared amplitude units), ``r[..., 0] >= 0``.

    Returns
    -------
    a : array (..., p + 1)
        Inverse-filter coefficients, ``a[..., 0] == 1``.
    err : array (...)
        Final prediction error power (same units as ``r``).
    k : array (..., p)
        Reflection coefficients (|k| < 1 for a positive-definite ``r``).

    A frame whose lag-0 value is 0 (digital silence) gets ``a = [1, 0, ...]``,
    ``err = 0`` and ``k = 0``; the recursion also stops (k = 0 from there on)
    as soon as the error power reaches 0, so the result is always finite.
    """
    r = np.asarray(r, dtype=np.float64)
    if r.ndim < 1 or r.shape[-1] < 2:
        raise ValueError(f"r must have shape (..., p + 1) with p >= 1, got {r.shape}")
    if not np.all(np.isfinite(r)):
        raise ValueError("r contains NaN or infinite values")
    if np.any(r[..., 0] < 0):
        raise ValueError("r[..., 0] (the frame energy) must be >= 0")
    p = r.shape[-1] - 1
    lead = r.shape[:-1]
    r2 = r.reshape(-1, p + 1)
    silent = r2[:, 0] <= 0
    if np.any(silent):
        r2 = r2.copy()
        r2[silent] = 0.0
        r2[silent, 0] = 1.0
    m = r2.shape[0]
    a = np.zeros((m, p + 1))
    a[:, 0] = 1.0
    kk = np.zeros((m, p))
    err = r2[:, 0].copy()
    floor = r2[:, 0] * 1e-30
    for i in range(1, p + 1):
        # acc = r[i] + sum_{j=1}^{i-1} a[j] r[i-j]
        acc = r2[:, i] + np.einsum("ij,ij->i", a[:, 1:i], r2[:, i - 1:0:-1])
        k = np.where(err > floor, -acc / err, 0.0)
        a[:, 1:i] += k[:, None] * a[:, i - 1:0:-1]
        a[:, i] = k
        kk[:, i - 1] = k
        err = np.maximum(err * (1.0 - k * k), floor)
    err[silent] = 0.0
    a = a.reshape(lead + (p + 1,))
    kk = kk.reshape(lead + (p,))
    err = err.reshape(lead)
    return a, err, kk


# ---------------------------------------------------------------------------
# Burg


def burg(frames, *, order: int, return_reflection: bool = False):
    """Burg's maximum-entropy linear prediction, batched over frames.

    Reflection coefficients minimise the sum of forward and backward
    prediction error powers at each stage (Burg 1967, 1975; Makhoul 1975
    eq. 45), so the filter is always stable and no window is required.

    Parameters
    ----------
    frames : array (n_frames, N) or (N,)
        Samples (full-scale units). Windowing is optional.
    order : int, keyword-only
        Prediction order p (< N).

    Returns
    -------
    a : array (n_frames, p + 1)
        Inverse-filter coefficients, ``a[:, 0] == 1``.
    err : array (n_frames,)
        Mean forward-backward prediction error power of the last stage
        (squared amplitude units).
    k : array (n_frames, p)
        Reflection coefficients, only with ``return_reflection=True``
        (|k| <= 1 by the Cauchy-Schwarz inequality).
    """
    x = _frames_2d(frames)
    order = _check_order(order, x.shape[1])
    n_frames, n = x.shape
    a = np.zeros((n_frames, order + 1))
    a[:, 0] = 1.0
    f = x[:, 1:].copy()   # forward error, aligned at n = 1..N-1
    b = x[:, :-1].copy()  # backward error, delayed one sample
    err = np.mean(x * x, axis=1)
    refl = np.zeros((n_frames, order))
    for i in range(1, order + 1):
        num = -2.0 * np.einsum("ij,ij->i", f, b)
        den = np.einsum("ij,ij->i", f, f) + np.einsum("ij,ij->i", b, b)
        ok = den > 0
        k = np.where(ok, num / np.where(ok, den, 1.0), 0.0)
        prev = a[:, 1:i].copy()
        a[:, 1:i] = prev + k[:, None] * prev[:, ::-1]
        a[:, i] = k
        refl[:, i - 1] = k
        err = err * (1.0 - k * k)
        f, b = f + k[:, None] * b, b + k[:, None] * f
        f = f[:, 1:]
        b = b[:, :-1]
    if return_reflection:
        return a, err, refl
    return a, err


# ---------------------------------------------------------------------------
# weighted linear prediction


def ste_weights(frames, *, order: int, weight_window: int) -> np.ndarray:
    """Short-time-energy weights for weighted linear prediction.

    ``w[n] = sum_{i=1}^{M} x[n - i]^2`` for ``n = 0 .. N + p - 1``, with
    ``x = 0`` outside the frame and ``M = weight_window`` samples (Ma, Kamp &
    Willems 1993; Alku et al. 2013). The weight at sample ``n`` is the energy
    of the M samples *before* it, so it is small where a new glottal pulse
    arrives after the previous response has decayed, and large during the
    free decay of the formants that follows each pulse.

    A floor of 1e-9 times the mean weight (plus the smallest normal float)
    keeps every weight positive (needed by the SWLP recursion).

    Returns
    -------
    w : array (n_frames, N + p), squared amplitude units.
    """
    x = _frames_2d(frames)
    order = _check_order(order, x.shape[1])
    if isinstance(weight_window, bool) or not isinstance(weight_window, (int, np.integer)) or weight_window < 1:
        raise ValueError(f"weight_window must be a whole number of samples >= 1, got {weight_window!r}")
    m = int(weight_window)
    n_frames, n = x.shape
    length = n + order
    e = np.zeros((n_frames, length + 1))
    e[:, 1 : n + 1] = np.cumsum(x * x, axis=1)
    e[:, n + 1 :] = e[:, n : n + 1]
    # c[j] = sum_{t < j} x[t]^2  (c[0] = 0); w[n] = c[n] - c[n - M]
    idx = np.arange(length)
    w = e[:, idx] - e[:, np.maximum(idx - m, 0)]
    w = np.maximum(w, 0.0)
    w += 1e-9 * np.mean(w, axis=1, keepdims=True) + np.finfo(float).tiny
    return w


def weighted_lpc(frames, *, order: int, weight_window: int | None = None, rate_hz: float | None = None,
                 stabilized: bool = True, window=None, weights=None) -> tuple[np.ndarray, np.ndarray]:
    """Weighted linear prediction (WLP) and its stabilised form (SWLP).

    Minimises the weighted prediction error ``sum_n w[n] e[n]^2`` over
    ``n = 0 .. N + p - 1`` (the frame zero-padded by p samples, as in the
    autocorrelation method) with short-time-energy weights ``w`` from
    :func:`ste_weights` (Ma, Kamp & Willems 1993). Because the weight is low
    just where each glottal pulse excites the tract, the model follows the
    formant decays rather than the harmonic comb, which lowers F1 errors at
    high F0 (Alku, Pohjalainen, Vainio, Laukkanen & Story 2013).

    Plain WLP (``stabilized=False``) solves the normal equations
    ``R a = -r`` with ``R[i, k] = sum_n w[n] x[n-i] x[n-k]``; its filter is
    not guaranteed stable. SWLP (``stabilized=True``, default; Magi,
    Pohjalainen, Bäckström & Alku 2009) replaces the lagged, weighted
    columns by columns generated with a weighted shift whose gains never
    exceed 1, so the operator is a contraction and every root of ``A(z)``
    lies inside the unit circle (the zeros of such a predictor lie in the
    numerical range of the operator; Delsarte, Genin & Kamp 1978). Here the
    recursion runs from the most delayed column: ``u_0[n] = sqrt(w[n])
    x[n-p]``, ``u_{j+1}[n] = c[n] u_j[n+1]`` with ``c[n] = min(1,
    sqrt(w[n] / w[n+1]))``, and ``a_k`` multiplies ``u_{p-k}``, so the
    prediction polynomial is monic in the operator and the stability
    argument applies as stated. ``u_j[n]`` equals the WLP column
    ``sqrt(w[n]) x[n-p+j]`` wherever the weights rise; where they fall the
    lagged samples keep less weight.

    Frame edges: the weights rise from ~0 over the first M samples of the
    frame (no energy "before" the frame is seen), which acts as a short
    onset taper, and decay over the M samples after the end in the padded
    tail. A rectangular window (``window=None``) is the usual choice.

    Parameters
    ----------
    frames : array (n_frames, N) or (N,)
        Samples (full-scale units).
    order : int, keyword-only
        Prediction order p.
    weight_window : int or None
        STE window length M in samples. Default: ``round(1 ms * rate_hz)``
        when ``rate_hz`` is given, else 8. About 1 ms (8 samples at 8 kHz,
        the value used by Alku et al. 2013, from memory) is short enough that
        the weight dips at every pulse even at F0 = 500 Hz (period 2 ms) and
        long enough to cover the first formant decay burst.
    rate_hz : float or None
        Sampling rate in Hz, only used for the default ``weight_window``.
    stabilized : bool
        SWLP (True) or plain WLP (False).
    window : None, str or array
        Optional analysis window applied before weighting.
    weights : array (n_frames, N + p) or (N + p,), optional
        Use these positive weights instead of the short-time energy (with
        all weights equal, WLP and SWLP reduce to the autocorrelation method
        with a rectangular window).

    Returns
    -------
    a : array (n_frames, p + 1), ``a[:, 0] == 1``.
    err : array (n_frames,)
        Weighted prediction error power per padded sample.
    """
    x = _frames_2d(frames)
    order = _check_order(order, x.shape[1])
    if weight_window is None:
        weight_window = max(1, int(round(0.001 * _check_rate(rate_hz)))) if rate_hz is not None else 8
    w_win = _window(window, x.shape[1])
    if w_win is not None:
        x = x * w_win
    n_frames, n = x.shape
    length = n + order
    out_a = np.zeros((n_frames, order + 1))
    out_a[:, 0] = 1.0
    out_err = np.zeros(n_frames)
    # Chunk over frames to bound the (chunk, p + 1, N + p) work array.
    chunk = max(1, int(500_000 // ((order + 1) * length)))
    if weights is not None:
        wts = np.asarray(weights, dtype=np.float64)
        if wts.ndim == 1:
            wts = np.broadcast_to(wts, (n_frames, wts.shape[0]))
        if wts.shape != (n_frames, length):
            raise ValueError(f"weights must have shape ({n_frames}, {length}) (frames x N + order), got {wts.shape}")
        if not np.all(np.isfinite(wts)) or np.any(wts <= 0):
            raise ValueError("weights must be finite and positive")
    for s in range(0, n_frames, chunk):
        xs = x[s : s + chunk]
        if weights is None:
            w = ste_weights(xs, order=order, weight_window=weight_window)
        else:
            w = wts[s : s + chunk]
        xp = np.zeros((xs.shape[0], length))
        xp[:, :n] = xs
        y = np.empty((xs.shape[0], order + 1, length))
        if stabilized:
            # u_0[n] = sqrt(w[n]) x[n - p]; u_{j+1}[n] = c[n] u_j[n + 1] with
            # c[n] = min(1, sqrt(w[n] / w[n + 1])); column k (coefficient a_k) is u_{p-k}.
            xd = np.zeros((xs.shape[0], length))
            xd[:, order:] = xs
            c = np.sqrt(np.minimum(w[:, :-1] / w[:, 1:], 1.0))
            y[:, order] = np.sqrt(w) * xd
            for k in range(order, 0, -1):
                y[:, k - 1, -1] = 0.0
                y[:, k - 1, :-1] = c * y[:, k, 1:]
        else:
            sw = np.sqrt(w)
            for k in range(order + 1):
                y[:, k, :k] = 0.0
                y[:, k, k:] = sw[:, k:] * xp[:, : length - k]
        rmat = np.matmul(y, y.transpose(0, 2, 1))
        a_s, e_s = _solve_normal(rmat)
        out_a[s : s + chunk] = a_s
        out_err[s : s + chunk] = e_s / length
    return out_a, out_err


def _solve_normal(rmat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Solve ``R[1:,1:] a[1:] = -R[1:,0]`` for a batch of (p+1, p+1) matrices.

    A tiny diagonal loading (1e-10 of the mean diagonal) keeps near-silent
    frames solvable; frames with zero energy get ``a = [1, 0, ...]``.
    """
    n_frames, p1, _ = rmat.shape
    p = p1 - 1
    a = np.zeros((n_frames, p1))
    a[:, 0] = 1.0
    err = np.zeros(n_frames)
    scale = np.trace(rmat, axis1=1, axis2=2) / p1
    ok = scale > 0
    if not np.any(ok):
        return a, err
    m = rmat[ok]
    load = 1e-10 * scale[ok]
    mm = m[:, 1:, 1:] + load[:, None, None] * np.eye(p)
    sol = np.linalg.solve(mm, -m[:, 1:, 0:1])[..., 0]
    a[ok, 1:] = sol
    err[ok] = np.maximum(m[:, 0, 0] + np.einsum("fi,fi->f", m[:, 0, 1:], sol), 0.0)
    return a, err


# ---------------------------------------------------------------------------
# front door


def lpc(frames, *, order: int, method: str = "autocorrelation", window="auto",
        lag_window_hz: float | None = None, rate_hz: float | None = None,
        white_noise_correction: float = 0.0, weight_window: int | None = None,
        stabilized: bool = True) -> np.ndarray:
    """Linear-prediction inverse filters of a batch of frames.

    Parameters
    ----------
    frames : array (n_frames, N) or (N,)
        Un-windowed samples (pre-emphasise first if wanted; full-scale units).
    order : int, keyword-only
        Prediction order p (rule of thumb: 2 + rate_kHz, common practice).
    method : {"autocorrelation", "burg", "weighted"}
        "autocorrelation": window + :func:`autocorrelation` + the
        Toeplitz normal equations (Makhoul 1975), solved by a batched LAPACK
        solve that equals :func:`levinson_durbin` to rounding. "burg": :func:`burg`.
        "weighted": :func:`weighted_lpc` (SWLP unless ``stabilized=False``).
    window : "auto", None, str or array (N,)
        Analysis window applied first. "auto" = Hamming for the
        autocorrelation method, Hann for Burg, rectangular for weighted LP.
        Pass ``None`` if the frames are already windowed.
    lag_window_hz, white_noise_correction : see :func:`autocorrelation`
        (autocorrelation method only).
    rate_hz : float or None
        Sampling rate in Hz; needed for ``lag_window_hz`` and used for the
        default weighted-LP ``weight_window``.
    weight_window, stabilized : see :func:`weighted_lpc`.

    Returns
    -------
    a : array (n_frames, p + 1) with ``a[:, 0] == 1``.
    """
    if method not in METHODS:
        raise ValueError(f"unknown LPC method {method!r}; use one of {', '.join(METHODS)}")
    x = _frames_2d(frames)
    order = _check_order(order, x.shape[1])
    if isinstance(window, str) and window == "auto":
        window = {"autocorrelation": "hamming", "burg": "hann", "weighted": None}[method]
    w = _window(window, x.shape[1])
    if method == "weighted":
        a, _ = weighted_lpc(x, order=order, weight_window=weight_window, rate_hz=rate_hz,
                            stabilized=stabilized, window=w)
        return a
    if w is not None:
        x = x * w
    if method == "burg":
        a, _ = burg(x, order=order)
        return a
    r = autocorrelation(x, order=order, lag_window_hz=lag_window_hz, rate_hz=rate_hz,
                        white_noise_correction=white_noise_correction)
    return _toeplitz_solve(r)


@functools.lru_cache(maxsize=16)
def _toeplitz_index(p: int) -> np.ndarray:
    i = np.arange(p)
    idx = np.abs(i[:, None] - i[None, :])
    idx.setflags(write=False)
    return idx


def _toeplitz_solve(r: np.ndarray) -> np.ndarray:
    """Inverse filters from autocorrelations ``r`` (n, p + 1): the same normal
    equations :func:`levinson_durbin` solves, by one batched LAPACK solve
    (``np.linalg.solve`` on the stacked Toeplitz matrices). Far fewer numpy
    calls than the order-by-order recursion, which matters for the one-frame
    calls of the streaming path; the result agrees with the recursion to
    rounding (tested). Zero-energy frames get ``[1, 0, ...]``.
    """
    n, p1 = r.shape
    p = p1 - 1
    a = np.zeros((n, p1))
    a[:, 0] = 1.0
    ok = r[:, 0] > 0
    if np.all(ok):
        a[:, 1:] = np.linalg.solve(r[:, _toeplitz_index(p)], -r[:, 1:, None])[..., 0]
    elif np.any(ok):
        ro = r[ok]
        a[ok, 1:] = np.linalg.solve(ro[:, _toeplitz_index(p)], -ro[:, 1:, None])[..., 0]
    return a


# ---------------------------------------------------------------------------
# roots and formants


def _as_coefficients(a) -> np.ndarray:
    """Inverse filters as float64 ``(n, p + 1)``, p >= 1; one filter ``(p + 1,)`` becomes ``(1, p + 1)``."""
    a = float_rows(a, "a")
    if a.ndim != 2 or a.shape[1] < 2:
        raise ValueError(f"a must have shape (n, p + 1) with p >= 1, got {a.shape}")
    return a


def polynomial_roots(a) -> np.ndarray:
    """Roots of each polynomial ``a[i, 0] z^p + a[i, 1] z^(p-1) + ... + a[i, p]``.

    Batched: the eigenvalues of the stacked companion matrices, one
    ``np.linalg.eigvals`` call on an ``(n, p, p)`` array (the method behind
    ``numpy.roots``; Edelman & Murakami 1995). For an inverse filter
    ``A(z) = sum a[k] z^-k`` these are the poles of ``1 / A(z)``.

    Parameters
    ----------
    a : array (n, p + 1) or (p + 1,)
        Coefficients, ``a[:, 0] != 0`` (p >= 1).

    Returns
    -------
    roots : complex array (n, p)
        In no particular order. Rows with a non-finite coefficient or
        ``a[:, 0] == 0`` come back as NaN.
    """
    a = _as_coefficients(a)
    n, p1 = a.shape
    p = p1 - 1
    good = np.isfinite(a).all(axis=1) & (a[:, 0] != 0)
    if good.all():
        return np.linalg.eigvals(_companion(a))
    roots = np.full((n, p), np.nan + 1j * np.nan)
    if good.any():
        roots[good] = np.linalg.eigvals(_companion(a[good]))
    return roots


def _check_band(min_hz, max_hz, max_bandwidth_hz) -> None:
    if not (0 <= min_hz < max_hz):
        raise ValueError(f"need 0 <= min_hz < max_hz, got min_hz={min_hz}, max_hz={max_hz}")
    if max_bandwidth_hz is not None and not max_bandwidth_hz > 0:
        raise ValueError(f"max_bandwidth_hz must be positive, got {max_bandwidth_hz!r}")


def candidates_from_coefficients(a: np.ndarray, *, rate_hz: float, min_hz: float, max_hz: float,
                                 max_bandwidth_hz: float | None) -> tuple[np.ndarray, np.ndarray]:
    """:func:`formant_candidates` of float64 coefficients ``a`` (n, p + 1), arguments already checked.

    Roots by the Aberth-Ehrlich iteration (Aberth 1973; Ehrlich 1967), one
    compiled call per frame; a frame where it does not converge (multiple or
    badly clustered roots) falls back to the companion-matrix eigenvalues.
    Root sets agree with :func:`polynomial_roots` to about 1e-13.
    """
    n, p1 = a.shape
    k_out = (p1 - 1) // 2
    f_out = np.full((n, k_out), np.nan)
    b_out = np.full((n, k_out), np.nan)
    mbw = math.inf if max_bandwidth_hz is None else float(max_bandwidth_hz)
    done = np.zeros(n, dtype=np.bool_)
    _candidates_rows_kernel(np.require(a, requirements="CW"), float(rate_hz), float(min_hz), float(max_hz), mbw,
                            f_out, b_out, done)
    candidates_fallback(a, done, f_out, b_out, rate_hz=rate_hz, min_hz=min_hz, max_hz=max_hz,
                        max_bandwidth_hz=max_bandwidth_hz)
    return f_out, b_out


def candidates_fallback(a: np.ndarray, done: np.ndarray, f_out: np.ndarray, b_out: np.ndarray, *, rate_hz: float,
                        min_hz: float, max_hz: float, max_bandwidth_hz: float | None) -> None:
    """Fill rows ``i`` with ``done[i]`` False of ``f_out, b_out`` (in place) from the companion-matrix
    eigenvalues of ``a[i]``: the fallback where the compiled Aberth-Ehrlich iteration did not converge."""
    for i in np.flatnonzero(~done):
        f, b = formant_candidates(a[i], rate_hz=rate_hz, min_hz=min_hz, max_hz=max_hz,
                                  max_bandwidth_hz=max_bandwidth_hz, roots=polynomial_roots(a[i]))
        f_out[i], b_out[i] = f[0], b[0]


@jit
def _autocorrelation_lpc_kernel(x, p, a):  # pragma: no cover - compiled
    """Autocorrelation LPC of one (already windowed) frame ``x`` into ``a`` (p + 1), Levinson-Durbin;
    ``[1, 0, ...]`` for a zero frame (the one-frame case of ``lpc(method="autocorrelation", window=None)``)."""
    n = x.shape[0]
    r = np.zeros(p + 1)
    for k in range(min(p, n - 1) + 1):
        acc = 0.0
        for j in range(n - k):
            acc += x[j] * x[j + k]
        r[k] = acc
    _levinson_kernel(r, a)


@jit
def _levinson_kernel(r, a):  # pragma: no cover - compiled
    """Inverse filter ``a`` (p + 1) from the autocorrelation ``r`` (p + 1) by the Levinson-Durbin
    recursion (as :func:`levinson_durbin`); ``[1, 0, ...]`` for ``r[0] <= 0``, and the recursion
    stops where the prediction error reaches 0. Returns the final prediction error (at most 0
    where it stopped early)."""
    p = r.shape[0] - 1
    a[:] = 0.0
    a[0] = 1.0
    err = r[0]
    if not err > 0:
        return err
    tmp = np.empty(p + 1)
    for i in range(1, p + 1):
        acc = r[i]
        for j in range(1, i):
            acc += a[j] * r[i - j]
        k = -acc / err
        tmp[:i + 1] = a[:i + 1]
        for j in range(1, i):
            a[j] = tmp[j] + k * tmp[i - j]
        a[i] = k
        err *= 1.0 - k * k
        if not err > 0:
            return err
    return err


@jit
def _aberth_kernel(a, z):  # pragma: no cover - compiled
    """Roots of ``a[0] z^p + ... + a[p]`` into ``z`` (complex, p) by the Aberth-Ehrlich iteration
    (Gauss-Seidel sweeps from points on a circle). A root stops when its correction is below
    1e-14 of its size, or when the polynomial there is at its rounding-error level and the
    corrections no longer shrink fast. The roots found are checked against the coefficients
    (their sum is -a[1] / a[0], Vieta). False if it did not converge, failed the check or
    ``a`` is unusable."""
    p = a.shape[0] - 1
    if not (a[0] != 0 and math.isfinite(a[0])):
        return False
    c = np.empty(p + 1)
    for k in range(p + 1):
        c[k] = a[k] / a[0]
        if not math.isfinite(c[k]):
            return False
    # trailing zero coefficients are exact roots at 0 (e.g. the [1, 0, ..., 0] of a
    # silent frame): set them aside, iterate on the rest
    deg = p
    while deg > 0 and c[deg] == 0.0:
        deg -= 1
    for k in range(deg, p):
        z[k] = 0.0
    if deg == 0:
        return True
    p = deg
    rad = 0.0
    for k in range(1, p + 1):
        rad = max(rad, abs(c[k]) ** (1.0 / k))
    rad = min(max(rad, 0.5), 2.0)
    # real and imaginary parts held apart: complex division in compiled code is a
    # guarded (Smith's) division, several times the cost of one real reciprocal
    zr = np.empty(p)
    zi = np.empty(p)
    for k in range(p):
        ang = 2.0 * math.pi * k / p + 0.4
        zr[k] = rad * math.cos(ang)
        zi[k] = rad * math.sin(ang)
    done = np.zeros(p, dtype=np.bool_)
    last_w = np.full(p, np.inf)
    for _ in range(200):
        n_done = 0
        for k in range(p):
            if done[k]:
                n_done += 1
                continue
            xr, xi = zr[k], zi[k]
            pr, pim = 1.0, 0.0                  # p(z) and p'(z) by Horner
            dr, di = 0.0, 0.0
            az = math.sqrt(xr * xr + xi * xi)
            bound = 1.0                         # sum_j |c_j| |z|^(p - j), for the rounding bound
            for j in range(1, p + 1):
                t = dr * xr - di * xi + pr
                di = dr * xi + di * xr + pim
                dr = t
                t = pr * xr - pim * xi + c[j]
                pim = pr * xi + pim * xr
                pr = t
                bound = bound * az + abs(c[j])
            # |p(z)| at the level of Horner's rounding error: z is a root of a
            # polynomial within a few ulps of this one (a backward-error test)
            at_noise = math.sqrt(pr * pr + pim * pim) <= p * 2.220446049250313e-16 * bound
            dd = dr * dr + di * di
            if dd == 0:
                if at_noise:
                    done[k] = True
                    continue
                return False
            rr = (pr * dr + pim * di) / dd      # ratio = p / p'
            ri = (pim * dr - pr * di) / dd
            sr, si = 0.0, 0.0                   # sum_j 1 / (z_k - z_j)
            for j in range(p):
                if j != k:
                    er = xr - zr[j]
                    ei = xi - zi[j]
                    inv = 1.0 / (er * er + ei * ei)
                    sr += er * inv
                    si -= ei * inv
            qr = 1.0 - (rr * sr - ri * si)      # w = ratio / (1 - ratio * sum)
            qi = -(rr * si + ri * sr)
            qq = qr * qr + qi * qi
            wr = (rr * qr + ri * qi) / qq
            wi = (ri * qr - rr * qi) / qq
            if not (math.isfinite(wr) and math.isfinite(wi)):
                return False
            zr[k] = xr - wr
            zi[k] = xi - wi
            aw = math.sqrt(wr * wr + wi * wi)
            # done: a correction below 1e-14 of the root, or, with the value at the
            # rounding level, corrections that stopped shrinking fast (quadratic
            # convergence over: rounding noise, or a multiple root)
            if aw <= 1e-14 * max(az, 1e-3) or (at_noise and aw >= 0.25 * last_w[k]):
                done[k] = True
            last_w[k] = aw
        if n_done == p:
            # Vieta: the roots must sum to -c[1]; a root found twice (another one missed)
            # breaks this by about the missing root's size
            tr, ti, scale = 0.0, 0.0, 0.0
            for k in range(p):
                z[k] = complex(zr[k], zi[k])
                tr += zr[k]
                ti += zi[k]
                scale += math.sqrt(zr[k] * zr[k] + zi[k] * zi[k])
            return math.sqrt((tr + c[1]) ** 2 + ti * ti) <= 1e-8 * max(scale, 1.0)
    return False


@jit
def _candidates_rows_kernel(a, rate, min_hz, max_hz, max_bw, f_out, b_out, done):  # pragma: no cover - compiled
    """:func:`_candidates_kernel` for every row; ``done[i]`` False where row i needs the fallback."""
    # every row starts afresh, so a frame's candidates do not depend on its neighbours in the batch
    z = np.empty(a.shape[1] - 1, dtype=np.complex128)
    for i in range(a.shape[0]):
        done[i] = _candidates_kernel(a[i], rate, min_hz, max_hz, max_bw, f_out[i], b_out[i], z)


@jit
def _candidates_kernel(a, rate, min_hz, max_hz, max_bw, f_out, b_out, z):  # pragma: no cover - compiled
    """:func:`formant_candidates` of one inverse filter into ``f_out, b_out`` (NaN-padded), the roots
    left in ``z`` (p). False when the roots did not converge (the caller falls back to eigenvalues)."""
    p = a.shape[0] - 1
    f_out[:] = np.nan
    b_out[:] = np.nan
    ok = True
    for k in range(p + 1):
        if not math.isfinite(a[k]):
            ok = False
    if not ok or a[0] == 0:
        return True                      # unusable filter: no candidates (as polynomial_roots' NaN rows)
    if not _aberth_kernel(a, z):
        return False
    fscale = rate / (2.0 * math.pi)
    bscale = rate / math.pi
    n = 0
    fs = np.empty(p)
    bs = np.empty(p)
    for k in range(p):
        zk = z[k]
        if not zk.imag > 1e-12:
            continue
        f = math.atan2(zk.imag, zk.real) * fscale
        if not (min_hz <= f <= max_hz):
            continue
        bw = abs(math.log(max(abs(zk), 1e-300))) * bscale
        if not bw <= max_bw:
            continue
        # insertion in ascending frequency
        i = n
        while i > 0 and fs[i - 1] > f:
            fs[i] = fs[i - 1]
            bs[i] = bs[i - 1]
            i -= 1
        fs[i] = f
        bs[i] = bw
        n += 1
    for i in range(min(n, f_out.shape[0])):
        f_out[i] = fs[i]
        b_out[i] = bs[i]
    return True


def _companion(a: np.ndarray) -> np.ndarray:
    """Stacked companion matrices (n, p, p) of the rows of ``a`` (n, p + 1)."""
    n, p1 = a.shape
    p = p1 - 1
    comp = np.empty((n, p, p))
    comp[:] = _shift_matrix(p)
    np.divide(a[:, 1:], -a[:, :1], out=comp[:, 0, :])
    return comp


@functools.lru_cache(maxsize=16)
def _shift_matrix(p: int) -> np.ndarray:
    m = np.eye(p, k=-1)
    m.setflags(write=False)
    return m


def formant_candidates(a, *, rate_hz: float, min_hz: float = 50.0, max_hz: float | None = None,
                       max_bandwidth_hz: float | None = None,
                       roots: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Formant frequency and bandwidth candidates from LPC inverse filters.

    Each root ``z`` of ``A(z)`` with positive imaginary part gives a resonance
    at ``angle(z) * rate / (2 pi)`` Hz with 3-dB bandwidth
    ``-ln|z| * rate / pi`` Hz (Markel & Gray 1976; Rabiner & Schafer 1978).
    Real roots (imaginary part below 1e-12) never count. A root outside the
    unit circle (possible with plain WLP) is counted as its mirror image
    ``1 / conj(z)`` (same frequency, bandwidth ``+ln|z| rate / pi``).

    Parameters
    ----------
    a : array (n, p + 1) or (p + 1,)
        Inverse-filter coefficients (from :func:`lpc`).
    rate_hz : float, keyword-only
        Sampling rate of the frames, Hz.
    min_hz, max_hz : float
        Keep candidates with ``min_hz <= f <= max_hz`` (Hz). ``max_hz=None``
        means ``rate_hz / 2 - min_hz``.
    max_bandwidth_hz : float or None
        Drop candidates wider than this (Hz); None keeps all.
    roots : complex array (n, p), optional
        Precomputed :func:`polynomial_roots` of ``a`` (skips the eigenvalues).

    Returns
    -------
    freq_hz, bw_hz : arrays (n, p // 2)
        Candidates in ascending frequency, NaN-padded on the right. The
        column count depends only on the order, so batches concatenate.
    """
    rate = _check_rate(rate_hz)
    if roots is None:
        if max_hz is None:
            max_hz = rate / 2.0 - min_hz
        _check_band(min_hz, max_hz, max_bandwidth_hz)
        return candidates_from_coefficients(_as_coefficients(a), rate_hz=rate, min_hz=float(min_hz), max_hz=float(max_hz),
                                            max_bandwidth_hz=max_bandwidth_hz)
    else:
        roots = np.asarray(roots)
        if roots.ndim == 1:
            roots = roots[np.newaxis, :]
        if roots.ndim != 2:
            raise ValueError(f"roots must have shape (n, p), got {roots.shape}")
    if max_hz is None:
        max_hz = rate / 2.0 - min_hz
    _check_band(min_hz, max_hz, max_bandwidth_hz)
    n, p = roots.shape
    k_out = p // 2
    # |z| = 0 (a zero coefficient at the end) would give an infinite bandwidth: floor it
    mag = np.maximum(np.abs(roots), 1e-300)
    freq = np.angle(roots) * (rate / (2.0 * np.pi))
    bw = np.abs(np.log(mag)) * (rate / np.pi)
    keep = roots.imag > 1e-12          # False for NaN rows
    keep &= freq >= min_hz
    keep &= freq <= max_hz
    if max_bandwidth_hz is not None:
        keep &= bw <= max_bandwidth_hz
    f_sort = np.where(keep, freq, np.inf)
    order_idx = np.argsort(f_sort, axis=1)[:, :k_out]
    rows = np.arange(n)[:, None]
    f_out = f_sort[rows, order_idx]
    b_out = bw[rows, order_idx]
    missing = np.isinf(f_out)
    f_out[missing] = np.nan
    b_out[missing] = np.nan
    return f_out, b_out
