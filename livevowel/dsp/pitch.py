"""Frame-level F0 (YIN), frame level in dB and a voicing gate with hysteresis.

All estimators take a batch of frames ``(n_frames, N)`` (samples in
full-scale units, 1.0 = digital full scale). YIN runs one compiled call per
frame (:mod:`livevowel.dsp._jit`), so one frame costs the same whether it
comes alone (live) or in a batch (files).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from livevowel.dsp._jit import jit
from livevowel.dsp.framing import as_frames as _frames_2d

__all__ = [
    "yin",
    "yin_frame_length",
    "difference_function",
    "cmnd",
    "frame_level_db",
    "LEVEL_FLOOR_DB",
    "YIN_SKIP_FACTOR",
    "voicing_hysteresis",
    "VoicingGate",
]

#: Lowest level :func:`frame_level_db` reports, dB re full scale 1.0.
LEVEL_FLOOR_DB = -120.0

#: Default ``skip_factor`` of :func:`yin`'s dip rule (the engine uses it too).
YIN_SKIP_FACTOR = 2.0




def frame_level_db(frames) -> np.ndarray:
    """RMS level of each frame in dB relative to full scale 1.0.

    ``10 log10(mean(x^2))``, floored at :data:`LEVEL_FLOOR_DB` (-120 dB). A
    full-scale sine reads -3.01 dB, a full-scale square wave 0 dB.

    Parameters
    ----------
    frames : array (n_frames, N) or (N,)
        Samples in full-scale units (float, +-1). Integer arrays are taken
        at face value, not scaled: convert int16 etc. to +-1 first.

    Returns
    -------
    level_db : array (n_frames,)
    """
    x = _frames_2d(frames)
    if x.shape[1] == 0:
        raise ValueError("frames must have at least one sample")
    ms = np.mean(x * x, axis=1)
    with np.errstate(divide="ignore"):
        db = 10.0 * np.log10(ms)
    return np.maximum(db, LEVEL_FLOOR_DB)


# ---------------------------------------------------------------------------
# YIN


def _lags(rate_hz, f0_min_hz, f0_max_hz) -> tuple[float, int, int]:
    try:
        rate = float(rate_hz)
        lo = float(f0_min_hz)
        hi = float(f0_max_hz)
    except (TypeError, ValueError):
        raise ValueError("rate_hz, f0_min_hz and f0_max_hz must be numbers in Hz") from None
    if not (math.isfinite(rate) and rate > 0):
        raise ValueError(f"rate_hz must be positive, got {rate_hz!r}")
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise ValueError(f"need 0 < f0_min_hz < f0_max_hz, got {f0_min_hz!r} and {f0_max_hz!r}")
    tau_min = max(2, int(math.floor(rate / hi)))
    tau_max = int(math.ceil(rate / lo))
    if tau_max <= tau_min:
        raise ValueError(f"F0 range {lo:g}-{hi:g} Hz is too narrow for the sampling rate {rate:g} Hz")
    if hi > rate / 4:
        raise ValueError(f"f0_max_hz {hi:g} Hz is above a quarter of the sampling rate {rate:g} Hz")
    return rate, tau_min, tau_max


def yin_frame_length(*, rate_hz: float, f0_min_hz: float, f0_max_hz: float = 1000.0) -> int:
    """Shortest frame (samples) :func:`yin` accepts for this F0 range.

    YIN needs the integration window W plus the largest lag tau_max (plus one
    lag for interpolation): ``N = W + tau_max + 1`` with ``tau_max =
    ceil(rate / f0_min)``. livevowel requires ``W >= tau_max`` (at least one
    period of the lowest F0, as de Cheveigné & Kawahara 2002 advise), so the
    minimum is ``2 tau_max + 1``, i.e. a little over two periods of
    ``f0_min_hz`` (e.g. 60 Hz at 16 kHz: 535 samples = 33.4 ms).
    """
    hi = min(float(f0_max_hz), float(rate_hz) / 4.0)
    hi = max(hi, float(f0_min_hz) * 1.5)
    _, _, tau_max = _lags(rate_hz, f0_min_hz, hi)
    return 2 * tau_max + 1


def difference_function(frames, *, max_lag: int, window: int | None = None) -> np.ndarray:
    """YIN difference function ``d(tau) = sum_{j<W} (x[j] - x[j + tau])^2``.

    Step 2 of de Cheveigné & Kawahara (2002), by the direct sum (for the
    25-40 ms frames used here, O(W max_lag) compiled is faster than an FFT
    correlation and exact to rounding).

    Parameters
    ----------
    frames : array (n_frames, N)
    max_lag : int
        Largest lag in samples; ``d`` is returned for lags ``0..max_lag``.
    window : int or None
        Integration window W in samples; default ``N - max_lag``.

    Returns
    -------
    d : array (n_frames, max_lag + 1), squared amplitude units (``d[:, 0] == 0``).
    """
    x = _frames_2d(frames)
    n_frames, n = x.shape
    max_lag = int(max_lag)
    w = n - max_lag if window is None else int(window)
    if max_lag < 1 or w < 1 or w + max_lag > n:
        raise ValueError(f"need max_lag >= 1, W >= 1 and W + max_lag <= N; got max_lag={max_lag}, W={w}, N={n}")
    return _difference(x, max_lag, w)


def _difference(x: np.ndarray, max_lag: int, w: int) -> np.ndarray:
    """Core of :func:`difference_function` (no validation): one compiled call per frame."""
    d = np.empty((x.shape[0], max_lag + 1))
    x = np.require(x, dtype=np.float64, requirements="CW")   # one compiled signature for every caller
    for i in range(x.shape[0]):
        _difference_kernel(x[i], max_lag, w, d[i])
    return d


@jit
def _difference_kernel(x, max_lag, w, d):  # pragma: no cover - compiled
    """``d[tau] = sum_{j<W} (x[j] - x[j + tau])^2`` by the direct sum (exact to rounding, O(W max_lag))."""
    d[:] = 0.0
    # j outer, tau inner: each d[tau] still sums in j order (so the result does
    # not depend on vectorisation), and the inner loop has no reduction to block SIMD
    for j in range(w):
        xj = x[j]
        for tau in range(1, max_lag + 1):
            e = xj - x[j + tau]
            d[tau] += e * e


def cmnd(d: np.ndarray) -> np.ndarray:
    """Cumulative mean normalised difference ``d'(tau) = d(tau) tau / sum_{j=1}^{tau} d(j)``.

    Step 3 of de Cheveigné & Kawahara (2002); ``d'(0) = 1``. Where the running
    sum is 0 (digital silence) ``d'`` is set to 1 (aperiodic).
    """
    d = np.asarray(d, dtype=np.float64)
    if d.ndim != 2 or d.shape[1] < 2:
        raise ValueError(f"d must have shape (n_frames, max_lag + 1) with max_lag >= 1, got {d.shape}")
    return _cmnd(d)


def _cmnd(d: np.ndarray) -> np.ndarray:
    d = np.require(d, dtype=np.float64, requirements="CW")
    out = np.empty_like(d)
    for i in range(d.shape[0]):
        _cmnd_kernel(d[i], out[i])
    return out


@jit
def _cmnd_kernel(d, out):  # pragma: no cover - compiled
    out[0] = 1.0
    cs = 0.0
    for tau in range(1, d.shape[0]):
        cs += d[tau]
        out[tau] = d[tau] * tau / cs if cs > 0 else 1.0


def yin(frames, *, rate_hz: float, f0_min_hz: float = 60.0, f0_max_hz: float = 600.0,
        threshold: float = 0.15, fallback: bool = False, skip_factor: float | None = YIN_SKIP_FACTOR,
        skip_margin: float = 0.05, return_cmnd: bool = False):
    """YIN fundamental-frequency estimate per frame (de Cheveigné & Kawahara 2002).

    Steps 2-5 of the paper: difference function, cumulative mean normalised
    difference (CMND), absolute threshold (the first lag in range whose CMND
    falls below ``threshold``, i.e. the first local minimum below it; dips
    much shallower than the deepest one are skipped, see ``skip_factor``), and
    parabolic interpolation of the raw difference function around that lag.

    Frame length: ``N >= yin_frame_length(rate_hz=..., f0_min_hz=...)``, i.e.
    ``N = W + tau_max + 1`` with ``tau_max = ceil(rate / f0_min)`` and
    integration window ``W = N - tau_max - 1 >= tau_max``. Frames are used
    unwindowed.

    Parameters
    ----------
    frames : array (n_frames, N) or (N,)
        Samples (full-scale units).
    rate_hz : float, keyword-only
        Sampling rate, Hz.
    f0_min_hz, f0_max_hz : float
        Search range, Hz (``f0_max_hz <= rate / 4``).
    threshold : float
        Absolute CMND threshold (paper: 0.1-0.15; 0.15 default here).
    fallback : bool
        If no lag falls below ``threshold``, take the global CMND minimum in
        range (paper step 4) instead of returning NaN.
    skip_factor, skip_margin : float
        A dip (local minimum of the CMND) below ``threshold`` is skipped when
        its depth exceeds ``skip_factor * m + skip_margin``, ``m`` being the
        depth of the deepest dip in range (depths refined by a parabola
        through each dip's three lags); the first dip left is taken. With
        ``fallback`` and no dip below the threshold, the first dip within
        ``skip_margin`` of the deepest is taken. ``skip_factor=None`` is
        the paper's rule (first dip below threshold; global minimum as
        fallback). Two failure modes of that rule on voiced speech go away:
        a strong second harmonic (F1 near 2 F0) makes a dip at half the
        period (F0 an octave high), and strong high formants (F2/F3 of /i/)
        make shallow dips one formant cycle before the period (F0 a few per
        cent high). A true period is passed over for a multiple only if the
        multiple is more than twice as deep (plus the margin). A livevowel
        refinement of step 4 of the paper.
    return_cmnd : bool
        Also return the CMND ``d'`` (n_frames, tau_max + 2) for lags
        0..tau_max+1 (e.g. for an octave check at twice the chosen lag)
        without computing it again.

    Returns
    -------
    f0_hz : array (n_frames,)
        F0 in Hz; NaN when no period was found.
    aperiodicity : array (n_frames,)
        CMND value at the chosen lag (0 = perfectly periodic, about 1 = noise);
        for frames without a period (no ``fallback``), the minimum CMND over
        the search range.
    cmnd : array (n_frames, tau_max + 2), only with ``return_cmnd=True``.
    """
    x = _frames_2d(frames)
    rate, tau_min, tau_max = _lags(rate_hz, f0_min_hz, f0_max_hz)
    if not (0.0 < float(threshold) < 1.0):
        raise ValueError(f"threshold must be between 0 and 1, got {threshold!r}")
    if skip_factor is not None and not (float(skip_factor) >= 1.0 and float(skip_margin) >= 0.0):
        raise ValueError(f"need skip_factor >= 1 and skip_margin >= 0, got {skip_factor!r} and {skip_margin!r}")
    n_frames, n = x.shape
    need = 2 * tau_max + 1
    if n < need:
        raise ValueError(
            f"YIN needs frames of at least {need} samples ({1e3 * need / rate:.1f} ms) for "
            f"f0_min_hz={f0_min_hz:g} at {rate:g} Hz, got {n}")
    w = n - tau_max - 1
    x = np.require(x, dtype=np.float64, requirements="CW")   # one compiled signature for every caller
    f0 = np.empty(n_frames)
    aper = np.empty(n_frames)
    dp = np.empty((n_frames, tau_max + 2))
    sf = -1.0 if skip_factor is None else float(skip_factor)
    _yin_rows_kernel(x, float(rate), tau_min, tau_max, w, float(threshold), bool(fallback), sf, float(skip_margin),
                     f0, aper, dp)
    if return_cmnd:
        return f0, aper, dp
    return f0, aper


@jit
def _yin_rows_kernel(x, rate, tau_min, tau_max, w, threshold, fallback, skip_factor, skip_margin, f0, aper, dp):  # pragma: no cover
    """:func:`_yin_kernel` for every row (one call for a batch)."""
    for i in range(x.shape[0]):
        f0[i], aper[i] = _yin_kernel(x[i], rate, tau_min, tau_max, w, threshold, fallback, skip_factor, skip_margin,
                                     dp[i])


@jit
def _yin_kernel(x, rate, tau_min, tau_max, w, threshold, fallback, skip_factor, skip_margin, dp):  # pragma: no cover
    """Steps 2-5 of :func:`yin` for one frame; fills ``dp`` (the CMND) and returns (f0, aperiodicity).

    ``skip_factor < 0`` is the paper's rule (``skip_factor=None``).
    """
    d = np.empty(tau_max + 2)
    _difference_kernel(x, tau_max + 1, w, d)
    _cmnd_kernel(d, dp)
    # dips (local minima of d') in tau_min..tau_max, their depths and the global minimum
    gmin = tau_min
    deepest = np.inf
    n_dip = 0
    dips = np.empty(tau_max - tau_min + 1, dtype=np.int64)
    depth = np.empty(tau_max - tau_min + 1)
    for tau in range(tau_min, tau_max + 1):
        mid = dp[tau]
        if mid < dp[gmin]:
            gmin = tau
        lo, hi = dp[tau - 1], dp[tau + 1]
        if mid <= lo and mid <= hi:
            curv = lo - 2.0 * mid + hi
            if curv > 0:
                dep = mid - (lo - hi) ** 2 / (8.0 * curv)
                dep = dep if dep > 0.0 else 0.0
            else:
                dep = mid
            dips[n_dip] = tau
            depth[n_dip] = dep
            n_dip += 1
            deepest = min(deepest, dep)
    best = -1
    if skip_factor < 0:
        for q in range(n_dip):
            if dp[dips[q]] < threshold:
                best = dips[q]
                break
    else:
        limit = skip_factor * deepest + skip_margin
        for q in range(n_dip):
            if dp[dips[q]] < threshold and depth[q] <= limit:
                best = dips[q]
                break
        if best < 0 and fallback:
            for q in range(n_dip):
                if depth[q] <= deepest + skip_margin:
                    best = dips[q]
                    break
    found = best >= 0
    if not found:
        best = gmin
        if fallback:
            found = True
    aper = dp[best]
    # parabolic interpolation on the raw difference function (tau_min >= 2, so best +- 1 exist)
    y0, y1, y2 = d[best - 1], d[best], d[best + 1]
    den = y0 - 2.0 * y1 + y2
    shift = 0.5 * (y0 - y2) / den if den > 0 else 0.0
    shift = min(max(shift, -1.0), 1.0)
    dmax = 0.0
    for tau in range(tau_max + 2):
        dmax = max(dmax, d[tau])
    f0 = rate / (best + shift)
    if not found or not dmax > 0:
        f0 = np.nan
    if not dmax > 0:
        aper = 1.0
    return f0, aper


# ---------------------------------------------------------------------------
# voicing decision


def voicing_hysteresis(aperiodicity, level_db, *, on_threshold: float = 0.2, off_threshold: float = 0.3,
                       floor_db: float = -50.0, margin_db: float = 6.0,
                       initial: bool = False) -> tuple[np.ndarray, bool]:
    """Voiced/unvoiced decision per frame, a two-threshold gate (hysteresis).

    A frame turns the gate *on* when ``aperiodicity < on_threshold`` and
    ``level_db > floor_db``; it turns it *off* when ``aperiodicity >
    off_threshold`` or ``level_db < floor_db - margin_db``; any other frame
    keeps the previous state. NaN aperiodicity counts as aperiodic (off).
    The two thresholds keep a voice near the boundary from flickering
    (hysteresis, a Schmitt trigger; common practice).

    Streaming: pass the returned state as ``initial`` of the next call; the
    decisions over any split of the input equal those of one call.
    Vectorised (the state is a forward fill of the last on/off event).

    Parameters
    ----------
    aperiodicity : array (n,)
        YIN CMND minimum per frame (0 periodic .. ~1 noise).
    level_db : array (n,)
        Frame level, dB re full scale (:func:`frame_level_db`).
    on_threshold, off_threshold : float
        ``0 < on_threshold <= off_threshold``.
    floor_db, margin_db : float
        Level floor (dB re full scale) and the extra drop (dB, >= 0) needed to
        turn off on level alone.
    initial : bool
        State before the first frame.

    Returns
    -------
    voiced : bool array (n,)
    state : bool
        State after the last frame (``initial`` if ``n == 0``).
    """
    ap = np.asarray(aperiodicity, dtype=np.float64)
    lv = np.asarray(level_db, dtype=np.float64)
    if ap.ndim != 1 or lv.shape != ap.shape:
        raise ValueError(f"aperiodicity and level_db must be 1-D of equal length, got {ap.shape} and {lv.shape}")
    if not (0.0 < on_threshold <= off_threshold):
        raise ValueError(f"need 0 < on_threshold <= off_threshold, got {on_threshold} and {off_threshold}")
    if not margin_db >= 0:
        raise ValueError(f"margin_db must be >= 0 dB, got {margin_db!r}")
    ap = np.where(np.isnan(ap), np.inf, ap)
    turn_on = (ap < on_threshold) & (lv > floor_db)
    turn_off = (ap > off_threshold) | (lv < floor_db - margin_db) | np.isnan(lv)
    turn_on &= ~turn_off
    event = turn_on | turn_off
    idx = np.where(event, np.arange(len(ap)), -1)
    last = np.maximum.accumulate(idx) if len(ap) else idx
    voiced = np.where(last >= 0, turn_on[np.maximum(last, 0)], bool(initial))
    state = bool(voiced[-1]) if len(voiced) else bool(initial)
    return voiced.astype(bool), state


@dataclass(kw_only=True)
class VoicingGate:
    """Streaming wrapper around :func:`voicing_hysteresis` that keeps the state.

    ``gate.update(aperiodicity, level_db)`` returns the decisions for the new
    frames; calling it block by block gives the same result as one call on
    the whole run. Thresholds as in :func:`voicing_hysteresis`.
    """

    on_threshold: float = 0.2
    off_threshold: float = 0.3
    floor_db: float = -50.0
    margin_db: float = 6.0
    state: bool = False

    def __post_init__(self) -> None:
        if not (0.0 < self.on_threshold <= self.off_threshold):
            raise ValueError(f"need 0 < on_threshold <= off_threshold, got {self.on_threshold} "
                             f"and {self.off_threshold}")
        if not self.margin_db >= 0:
            raise ValueError(f"margin_db must be >= 0 dB, got {self.margin_db!r}")

    def update(self, aperiodicity, level_db) -> np.ndarray:
        """Decisions (bool array) for the next frames; advances the state."""
        voiced, self.state = voicing_hysteresis(
            np.atleast_1d(aperiodicity), np.atleast_1d(level_db), on_threshold=self.on_threshold,
            off_threshold=self.off_threshold, floor_db=self.floor_db, margin_db=self.margin_db,
            initial=self.state)
        return voiced

    def reset(self, state: bool = False) -> None:
        """Forget the history (e.g. after an input gap)."""
        self.state = bool(state)
