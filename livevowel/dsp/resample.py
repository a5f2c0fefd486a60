"""Sample-rate conversion for the analysis engine.

Offline input goes through :func:`scipy.signal.resample_poly` (zero-phase
polyphase FIR, Kaiser window beta 5). The streaming path needs the same
conversion one block at a time, with output that does not depend on how the
input was cut into blocks: :class:`StreamResampler` uses exactly the filter
``resample_poly`` designs (same ``firwin`` taps, same padding, so the same
output-to-input alignment) but runs it causally, so it has a fixed delay
(:attr:`StreamResampler.delay_s`).

References
----------
Crochiere, R. E. & Rabiner, L. R. (1983). *Multirate Digital Signal
Processing*. Prentice-Hall (polyphase decomposition).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import firwin, resample_poly

from livevowel.dsp._jit import jit

__all__ = ["rational_ratio", "resample", "StreamResampler", "polyphase_filter"]


def rational_ratio(in_rate_hz: float, out_rate_hz: float) -> tuple[int, int]:
    """``(up, down)`` in lowest terms with ``out/in = up/down``.

    Both rates must be whole numbers of Hz (every audio rate in use is).

    Raises
    ------
    ValueError
        A rate that is not a positive whole number.
    """
    for name, r in (("input rate", in_rate_hz), ("output rate", out_rate_hz)):
        if not np.isfinite(r) or r <= 0 or float(r) != int(r):
            raise ValueError(f"{name} must be a positive whole number of Hz, got {r!r}")
    a, b = int(out_rate_hz), int(in_rate_hz)
    g = math.gcd(a, b)
    return a // g, b // g


@dataclass(frozen=True)
class PolyphaseFilter:
    """The ``resample_poly`` filter for one ratio, split into phases.

    Attributes
    ----------
    up, down : int
        Ratio in lowest terms.
    taps : ndarray, shape (up, q)
        ``taps[p, j]`` multiplies input ``x[i0 - j]`` for an output whose
        upsampled position ``t = n*down`` has ``p = t % up``, ``i0 = t // up``.
    pre_remove : int
        Output samples ``resample_poly`` drops at the start; the streaming
        output ``n`` equals the aligned output ``n - pre_remove``.
    """

    up: int
    down: int
    taps: np.ndarray
    pre_remove: int


def polyphase_filter(up: int, down: int, *, window=("kaiser", 5.0)) -> PolyphaseFilter:
    """Design the filter :func:`scipy.signal.resample_poly` uses for ``up/down``.

    Mirrors scipy 1.x: cut-off ``1/max(up, down)`` of Nyquist, ``20*max+1``
    taps, gain ``up``, ``down - half_len % down`` leading zeros.
    """
    max_rate = max(up, down)
    half_len = 10 * max_rate
    h = firwin(2 * half_len + 1, 1.0 / max_rate, window=window) * up
    n_pre_pad = down - half_len % down
    pre_remove = (half_len + n_pre_pad) // down
    h = np.concatenate([np.zeros(n_pre_pad), h])
    q = -(-len(h) // up)
    h = np.concatenate([h, np.zeros(q * up - len(h))])
    taps = np.ascontiguousarray(h.reshape(q, up).T)  # taps[p, j] = h[p + j*up]
    return PolyphaseFilter(up=up, down=down, taps=taps, pre_remove=pre_remove)


def resample(x: np.ndarray, *, in_rate_hz: float, out_rate_hz: float) -> np.ndarray:
    """Resample a 1-D float signal with :func:`scipy.signal.resample_poly`.

    Parameters
    ----------
    x : ndarray, shape (n,)
        Samples (float).
    in_rate_hz, out_rate_hz : float
        Whole-number rates in Hz.

    Returns
    -------
    ndarray, shape (ceil(n * out / in),)
        Output sample ``m`` sits at time ``m / out_rate_hz`` s, like input
        sample ``i`` at ``i / in_rate_hz`` (zero-phase).
    """
    up, down = rational_ratio(in_rate_hz, out_rate_hz)
    x = np.asarray(x, dtype=np.float64)
    if up == down:
        return x.copy()
    if len(x) == 0:
        return np.zeros(0)
    return resample_poly(x, up, down)


class StreamResampler:
    """Causal, block-split-independent version of :func:`resample`.

    Feed input blocks of any length with :meth:`process`; each call returns
    the output samples completed so far. Output sample ``m`` (aligned index,
    same time grid as :func:`resample`) is returned once input up to time
    ``m / out_rate + delay_s`` has been seen. Outputs are computed in fixed
    groups of ``group`` samples (always the same array shapes), so the values
    are bit-identical for every way of cutting the input into blocks.
    :meth:`flush` ends the input (zeros after the end, as ``resample_poly``
    assumes) and returns the rest, so the concatenated output has exactly
    ``ceil(n * out / in)`` samples and matches :func:`resample` to rounding
    error away from the start (both treat samples before 0 as zeros).

    Parameters
    ----------
    in_rate_hz, out_rate_hz : float
        Whole-number rates in Hz.
    group : int
        Outputs computed per step (adds up to ``group - 1`` output samples of
        buffering latency; not part of the algorithmic delay).
    """

    def __init__(self, in_rate_hz: float, out_rate_hz: float, *, group: int = 8) -> None:
        self.in_rate_hz = float(in_rate_hz)
        self.out_rate_hz = float(out_rate_hz)
        self.up, self.down = rational_ratio(in_rate_hz, out_rate_hz)
        self.identity = self.up == self.down
        self.group = int(group)
        if self.identity:
            self._filt = None
            self.delay_s = 0.0
        else:
            self._filt = polyphase_filter(self.up, self.down)
            self.delay_s = self._filt.pre_remove * self.down / self.up / self.in_rate_hz
            q = self._filt.taps.shape[1]
            self._hist = q  # input samples kept before the oldest one needed
        self.reset()

    def reset(self) -> None:
        """Forget all input (back to the state after construction)."""
        self._n_in = 0           # input samples received
        self._buf = np.zeros(0)  # input samples [self._buf0, self._n_in)
        self._buf0 = 0
        self._next = 0           # next stream output index (unaligned, includes pre_remove)
        self._emitted = 0        # aligned outputs returned
        self._done = False

    def _available_groups(self, n_in: int) -> int:
        # Output n needs input index (n*down)//up; a group starting at s needs
        # input up to ((s + G - 1)*down)//up, i.e. s + G - 1 <= last_n with
        # last_n the largest n whose input index is below n_in.
        last_n = (n_in * self.up - 1) // self.down
        return max(0, (last_n - self._next + 1) // self.group)

    def _compute_groups(self, n_groups: int) -> np.ndarray:
        if n_groups <= 0:
            return np.zeros(0)
        step = max(1, 4096 // self.group)         # bounds the (outputs, taps) work array
        if n_groups > step:
            return np.concatenate([self._compute_groups(min(step, n_groups - g))
                                   for g in range(0, n_groups, step)])
        filt = self._filt
        q = filt.taps.shape[1]
        # each output is the same compiled dot product of the same q values, so
        # its value does not depend on how many groups are made in one call
        y = np.empty(n_groups * self.group)
        _polyphase_kernel(self._buf, self._buf0, self._next, self.up, self.down, filt.taps, y)
        self._next += n_groups * self.group
        keep_from = max(0, (self._next * self.down) // self.up - q - 1)
        if keep_from > self._buf0:
            self._buf = self._buf[keep_from - self._buf0:]
            self._buf0 = keep_from
        return y

    def _trim(self, y: np.ndarray, limit: int | None) -> np.ndarray:
        # Map stream outputs to aligned outputs: drop the first pre_remove.
        start_stream = self._next - len(y)
        first_aligned = start_stream - self._filt.pre_remove
        if first_aligned < 0:
            y = y[-first_aligned:] if -first_aligned < len(y) else np.zeros(0)
        if limit is not None:
            y = y[: max(0, limit - self._emitted)]
        self._emitted += len(y)
        return y

    def process(self, x: np.ndarray) -> np.ndarray:
        """Push a 1-D float block; return the aligned outputs now complete."""
        if self._done:
            raise RuntimeError("StreamResampler.process called after flush(); call reset() first")
        x = np.asarray(x, dtype=np.float64).reshape(-1)
        if self.identity:
            self._n_in += len(x)
            self._emitted += len(x)
            return x.copy()
        self._buf = np.concatenate([self._buf, x]) if len(self._buf) else x.copy()
        if self._n_in == 0 and len(x):
            self._buf0 = 0
        self._n_in += len(x)
        n = self._available_groups(self._n_in)
        if n == 0:
            return np.zeros(0)
        return self._trim(self._compute_groups(n), None)

    def flush(self) -> np.ndarray:
        """End of input: return the remaining outputs (total ``ceil(n*up/down)``)."""
        if self._done:
            return np.zeros(0)
        self._done = True
        if self.identity:
            return np.zeros(0)
        n_total = -(-self._n_in * self.up // self.down)
        need_stream = n_total + self._filt.pre_remove  # stream outputs needed in all
        if self._next >= need_stream:
            return np.zeros(0)
        # Pad with zeros far enough for every remaining group.
        n_groups = -(-(need_stream - self._next) // self.group)
        last = self._next + n_groups * self.group - 1
        need_in = (last * self.down) // self.up + 1
        if need_in > self._n_in:
            pad = np.zeros(need_in - self._n_in)
            self._buf = np.concatenate([self._buf, pad]) if len(self._buf) else pad
        return self._trim(self._compute_groups(n_groups), n_total)


@jit
def _polyphase_kernel(buf, buf0, first, up, down, taps, out):  # pragma: no cover - compiled
    """Outputs ``first .. first + len(out) - 1`` of the polyphase filter on the input held in ``buf``
    (input index ``buf0`` onward; indices before 0 read as zero)."""
    q = taps.shape[1]
    last = buf.shape[0] - 1
    for m in range(out.shape[0]):
        t = (first + m) * down
        i0 = t // up
        p = t - i0 * up
        acc = 0.0
        for j in range(q):
            idx = i0 - j
            if idx >= 0 and last >= 0:
                rel = min(max(idx - buf0, 0), last)
                acc += buf[rel] * taps[p, j]
        out[m] = acc
