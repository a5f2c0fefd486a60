"""Multi-cycle closed-phase covariance LPC (for F1 at or below F0).

When F0 is high and F1 lies near or below it, the harmonic magnitudes carry
almost no information about F1: at F0 = 400 Hz a resonance at 310 Hz and one
at 460 Hz change the level ratio of the first two harmonics by less than
1 dB, and a fit to the harmonic powers (:mod:`livevowel.dsp.dap`) puts F1
between them. The information is in the time domain instead: while the
glottis is closed the tract is not excited and the signal is the free decay
of its resonances, ``y[n] = -sum_k a_k y[n - k]`` exactly. Covariance linear
prediction over those samples only recovers the tract's poles, whatever the
harmonic spacing (closed-phase analysis: Wong, Markel & Gray 1979). At high
F0 one closed phase is only 5-15 samples, so the closed phases of all the
periods in the frame are pooled into one set of normal equations.

Steps for one frame of ``N`` samples (pre-emphasised, *not* tapered) with
a known F0 (period ``T = rate / F0`` samples):

1. *Excitation instants*: the residual of autocorrelation LPC of the tapered
   frame (Makhoul 1975) peaks at the main excitation of each period, the
   glottal closure. The largest ``|residual|`` sample is one instant; the
   others are the largest residual of the same sign within ``+- T / 4`` of
   one period further on, marching both ways from it (the frame's own F0
   sets the spacing, so jitter does not accumulate).
2. *Closed phase*: the ``L = round(closed_fraction * T)`` samples starting
   ``d`` samples after each instant, pooled over all instants; each sample
   ``n`` gives one equation ``y[n] = -sum_k a_k y[n - k]`` (its past may lie
   in the open phase: only the predicted sample must be unexcited).
3. *Position*: ``d`` runs over ``0 .. round(max_shift_fraction * T)``; the
   covariance fit with the smallest normalised prediction error wins (the
   criterion of Wong, Markel & Gray 1979, from memory: the free decay is the
   part of the period an all-pole model predicts best).

The normal equations ``Phi a = -psi`` (``Phi[j, k] = sum_n y[n-j] y[n-k]``)
are solved by Cholesky factorisation. The covariance method does not
guarantee a stable filter; roots outside the unit circle are read as their
mirror images by :func:`livevowel.dsp.lpc.formant_candidates`.

Fragile by nature: the method needs a glottal cycle with a real closed
phase, seen through a channel that keeps the waveform. White noise biases
its F1 upwards (more than 20 % off in a third of the frames at 30 dB SNR on
the project's synthetic vowels); reverberation and phase-distorting
channels put energy into the closed phase that it models as resonances; a
wrong F0 misplaces the closed phases. (Aspiration noise at -10 dB and open
quotients 0.4-0.8 did not stop it beating the harmonic fit.) Hence the
engine uses it for the lowest candidate only, only where the harmonic fit
put that below about 1.3 x F0, and lets it raise the harmonic fit's
reading only from a near-exact fit (see :mod:`livevowel.dsp.engine`).

References
----------
Makhoul, J. (1975). Linear prediction: a tutorial review. *Proc. IEEE*
63(4), 561-580.
Wong, D. Y., Markel, J. D. & Gray, A. H. (1979). Least squares glottal
inverse filtering from the acoustic speech waveform. *IEEE Trans.
Acoustics, Speech and Signal Processing* 27(4), 350-355.
"""

from __future__ import annotations

import math

import numpy as np

from livevowel.dsp._jit import jit
from livevowel.dsp.framing import as_frames as _frames_2d
from livevowel.dsp.lpc import _autocorrelation_lpc_kernel

__all__ = ["excitation_instants", "closed_phase_lpc", "CLOSED_FRACTION", "MAX_SHIFT_FRACTION"]

#: Length of each period's closed-phase stretch, fraction of the period.
#: The project synthesiser's default open quotient 0.6 leaves 0.4 T closed;
#: 0.25 T starting up to 0.2 T after the instant stays inside it. Measured on
#: women's vowels from the project synthesiser (Peterson & Barney 1952 means,
#: from memory; F0 300-400 Hz, 11 kHz, order 12, open quotient 0.6): median
#: F1 within 1 % for /i u ʊ ɪ/ with 0.2-0.25 T; with open quotient 0.8
#: (0.2 T closed) 5-15 % low.
CLOSED_FRACTION = 0.25
#: Latest start of the stretch after the instant, fraction of the period. A
#: search reaching 0.4 T chose smooth open-phase stretches when the closed
#: phase was short (open quotient 0.8) and gave spurious poles at 100-200 Hz.
MAX_SHIFT_FRACTION = 0.2


def _check(frames, f0_hz, order, rate_hz) -> tuple[np.ndarray, np.ndarray, int, float]:
    x = _frames_2d(frames)
    f0 = np.broadcast_to(np.asarray(f0_hz, dtype=np.float64).reshape(-1), (x.shape[0],))
    p = order
    if isinstance(p, bool) or not isinstance(p, (int, np.integer)) or p < 1:
        raise ValueError(f"order must be a whole number >= 1, got {order!r}")
    rate = float(rate_hz)
    if not (math.isfinite(rate) and rate > 0):
        raise ValueError(f"rate_hz must be positive and finite, got {rate_hz!r}")
    return np.require(x, requirements="CW"), np.require(f0, requirements="CW"), int(p), rate


def excitation_instants(frame, f0_hz: float, *, order: int, rate_hz: float) -> np.ndarray:
    """Sample indices of the main excitation of each period in one frame.

    Parameters
    ----------
    frame : array (N,)
        Pre-emphasised samples (full-scale units), not tapered.
    f0_hz : float
        F0 of the frame, Hz.
    order : int, keyword-only
        Order of the autocorrelation LPC whose residual is searched.
    rate_hz : float, keyword-only
        Sampling rate, Hz.

    Returns
    -------
    ndarray of int64
        Ascending sample indices (within ``order .. N - 1``); empty when F0 is
        not finite or the frame holds fewer than two periods.
    """
    x, f0, p, rate = _check(frame, f0_hz, order, rate_hz)
    if x.shape[0] != 1:
        raise ValueError(f"frame must be one frame (N,), got shape {np.shape(frame)}")
    y = x[0]
    a0 = np.empty(p + 1)
    _autocorrelation_lpc_kernel(y * np.hanning(len(y)), p, a0)
    out = np.empty(len(y) + 2, dtype=np.int64)
    cnt = _instants_kernel(y, a0, float(rate / f0[0]) if f0[0] > 0 else math.nan, out)
    return out[:cnt].copy()


def closed_phase_lpc(frames, f0_hz, *, order: int, rate_hz: float, taper=None,
                     closed_fraction: float = CLOSED_FRACTION,
                     max_shift_fraction: float = MAX_SHIFT_FRACTION) -> tuple[np.ndarray, np.ndarray]:
    """Multi-cycle closed-phase covariance LPC of each frame (Wong, Markel & Gray 1979).

    Parameters
    ----------
    frames : array (n, N) or (N,)
        Pre-emphasised samples (full-scale units), not tapered.
    f0_hz : array (n,) or float
        F0 of each frame, Hz (NaN: no fit).
    order : int, keyword-only
        Prediction order p.
    rate_hz : float, keyword-only
        Sampling rate, Hz.
    taper : array (N,), optional
        Taper for the autocorrelation LPC whose residual locates the
        excitation instants (default: Hann).
    closed_fraction, max_shift_fraction : float
        Closed-phase stretch length and its latest start after the instant,
        fractions of the period (see :data:`CLOSED_FRACTION`,
        :data:`MAX_SHIFT_FRACTION`).

    Returns
    -------
    a : ndarray (n, p + 1)
        Inverse filters, ``a[:, 0] == 1`` (``[1, 0, ...]`` where no fit).
    err : ndarray (n,)
        Normalised prediction error of the chosen stretch (residual energy
        over signal energy on the pooled samples; ``inf`` where no fit: no
        F0, fewer than two periods, fewer than ``2 p`` pooled samples or a
        singular system).
    """
    x, f0, p, rate = _check(frames, f0_hz, order, rate_hz)
    n, big_n = x.shape
    if not (0 < closed_fraction < 1 and 0 <= max_shift_fraction < 1):
        raise ValueError("need 0 < closed_fraction < 1 and 0 <= max_shift_fraction < 1")
    if p >= big_n:
        raise ValueError(f"order {p} needs frames longer than {p} samples, got {big_n}")
    w = np.hanning(big_n) if taper is None else np.asarray(taper, dtype=np.float64)
    if w.shape != (big_n,):
        raise ValueError(f"taper must have shape ({big_n},), got {w.shape}")
    w = np.require(w, requirements="CW")
    a = np.zeros((n, p + 1))
    err = np.empty(n)
    for i in range(n):
        err[i] = _closed_phase_kernel(x[i], w, f0[i], rate, p, float(closed_fraction), float(max_shift_fraction),
                                      a[i])
    return a, err


@jit
def _instants_kernel(y, a0, period, out):  # pragma: no cover - compiled
    """Excitation instants of ``y`` from the residual of the inverse filter ``a0`` (p + 1) into
    ``out``; returns their count (0 when ``period`` is not finite or under two periods fit)."""
    big_n = y.shape[0]
    p = a0.shape[0] - 1
    if not (math.isfinite(period) and period >= 2.0 and big_n - p >= 2.0 * period):
        return 0
    e = np.zeros(big_n)
    best = -1.0
    i0 = -1
    for t in range(p, big_n):
        acc = 0.0
        for k in range(p + 1):
            acc += a0[k] * y[t - k]
        e[t] = acc
        if abs(acc) > best:
            best = abs(acc)
            i0 = t
    if not best > 0:
        return 0
    sg = 1.0 if e[i0] > 0 else -1.0
    half = 0.25 * period
    tmp = np.empty(out.shape[0], dtype=np.int64)
    # backwards from i0 into tmp, then i0 and forwards into out
    nb = 0
    c = float(i0)
    while True:
        lo = int(math.floor(c - period - half))
        if lo < p:
            break
        j = _strongest(e, sg, lo, int(math.ceil(c - period + half)))
        tmp[nb] = j
        nb += 1
        c = float(j)
    cnt = 0
    for q in range(nb - 1, -1, -1):
        out[cnt] = tmp[q]
        cnt += 1
    out[cnt] = i0
    cnt += 1
    c = float(i0)
    while True:
        hi = int(math.ceil(c + period + half))
        if hi > big_n - 1:
            break
        j = _strongest(e, sg, int(math.floor(c + period - half)), hi)
        out[cnt] = j
        cnt += 1
        c = float(j)
    return cnt


@jit
def _strongest(e, sg, lo, hi):  # pragma: no cover - compiled
    """Index in ``lo..hi`` of the largest ``sg * e`` (the first such)."""
    j = lo
    for t in range(lo, hi + 1):
        if sg * e[t] > sg * e[j]:
            j = t
    return j


@jit
def _cholesky_solve(m, load, b, x):  # pragma: no cover - compiled
    """Solve ``(m + load I) x = b`` for a symmetric positive-definite ``m`` (p x p; only its lower
    triangle is read); False if not positive definite."""
    p = m.shape[0]
    low = np.zeros((p, p))
    for i in range(p):
        for j in range(i + 1):
            acc = m[i, j] + (load if i == j else 0.0)
            for k in range(j):
                acc -= low[i, k] * low[j, k]
            if i == j:
                if not acc > 0:
                    return False
                low[i, i] = math.sqrt(acc)
            else:
                low[i, j] = acc / low[j, j]
    z = np.empty(p)
    for i in range(p):
        acc = b[i]
        for k in range(i):
            acc -= low[i, k] * z[k]
        z[i] = acc / low[i, i]
    for i in range(p - 1, -1, -1):
        acc = z[i]
        for k in range(i + 1, p):
            acc -= low[k, i] * x[k]
        x[i] = acc / low[i, i]
    return True


@jit
def _add_equation(y, t, p, sign, phi, psi):  # pragma: no cover - compiled
    """Add (``sign`` +1) or remove (-1) the equation of sample ``t`` to the lower triangle of
    ``phi[j, k] = sum y[t-1-j] y[t-1-k]`` and to ``psi[j] = -sum y[t] y[t-1-j]``; returns
    ``sign * y[t]^2`` (its share of the signal energy)."""
    yt = y[t]
    for j in range(1, p + 1):
        yj = sign * y[t - j]
        psi[j - 1] -= yt * yj
        for k in range(1, j + 1):
            phi[j - 1, k - 1] += yj * y[t - k]
    return sign * yt * yt


@jit
def _covariance_solve(phi, psi, psi0, rows, p, sol, a):  # pragma: no cover - compiled
    """Covariance LPC from the accumulated normal equations into ``a`` (p + 1); returns the
    normalised error (inf if fewer than ``2 p`` equations or singular)."""
    if rows < 2 * p or not psi0 > 0:
        return math.inf
    tr = 0.0
    for j in range(p):
        tr += phi[j, j]
    if not _cholesky_solve(phi, 1e-10 * tr / p, psi, sol):
        return math.inf
    e = psi0
    for j in range(p):
        e -= sol[j] * psi[j]          # psi holds -sum y[t] y[t - j]
    a[0] = 1.0
    for j in range(p):
        a[j + 1] = sol[j]
    return max(e, 0.0) / psi0


@jit
def _closed_phase_kernel(y, taper, f0, rate, p, closed_fraction, max_shift_fraction, a):  # pragma: no cover
    """One frame of :func:`closed_phase_lpc` into ``a`` (p + 1); returns the normalised error (inf: no fit)."""
    big_n = y.shape[0]
    a[:] = 0.0
    a[0] = 1.0
    if not (math.isfinite(f0) and f0 > 0):
        return math.inf
    period = rate / f0
    yt = np.empty(big_n)
    for t in range(big_n):
        yt[t] = y[t] * taper[t]
    a0 = np.empty(p + 1)
    _autocorrelation_lpc_kernel(yt, p, a0)
    inst = np.empty(big_n + 2, dtype=np.int64)
    cnt = _instants_kernel(y, a0, period, inst)
    if cnt < 2:
        return math.inf
    length = max(int(round(closed_fraction * period)), 2)
    shifts = int(round(max_shift_fraction * period))
    # the equations of the samples inst[i] + d .. + length - 1 (those in p .. N - 1), for
    # d = 0, 1, ...: each step drops the first sample of every stretch and adds the next one
    phi = np.zeros((p, p))
    psi = np.zeros(p)
    psi0 = 0.0
    rows = 0
    for i in range(cnt):
        for t in range(inst[i], inst[i] + length):
            if p <= t < big_n:
                psi0 += _add_equation(y, t, p, 1.0, phi, psi)
                rows += 1
    sol = np.empty(p)
    trial = np.empty(p + 1)
    best = math.inf
    for d in range(shifts + 1):
        if d > 0:
            for i in range(cnt):
                t = inst[i] + d - 1
                if p <= t < big_n:
                    psi0 += _add_equation(y, t, p, -1.0, phi, psi)
                    rows -= 1
                t += length
                if p <= t < big_n:
                    psi0 += _add_equation(y, t, p, 1.0, phi, psi)
                    rows += 1
        e = _covariance_solve(phi, psi, psi0, rows, p, sol, trial)
        if e < best:
            best = e
            a[:] = trial
    return best
