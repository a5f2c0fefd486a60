"""Assigning formant candidates to F1, F2, F3 with continuity across frames.

Each frame offers up to ``K`` candidates (frequency, bandwidth) from the
roots of the LPC polynomial. A *state* is one way of reading them as
F1 < F2 < F3: an increasing triple of candidate slots, or a pair with F3 not
found (penalised). Costs, all dimensionless:

* local cost of a state in a frame (:func:`local_costs`)

  - ``w_freq * sum_i |ln(F_i / ref_i)|``: distance from reference values of
    the voice (a weak pull that settles which candidate is which);
  - ``w_bw * sum_i min(B_i, 1000) / 500``: wide candidates are weak ones;
  - ``w_harm * sum_i h(F_i, B_i, F0)``: a narrow candidate sitting on a
    harmonic ``k*F0`` is probably the harmonic, not the resonance (the
    "harmonic attraction" of LPC at high F0);
  - ``miss_cost`` when F3 is missing;
  - ``w_skip * exp(-B / skip_bw_hz) * (1 - h)`` for each candidate left out
    below the highest formant taken (a strong resonance is not skipped
    lightly, a harmonic-like one is).

* transition cost between states of consecutive frames
  ``w_trans * sum_i |ln(F_i(t) / F_i(t-1))|`` (over the formants both have).

Offline, the best path over a whole voiced stretch is found by dynamic
programming (Viterbi 1967), in the manner of the formant trackers of Talkin
(1987) and Xia & Espy-Wilson (2000). Causally, :class:`CausalTracker` runs the
same recursion forward (the cost of the best path ending in each state) and
decides each frame with one hop of lookahead: the state that minimises its
accumulated cost plus the best continuation into the next frame. Keeping
every state's accumulated cost, not only the last choice, lets the track
leave a wrong reading once its local costs have added up to more than one
jump: after a sudden vowel change, a greedy choice would hold a candidate
close to the old value (say F3 of /ɑ/ read as F2, next to the F2 of /i/)
for as long as each single frame's local saving is smaller than the jump.

:class:`DisplaySmoother` steadies the causal track for display: median of
three (previous, current, provisional next) followed by an adaptive
one-pole filter that passes large moves at once (resets on jumps) and
smooths small jitter.

Speed: the loops are compiled (:mod:`livevowel.dsp._jit`). The live path
costs one frame at a time (:class:`FrameCoster`, :meth:`CausalTracker.step`,
:meth:`DisplaySmoother.step_median`: a few tens of microseconds per hop in
all, most of it call overhead). The numpy versions the kernels were checked
against stay as ``*_reference`` functions (equal to rounding: the kernels use
the C library's ``log``/``exp``; the Viterbi kernel takes numpy's logarithms
and gives the same paths exactly).

References
----------
Viterbi, A. J. (1967). Error bounds for convolutional codes and an
asymptotically optimum decoding algorithm. *IEEE Trans. Inf. Theory* 13(2).
Talkin, D. (1987). Speech formant trajectory estimation using dynamic
programming with modulated transition costs. *JASA* 82(S1), S55.
Xia, K. & Espy-Wilson, C. (2000). A new strategy of formant tracking based
on dynamic programming. *Proc. ICSLP*.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations

import numpy as np

from livevowel.dsp._jit import jit

__all__ = [
    "TrackerCosts",
    "state_table",
    "state_values",
    "local_costs",
    "FrameCoster",
    "transition_costs",
    "viterbi_segments",
    "CausalTracker",
    "DisplaySmoother",
    "median3",
    "median5_hanning",
    "local_costs_reference",
    "transition_costs_reference",
    "median3_reference",
    "viterbi_segments_reference",
]


@dataclass(frozen=True)
class TrackerCosts:
    """Weights of the tracking costs (see module notes); all dimensionless."""

    w_freq: float = 1.0
    w_bw: float = 1.0
    w_harm: float = 0.5
    w_trans: float = 6.0
    miss_cost: float = 2.0
    w_skip: float = 1.5
    skip_bw_hz: float = 250.0    # a skipped candidate this narrow costs w_skip / e
    harm_bw_hz: float = 80.0     # candidates narrower than about this count as harmonic-like


def state_table(k: int) -> np.ndarray:
    """All states for ``k`` candidate slots: ``(S, 3)`` slot indices, -1 = missing F3 (read-only)."""
    return _state_table(int(k))


@lru_cache(maxsize=16)
def _state_table(k: int) -> np.ndarray:
    triples = [c for c in combinations(range(k), 3)]
    pairs = [(i, j, -1) for i, j in combinations(range(k), 2)]
    out = np.array(triples + pairs, dtype=np.int64).reshape(-1, 3)
    out.setflags(write=False)
    return out


def state_values(cand: np.ndarray, states: np.ndarray) -> np.ndarray:
    """Per-frame values of each state: ``cand (n, K)`` -> ``(n, S, 3)`` (NaN = missing)."""
    n = cand.shape[0]
    padded = np.concatenate([cand, np.full((n, 1), np.nan)], axis=1)  # slot -1 -> NaN column
    return padded[:, states]


def _harmonic_likeness(f: np.ndarray, b: np.ndarray, f0: np.ndarray, bw_scale: float) -> np.ndarray:
    """0..1: how much a candidate looks like a lone harmonic (near k*F0 and narrow)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = f / f0[:, None, None]
        dist = np.abs(ratio - np.round(ratio))          # 0 on a harmonic, 0.5 midway
        near = np.clip(1.0 - dist / 0.2, 0.0, 1.0)      # within 0.2*F0 of a harmonic
        narrow = np.exp(-b / bw_scale)
        h = near * narrow
    return np.where(np.isfinite(h), h, 0.0)


@jit
def _harm_one(f: float, b: float, f0: float, bw_scale: float) -> float:
    """:func:`_harmonic_likeness` of one candidate (0 where undefined)."""
    ratio = f / f0
    if not math.isfinite(ratio):
        return 0.0
    r = math.floor(ratio)
    frac = ratio - r
    dist = 1.0 - frac if frac > 0.5 else frac      # = |ratio - round(ratio)|, exactly
    near = 1.0 - dist / 0.2
    if near < 0.0:
        near = 0.0
    elif near > 1.0:
        near = 1.0
    h = near * math.exp(-b / bw_scale)
    return h if math.isfinite(h) else 0.0


@jit
def _costs_row(freq, bw, f0t, states, skipped, ref, max_hz, use_max, w_freq, w_bw, w_harm, miss_cost, w_skip,
               skip_bw, harm_bw, cost, sf, sb):  # pragma: no cover - compiled
    """Local costs of one frame: ``freq, bw (K,)`` -> ``cost (S,)``, ``sf, sb (S, 3)`` (written)."""
    k = freq.shape[0]
    n_states = states.shape[0]
    val = np.empty(k)
    per = np.empty((k, 3))       # cost of candidate slot j taken as formant i
    over = np.zeros((k, 3), dtype=np.bool_)
    for j in range(k):
        f = freq[j]
        b = bw[j]
        h = _harm_one(f, b, f0t, harm_bw)
        if w_skip != 0.0:
            v = math.exp(-b / skip_bw) * (1.0 - h)
            val[j] = v if math.isfinite(v) else 0.0
        c_bw = 1000.0 if b > 1000.0 else b
        for i in range(3):
            p = w_freq * abs(math.log(f / ref[i])) + w_bw * (c_bw / 500.0) + w_harm * h
            per[j, i] = p if math.isfinite(p) else 0.0
            over[j, i] = use_max and f > max_hz[i]
    for s in range(n_states):
        tot = 0.0
        ok = True
        for i in range(3):
            slot = states[s, i]
            if slot >= 0:
                sf[s, i] = freq[slot]
                sb[s, i] = bw[slot]
                tot += per[slot, i]
                if over[slot, i]:
                    ok = False
            else:
                sf[s, i] = math.nan
                sb[s, i] = math.nan
                tot += 0.0
        miss3 = states[s, 2] < 0
        if miss3:
            tot += miss_cost
        if not (math.isfinite(sf[s, 0]) and math.isfinite(sf[s, 1]) and (miss3 or math.isfinite(sf[s, 2]))):
            ok = False
        if w_skip != 0.0:
            sk = 0.0                       # = (w_skip * val) @ skipped
            for j in range(k):
                if skipped[j, s] != 0.0:
                    sk += (w_skip * val[j]) * skipped[j, s]
            tot = tot + sk
        cost[s] = tot if ok else math.inf


@jit
def _local_costs_kernel(freq, bw, states, skipped, ref, f0, max_hz, use_max, w_freq, w_bw, w_harm,
                        miss_cost, w_skip, skip_bw, harm_bw, cost, sf, sb):  # pragma: no cover - compiled
    for t in range(freq.shape[0]):
        _costs_row(freq[t], bw[t], f0[t], states, skipped, ref, max_hz, use_max, w_freq, w_bw, w_harm,
                   miss_cost, w_skip, skip_bw, harm_bw, cost[t], sf[t], sb[t])


@jit
def _local_costs_one(freq, bw, f0t, states, skipped, ref, max_hz, use_max, weights, cost, sf,
                     sb):  # pragma: no cover - compiled
    _costs_row(freq, bw, f0t, states, skipped, ref, max_hz, use_max, weights[0], weights[1], weights[2],
               weights[3], weights[4], weights[5], weights[6], cost, sf, sb)


class FrameCoster:
    """:func:`local_costs` of one frame at a time, with the fixed inputs prepared once (streaming).

    ``FrameCoster(k, ref_hz=..., costs=..., max_hz=None)(freq, bw, f0_hz)`` with ``freq, bw (K,)``
    in Hz and ``f0_hz`` a float (NaN = unknown) returns ``cost (S,)``, ``sf, sb (S, 3)``: row 0 of
    ``local_costs(freq[None], bw[None], states=state_table(k), ...)``.
    """

    def __init__(self, k: int, *, ref_hz: np.ndarray, costs: TrackerCosts, max_hz: np.ndarray | None = None) -> None:
        self.k = int(k)
        self.states = _state_table(self.k)
        self._states, self._skipped = _kernel_tables(self.k)
        self._ref = np.array(ref_hz, dtype=np.float64).reshape(3)
        self._use_max = max_hz is not None
        self._max = np.array(max_hz, dtype=np.float64).reshape(3) if max_hz is not None else _NO_MAX
        self._w = np.array([costs.w_freq, costs.w_bw, costs.w_harm, costs.miss_cost, costs.w_skip,
                            costs.skip_bw_hz, costs.harm_bw_hz], dtype=np.float64)

    def __call__(self, freq: np.ndarray, bw: np.ndarray, f0_hz: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        freq = _as_f64(freq)
        bw = _as_f64(bw)
        if freq.shape != (self.k,) or bw.shape != (self.k,):
            raise ValueError(f"freq and bw must be ({self.k},); got {freq.shape} and {bw.shape}")
        n_states = self.states.shape[0]
        cost = np.empty(n_states)
        sf = np.empty((n_states, 3))
        sb = np.empty((n_states, 3))
        _local_costs_one(freq, bw, float(f0_hz), self._states, self._skipped, self._ref, self._max,
                         self._use_max, self._w, cost, sf, sb)
        return cost, sf, sb


_F64 = np.dtype(np.float64)


def _as_f64(a) -> np.ndarray:
    """``a`` as a writeable C-contiguous float64 array, copied only when it is not one already.

    One array type per kernel argument keeps one compiled signature per kernel
    (each further one costs seconds of compiling on a fresh machine).
    """
    if type(a) is np.ndarray and a.dtype is _F64:
        fl = a.flags
        if fl.c_contiguous and fl.writeable:
            return a
    return np.require(a, dtype=np.float64, requirements="CW")


def local_costs(freq: np.ndarray, bw: np.ndarray, *, states: np.ndarray, ref_hz: np.ndarray,
                f0_hz: np.ndarray, costs: TrackerCosts,
                max_hz: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Local cost of every state in every frame.

    Parameters
    ----------
    freq, bw : ndarray, shape (n, K)
        Candidate frequencies and bandwidths in Hz, NaN-padded.
    states : ndarray, shape (S, 3)
        From :func:`state_table`.
    ref_hz : ndarray, shape (3,)
        Reference F1, F2, F3 of the voice in Hz.
    f0_hz : ndarray, shape (n,)
        F0 in Hz (NaN when unknown: no harmonic cost).
    costs : TrackerCosts
    max_hz : ndarray, shape (3,), optional
        Highest plausible F1, F2, F3 in Hz; states above are impossible.

    Returns
    -------
    cost : ndarray, shape (n, S)
        ``inf`` where the state needs a candidate the frame does not have.
    sf, sb : ndarray, shape (n, S, 3)
        State frequencies and bandwidths (NaN where missing).

    Notes
    -----
    Compiled (:mod:`livevowel.dsp._jit`); :func:`local_costs_reference` is
    the same computation in numpy array operations (equal to rounding).
    """
    freq = _as_f64(freq)
    bw = _as_f64(bw)
    if freq.ndim != 2 or bw.shape != freq.shape:
        raise ValueError(f"freq and bw must both be (n, K); got {freq.shape} and {bw.shape}")
    n, k = freq.shape
    if states is _state_table(k):
        states, skipped_t = _kernel_tables(k)
    else:
        states = np.require(states, dtype=np.int64, requirements="CW")
        if states.ndim != 2 or states.shape[1] != 3 or (states.size and states.max() >= k):
            raise ValueError(f"states must be (S, 3) slot indices below {k}")
        skipped_t = _skipped_matrix(states, k)
    f0 = np.asarray(f0_hz, dtype=np.float64).reshape(-1)
    if f0.shape[0] != n:
        f0 = np.broadcast_to(f0, (n,))
    f0 = _as_f64(f0)
    ref = _as_f64(ref_hz)
    mx = _NO_MAX if max_hz is None else _as_f64(max_hz)
    s_n = states.shape[0]
    cost = np.empty((n, s_n))
    sf = np.empty((n, s_n, 3))
    sb = np.empty((n, s_n, 3))
    _local_costs_kernel(freq, bw, states, skipped_t, ref, f0, mx, max_hz is not None, float(costs.w_freq),
                        float(costs.w_bw), float(costs.w_harm), float(costs.miss_cost), float(costs.w_skip),
                        float(costs.skip_bw_hz), float(costs.harm_bw_hz), cost, sf, sb)
    return cost, sf, sb


_NO_MAX = np.zeros(3)      # placeholder when there is no upper limit (never written)


def local_costs_reference(freq: np.ndarray, bw: np.ndarray, *, states: np.ndarray, ref_hz: np.ndarray,
                          f0_hz: np.ndarray, costs: TrackerCosts,
                          max_hz: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`local_costs` written with numpy array operations (the definition; slower)."""
    sf = state_values(freq, states)
    sb = state_values(bw, states)
    miss3 = states[:, 2] < 0
    with np.errstate(invalid="ignore", divide="ignore"):
        c_freq = np.abs(np.log(sf / ref_hz[None, None, :]))
        c_bw = np.minimum(sb, 1000.0) / 500.0
    c_harm = _harmonic_likeness(sf, sb, np.asarray(f0_hz, dtype=float), costs.harm_bw_hz)
    per = costs.w_freq * c_freq + costs.w_bw * c_bw + costs.w_harm * c_harm
    # F1 and F2 must exist; F3 may be missing only in the "pair" states.
    need = np.isfinite(sf[:, :, 0]) & np.isfinite(sf[:, :, 1]) & (np.isfinite(sf[:, :, 2]) | miss3[None, :])
    if max_hz is not None:
        with np.errstate(invalid="ignore"):
            need &= ~np.any(sf > np.asarray(max_hz, dtype=float)[None, None, :], axis=2)
    per = np.where(np.isfinite(per), per, 0.0)
    total = per.sum(axis=2) + costs.miss_cost * miss3[None, :]
    if costs.w_skip:
        # leaving out a candidate that lies below the highest formant taken
        k = freq.shape[1]
        skipped_t = _skipped_t(k) if states is _state_table(k) else _skipped_matrix(states, k)
        f0a = np.asarray(f0_hz, dtype=float)
        h = _harmonic_likeness(freq[:, None, :], bw[:, None, :], f0a, costs.harm_bw_hz)[:, 0, :]
        with np.errstate(invalid="ignore"):
            val = np.exp(-bw / costs.skip_bw_hz) * (1.0 - h)
        val = np.where(np.isfinite(val), val, 0.0)
        total = total + costs.w_skip * val @ skipped_t
    total = np.where(need, total, np.inf)
    return total, sf, sb


def _skipped_matrix(states: np.ndarray, k: int) -> np.ndarray:
    """``(K, S)`` float: 1 where state s leaves out candidate slot k below its highest slot."""
    assigned = np.zeros((len(states), k), dtype=bool)
    for c in range(3):
        ok = states[:, c] >= 0
        assigned[np.flatnonzero(ok), states[ok, c]] = True
    top = states.max(axis=1)
    skipped = (~assigned) & (np.arange(k)[None, :] < top[:, None])
    return skipped.T.astype(np.float64)


@lru_cache(maxsize=16)
def _skipped_t(k: int) -> np.ndarray:
    out = _skipped_matrix(_state_table(k), k)
    out.setflags(write=False)
    return out


@lru_cache(maxsize=16)
def _kernel_tables(k: int) -> tuple[np.ndarray, np.ndarray]:
    """Writeable copies of the state table and skip matrix for the kernels (which never write them)."""
    return np.array(_state_table(k)), np.array(_skipped_t(k))


@jit
def _transitions_kernel(prev, cur, w_trans, out):  # pragma: no cover - compiled
    """``out[a, b] = w_trans * sum_i |ln cur[b, i] - ln prev[a, i]|`` (non-finite terms count 0)."""
    n_a = prev.shape[0]
    n_b = cur.shape[0]
    lp = np.empty((n_a, 3))
    lc = np.empty((n_b, 3))
    for a in range(n_a):
        for i in range(3):
            lp[a, i] = math.log(prev[a, i])
    for b in range(n_b):
        for i in range(3):
            lc[b, i] = math.log(cur[b, i])
    for a in range(n_a):
        p0 = lp[a, 0]
        p1 = lp[a, 1]
        p2 = lp[a, 2]
        for b in range(n_b):
            d0 = abs(lc[b, 0] - p0)
            d1 = abs(lc[b, 1] - p1)
            d2 = abs(lc[b, 2] - p2)
            tot = 0.0
            tot += d0 if math.isfinite(d0) else 0.0
            tot += d1 if math.isfinite(d1) else 0.0
            tot += d2 if math.isfinite(d2) else 0.0
            out[a, b] = w_trans * tot


def transition_costs(prev: np.ndarray, cur: np.ndarray, costs: TrackerCosts) -> np.ndarray:
    """Cost of moving from each state value ``prev (S1, 3)`` to each ``cur (S2, 3)`` -> ``(S1, S2)``."""
    prev = _as_f64(prev)
    cur = _as_f64(cur)
    if prev.ndim != 2 or cur.ndim != 2 or prev.shape[1] != 3 or cur.shape[1] != 3:
        raise ValueError(f"prev and cur must be (S, 3); got {prev.shape} and {cur.shape}")
    out = np.empty((prev.shape[0], cur.shape[0]))
    _transitions_kernel(prev, cur, float(costs.w_trans), out)
    return out


def transition_costs_reference(prev: np.ndarray, cur: np.ndarray, costs: TrackerCosts) -> np.ndarray:
    """:func:`transition_costs` with numpy array operations (the definition; slower)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        d = np.abs(np.log(cur[None, :, :] / prev[:, None, :]))
    d = np.where(np.isfinite(d), d, 0.0)
    return costs.w_trans * d.sum(axis=2)


def viterbi_segments(cost: np.ndarray, sf: np.ndarray, segment_start: np.ndarray,
                     costs: TrackerCosts) -> np.ndarray:
    """Best state per frame by dynamic programming, restarted at segment starts.

    Parameters
    ----------
    cost : ndarray, shape (n, S)
        Local costs of the frames to track (voiced frames only, in order).
    sf : ndarray, shape (n, S, 3)
        State frequencies.
    segment_start : ndarray of bool, shape (n,)
        True where a new stretch begins (no transition cost from the frame before).

    Returns
    -------
    ndarray of int, shape (n,)
        Chosen state index per frame (-1 where every state is impossible).
    """
    cost = np.asarray(cost, dtype=np.float64)
    sf = np.asarray(sf, dtype=np.float64)
    if cost.ndim != 2 or sf.shape != cost.shape + (3,):
        raise ValueError(f"need cost (n, S) and sf (n, S, 3); got {cost.shape} and {sf.shape}")
    best = np.full(cost.shape[0], -1, dtype=np.int64)
    for idx in _feasible_segments(cost, segment_start):
        with np.errstate(invalid="ignore", divide="ignore"):
            logf = np.log(sf[idx])                # (len, S, 3); NaN where missing
        logf = np.where(np.isfinite(logf), logf, np.nan)
        best[idx] = _viterbi_kernel(np.ascontiguousarray(cost[idx], dtype=np.float64), logf,
                                    float(costs.w_trans))
    return best


@jit
def _viterbi_kernel(cost, logf, w_trans):  # pragma: no cover - compiled
    """Best path through one segment: ``cost (m, S)``, ``logf (m, S, 3)`` (NaN = missing) -> ``(m,)``.

    Transition ``w_trans * sum_i |logf[j, s, i] - logf[j-1, p, i]|`` (missing terms count 0);
    ties go to the lowest state index.
    """
    m, n_states = cost.shape
    back = np.zeros((m, n_states), dtype=np.int64)
    acc = cost[0].copy()
    new = np.empty(n_states)
    for j in range(1, m):
        for s in range(n_states):
            if cost[j, s] == math.inf:
                # an impossible reading stays impossible whatever came before (the
                # path never passes through it: frames with no finite state are left out)
                back[j, s] = 0
                new[s] = math.inf
                continue
            c0 = logf[j, s, 0]
            c1 = logf[j, s, 1]
            c2 = logf[j, s, 2]
            lo = math.inf
            arg = 0
            for p in range(n_states):
                if acc[p] == math.inf:
                    continue                  # inf + anything is never below lo
                d0 = abs(c0 - logf[j - 1, p, 0])
                d1 = abs(c1 - logf[j - 1, p, 1])
                d2 = abs(c2 - logf[j - 1, p, 2])
                if math.isnan(d0):
                    d0 = 0.0
                if math.isnan(d1):
                    d1 = 0.0
                if math.isnan(d2):
                    d2 = 0.0
                v = acc[p] + w_trans * (d0 + d1 + d2)
                if v < lo:
                    lo = v
                    arg = p
            back[j, s] = arg
            new[s] = lo + cost[j, s]
        for s in range(n_states):
            acc[s] = new[s]
    path = np.empty(m, dtype=np.int64)
    st = 0
    lo = math.inf
    for s in range(n_states):
        if acc[s] < lo:
            lo = acc[s]
            st = s
    for j in range(m - 1, -1, -1):
        path[j] = st
        st = back[j, st]
    return path


def _feasible_segments(cost: np.ndarray, segment_start: np.ndarray) -> list[np.ndarray]:
    """Frame indices of each segment (a new one where ``segment_start``, and at frame 0),
    leaving out frames with no possible state (the path links the feasible frames either
    side of them); empty segments are dropped."""
    n = cost.shape[0]
    if n == 0:
        return []
    feasible = np.isfinite(cost).any(axis=1)
    start = np.asarray(segment_start, dtype=bool).copy()
    if start.shape != (n,):
        raise ValueError(f"segment_start must have shape ({n},), got {start.shape}")
    start[0] = True
    bounds = list(np.flatnonzero(start)) + [n]
    segs = [np.flatnonzero(feasible[a:b]) + a for a, b in zip(bounds[:-1], bounds[1:])]
    return [idx for idx in segs if len(idx)]


def viterbi_segments_reference(cost: np.ndarray, sf: np.ndarray, segment_start: np.ndarray,
                               costs: TrackerCosts) -> np.ndarray:
    """:func:`viterbi_segments` with numpy array operations (the definition; slower)."""
    n, s = cost.shape
    best = np.full(n, -1, dtype=np.int64)
    for idx in _feasible_segments(cost, segment_start):
        acc = cost[idx[0]].copy()
        back = np.zeros((len(idx), s), dtype=np.int64)
        with np.errstate(invalid="ignore", divide="ignore"):
            logf = np.log(sf[idx])                # (len, S, 3); NaN where missing
        logf = np.where(np.isfinite(logf), logf, np.nan)
        cols = np.arange(s)
        # transition costs of all steps at once (= transition_costs), in chunks of frames
        step = max(1, 200000 // (s * s * 3))
        for j0 in range(1, len(idx), step):
            j1 = min(len(idx), j0 + step)
            d = np.abs(logf[j0:j1, None, :, :] - logf[j0 - 1:j1 - 1, :, None, :])
            d[np.isnan(d)] = 0.0
            trs = costs.w_trans * d.sum(axis=3)                          # (steps, S_prev, S_cur)
            for j in range(j0, j1):
                tot = acc[:, None] + trs[j - j0]     # impossible states stay inf
                bj = tot.argmin(axis=0)
                back[j] = bj
                acc = tot[bj, cols] + cost[idx[j]]
        st = int(np.argmin(acc))
        for j in range(len(idx) - 1, -1, -1):
            best[idx[j]] = st
            st = int(back[j, st])
    return best


class CausalTracker:
    """Frame-by-frame state choice: forward dynamic programming with one frame of lookahead.

    Call :meth:`step` with the local costs and state values of frame ``t``
    and of frame ``t + 1`` (``None`` when frame ``t + 1`` is unvoiced or not
    available). Returns the chosen state of ``t`` and a provisional choice
    for ``t + 1`` (used by the display median). :meth:`reset` forgets the
    past (after a long silence).

    The tracker keeps, for every state of the last tracked frame, the cost of
    the best path ending there (Viterbi's forward recursion, shifted so its
    minimum is 0). Frame ``t`` takes ``argmin_s acc_t(s) + min_u [trans(s, u)
    + cost_{t+1}(u)]``; the decisions need not form one connected path (a
    choice is revised by later evidence, as the offline path would be).
    A frame with no possible state is stepped over (the recursion links the
    frames either side of it, as :func:`viterbi_segments` does).
    """

    def __init__(self, costs: TrackerCosts) -> None:
        self.costs = costs
        self.prev: np.ndarray | None = None   # (3,) formants chosen for the previous frame
        self.acc: np.ndarray | None = None    # (S,) accumulated cost of the last tracked frame
        self.sf: np.ndarray | None = None     # (S, 3) state values of the last tracked frame
        self._look: tuple[np.ndarray, np.ndarray] | None = None   # (sf of the next frame, transitions to it)
        self._w_trans = float(costs.w_trans)

    def reset(self) -> None:
        self.prev = None
        self.acc = None
        self.sf = None
        self._look = None

    def step(self, cost_t: np.ndarray, sf_t: np.ndarray, cost_n: np.ndarray | None,
             sf_n: np.ndarray | None) -> tuple[int, int]:
        """Choose the state of frame t; returns ``(state_t, provisional_state_next)`` (-1 = none).

        ``cost_t (S,)``, ``sf_t (S, 3)``: local costs and state values of frame t (from
        :func:`local_costs`); ``cost_n``, ``sf_n`` the same for frame t + 1, or None.
        The transitions into frame t + 1 are kept for the next call and reused when it
        passes the same state values as its ``sf_t`` (compared with a copy kept here).
        """
        cost_t = _as_f64(cost_t)
        sf_t = _as_f64(sf_t)
        if cost_t.ndim != 1 or sf_t.shape != (cost_t.shape[0], 3):
            raise ValueError(f"need cost_t (S,) and sf_t (S, 3); got {cost_t.shape} and {sf_t.shape}")
        have_prev = self.acc is not None
        tr_ready = False
        if have_prev:
            look = self._look
            if look is not None and (look[0] is sf_t or np.array_equal(look[0], sf_t, equal_nan=True)):
                tr = look[1]       # transitions into this frame: the lookahead of the last step
                tr_ready = True
            else:
                tr = np.empty((self.sf.shape[0], sf_t.shape[0]))   # filled by the kernel
            acc_prev, sf_prev = self.acc, self.sf
        else:
            tr, acc_prev, sf_prev = _EMPTY2, _EMPTY1, _EMPTY3
        have_next = cost_n is not None
        if have_next:
            cost_n = _as_f64(cost_n)
            sf_n = _as_f64(sf_n)
            if cost_n.ndim != 1 or sf_n.shape != (cost_n.shape[0], 3):
                raise ValueError(f"need cost_n (S,) and sf_n (S, 3); got {cost_n.shape} and {sf_n.shape}")
            trn = np.empty((sf_t.shape[0], sf_n.shape[0]))
        else:
            cost_n, sf_n, trn = _EMPTY1, _EMPTY3, _EMPTY2
        acc = np.empty(sf_t.shape[0])
        st, nxt, looked = _forward_step(acc_prev, sf_prev, tr, have_prev, tr_ready, cost_t, sf_t, cost_n, sf_n,
                                        have_next, self._w_trans, acc, trn)
        if st < 0:
            return -1, -1
        # a copy: a caller that refills one buffer in place must not get stale transitions
        self._look = (sf_n.copy(), trn) if looked else None
        self.acc = acc
        self.sf = sf_t.copy()         # the caller may refill its array in place
        self.prev = sf_t[st].copy()
        return st, nxt


_EMPTY1 = np.empty(0)
_EMPTY2 = np.empty((0, 0))
_EMPTY3 = np.empty((0, 3))


@jit
def _forward_step(acc_prev, sf_prev, tr, have_prev, tr_ready, cost_t, sf_t, cost_n, sf_n, have_next, w_trans,
                  acc, trn):  # pragma: no cover - compiled
    """One step of :class:`CausalTracker` -> (state, provisional next state, lookahead used).

    ``tr`` holds the transitions from the last tracked frame (``sf_prev``) when ``tr_ready``,
    else it is filled here; ``trn`` receives those into the next frame when it is looked at.
    """
    s_n = cost_t.shape[0]
    any_t = False
    for s in range(s_n):
        if math.isfinite(cost_t[s]):
            any_t = True
            break
    if not any_t:
        return -1, -1, False
    if have_prev and not tr_ready:
        _transitions_kernel(sf_prev, sf_t, w_trans, tr)
    if have_prev:
        for s in range(s_n):
            m = math.inf
            for p in range(acc_prev.shape[0]):
                v = acc_prev[p] + tr[p, s]
                if v < m:
                    m = v
            acc[s] = m + cost_t[s]
    else:
        for s in range(s_n):
            acc[s] = cost_t[s]
    lo = math.inf
    for s in range(s_n):
        if acc[s] < lo:
            lo = acc[s]
    for s in range(s_n):
        acc[s] = acc[s] - lo
    looked = False
    if have_next:
        for u in range(cost_n.shape[0]):
            if math.isfinite(cost_n[u]):
                looked = True
                break
    st = 0
    best = math.inf
    if looked:
        _transitions_kernel(sf_t, sf_n, w_trans, trn)
        for s in range(s_n):
            m = math.inf
            for u in range(cost_n.shape[0]):
                v = trn[s, u] + cost_n[u]
                if v < m:
                    m = v
            v = acc[s] + m
            if v < best:
                best = v
                st = s
    else:
        for s in range(s_n):
            if acc[s] < best:
                best = acc[s]
                st = s
    nxt = -1
    if looked:
        m = math.inf
        for u in range(cost_n.shape[0]):
            v = trn[st, u] + cost_n[u]
            if v < m:
                m = v
                nxt = u
    return st, nxt, looked


def median3(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Element-wise median of three arrays, ignoring NaN (median of what is there).

    Where ``b`` is NaN the result is NaN (a missing current value stays missing).
    """
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    c = np.asarray(c, dtype=np.float64)
    if a.shape == b.shape == c.shape and a.ndim == 1:
        out = np.empty(b.shape)
        _median3_kernel(_as_f64(a), _as_f64(b), _as_f64(c), out)
        return out
    return median3_reference(a, b, c)


@jit
def _median3_kernel(a, b, c, out):  # pragma: no cover - compiled
    for i in range(b.shape[0]):
        y = b[i]
        if not math.isfinite(y):
            out[i] = math.nan
            continue
        x = a[i]
        z = c[i]
        fx = math.isfinite(x)
        fz = math.isfinite(z)
        if fx and fz:
            lo = min(x, z)
            hi = max(x, z)
            out[i] = lo if y < lo else (hi if y > hi else y)
        elif fx:
            out[i] = 0.5 * (min(x, y) + max(x, y))
        elif fz:
            out[i] = 0.5 * (min(y, z) + max(y, z))
        else:
            out[i] = y


def median3_reference(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
    """:func:`median3` with numpy array operations (any equal shapes; the definition)."""
    stack = np.stack([a, b, c])
    finite = np.isfinite(stack)
    cnt = finite.sum(axis=0)
    srt = np.sort(np.where(finite, stack, np.inf), axis=0)
    out = np.where(cnt == 3, srt[1], np.where(cnt == 2, 0.5 * (srt[0] + np.where(cnt == 2, srt[1], 0.0)),
                                              np.where(cnt == 1, srt[0], np.nan)))
    # when the current value is missing, report missing
    return np.where(np.isfinite(b), out, np.nan)


def median5_hanning(values: np.ndarray) -> np.ndarray:
    """Running median of 5, then a 3-point Hanning window, along axis 0 within runs of finite values.

    The nonlinear smoother of Rabiner, Sambur & Schmidt (1975) ("Applications
    of a nonlinear smoothing algorithm to speech processing", *IEEE Trans.
    ASSP* 23(6)) without its residual pass: the median removes isolated
    outliers and keeps steps (a vowel change) sharp, the Hanning window
    ``[1/4, 1/2, 1/4]`` then averages the remaining small jitter. A run is a
    stretch of consecutive finite values of one column (NaN separates runs);
    near the ends of a run the median window shrinks symmetrically (3, then
    1 value) and the Hanning window is skipped at the run's first and last
    frame, so no value is borrowed across a gap. NaN stays NaN.

    Parameters
    ----------
    values : ndarray, shape (n,) or (n, k)
        Tracks in any unit (e.g. Hz), one column per track.

    Returns
    -------
    ndarray of the same shape.
    """
    v = np.asarray(values, dtype=np.float64)
    if v.ndim not in (1, 2):
        raise ValueError(f"values must have shape (n,) or (n, k), got {v.shape}")
    x = v[:, None] if v.ndim == 1 else v
    n = x.shape[0]
    fin = np.isfinite(x)
    pos = np.arange(n)[:, None]
    # distance (frames) to the first and last frame of each value's run
    start = np.maximum.accumulate(np.where(~fin, pos, -1), axis=0)          # last non-finite at or before i
    end = np.minimum.accumulate(np.where(~fin, pos, n)[::-1], axis=0)[::-1]  # first non-finite at or after i
    reach = np.minimum(pos - start - 1, end - pos - 1)                       # >= 0 on finite values
    pad = np.full((n + 4, x.shape[1]), np.nan)
    pad[2:n + 2] = x
    sh = np.stack([pad[2 + o: n + 2 + o] for o in (-2, -1, 0, 1, 2)])        # (5, n, k)
    med5 = np.median(sh, axis=0) if n else x.copy()
    med3 = np.median(sh[1:4], axis=0) if n else x.copy()
    med = np.where(reach >= 2, med5, np.where(reach == 1, med3, x))
    med = np.where(fin, med, np.nan)
    mp = np.full((n + 2, x.shape[1]), np.nan)
    mp[1:n + 1] = med
    han = 0.25 * mp[:n] + 0.5 * med + 0.25 * mp[2:]
    out = np.where(reach >= 1, han, med)
    return out.reshape(v.shape)


class DisplaySmoother:
    """Adaptive one-pole smoothing of F1..F3 that resets on jumps.

    ``y += alpha * (x - y)`` with ``alpha = alpha_min + (1 - alpha_min) *
    min(1, |ln(x / y)| / jump)``: jitter of a few percent is averaged, a
    move of ``jump`` (relative, e.g. 0.15 = 15 %) or more passes at once, so
    a real vowel change is not delayed (see the step-response test).
    """

    def __init__(self, *, alpha_min: float = 0.4, jump: float = 0.15) -> None:
        if not (0 < alpha_min <= 1):
            raise ValueError(f"alpha_min must be in (0, 1], got {alpha_min}")
        if not jump > 0:
            raise ValueError(f"jump must be positive, got {jump}")
        self.alpha_min = float(alpha_min)
        self.jump = float(jump)
        self.y: np.ndarray | None = None

    def reset(self) -> None:
        self.y = None

    def step_median(self, prev: np.ndarray, cur: np.ndarray, nxt: np.ndarray) -> np.ndarray:
        """``step(median3(prev, cur, nxt))`` for 1-D inputs, in one compiled call (the streaming case)."""
        cur = _as_f64(cur)
        prev = _as_f64(prev)
        nxt = _as_f64(nxt)
        if cur.ndim != 1 or prev.shape != cur.shape or nxt.shape != cur.shape:
            raise ValueError(f"prev, cur and nxt must be equal 1-D shapes; got {prev.shape}, {cur.shape}, {nxt.shape}")
        y = self.y
        if y is not None and y.shape != cur.shape:
            raise ValueError(f"inputs have shape {cur.shape}, the smoother holds {y.shape}")
        new = np.empty(cur.shape)
        _median_smooth_kernel(prev, cur, nxt, y if y is not None else _EMPTY1, y is not None, self.alpha_min,
                              self.jump, new)
        self.y = new
        return new.copy()

    def step(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=np.float64)
        if self.y is None or x.shape != self.y.shape:
            if self.y is not None:
                raise ValueError(f"x has shape {x.shape}, the smoother holds {self.y.shape}")
            self.y = x.copy()
            return self.y.copy()
        if x.ndim == 1:
            new = np.empty(x.shape)
            _smoother_kernel(self.y, _as_f64(x), self.alpha_min, self.jump, new)
        else:
            with np.errstate(invalid="ignore", divide="ignore"):
                d = np.abs(np.log(x / self.y))
            alpha = self.alpha_min + (1.0 - self.alpha_min) * np.minimum(1.0, d / self.jump)
            new = self.y + alpha * (x - self.y)
            # a formant that appears or disappears takes the new value at once
            new = np.where(np.isfinite(self.y) & np.isfinite(x), new, x)
        self.y = new
        return new.copy()


@jit
def _smoother_kernel(y, x, alpha_min, jump, out):  # pragma: no cover - compiled
    for i in range(x.shape[0]):
        xi = x[i]
        yi = y[i]
        if math.isfinite(yi) and math.isfinite(xi):
            q = abs(math.log(xi / yi)) / jump
            m = 1.0 if q > 1.0 else q
            alpha = alpha_min + (1.0 - alpha_min) * m
            out[i] = yi + alpha * (xi - yi)
        else:
            out[i] = xi       # a formant that appears or disappears takes the new value at once


@jit
def _median_smooth_kernel(a, b, c, y, has_y, alpha_min, jump, out):  # pragma: no cover - compiled
    _median3_kernel(a, b, c, out)
    if has_y:
        _smoother_kernel(y, out.copy(), alpha_min, jump, out)
