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

from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations

import numpy as np

__all__ = [
    "TrackerCosts",
    "state_table",
    "state_values",
    "local_costs",
    "transition_costs",
    "viterbi_segments",
    "CausalTracker",
    "DisplaySmoother",
    "median3",
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
    """
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


def transition_costs(prev: np.ndarray, cur: np.ndarray, costs: TrackerCosts) -> np.ndarray:
    """Cost of moving from each state value ``prev (S1, 3)`` to each ``cur (S2, 3)`` -> ``(S1, S2)``."""
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
    n, s = cost.shape
    best = np.full(n, -1, dtype=np.int64)
    if n == 0:
        return best
    feasible = np.isfinite(cost).any(axis=1)
    start = np.asarray(segment_start, dtype=bool).copy()
    start[0] = True
    # segments; inside one, frames with no possible state are stepped over
    # (the path links the feasible frames either side of them)
    bounds = list(np.flatnonzero(start)) + [n]
    for a, b in zip(bounds[:-1], bounds[1:]):
        idx = [t for t in range(a, b) if feasible[t]]
        if not idx:
            continue
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

    def reset(self) -> None:
        self.prev = None
        self.acc = None
        self.sf = None
        self._look = None

    def step(self, cost_t: np.ndarray, sf_t: np.ndarray, cost_n: np.ndarray | None,
             sf_n: np.ndarray | None) -> tuple[int, int]:
        """Choose the state of frame t; returns ``(state_t, provisional_state_next)`` (-1 = none)."""
        if not np.any(np.isfinite(cost_t)):
            return -1, -1
        if self.acc is None:
            acc = cost_t.copy()
        else:
            # transitions into this frame were computed as the lookahead of the last step
            if self._look is not None and self._look[0] is sf_t:
                tr = self._look[1]
            else:
                tr = transition_costs(self.sf, sf_t, self.costs)
            acc = np.min(self.acc[:, None] + tr, axis=0) + cost_t
        acc = acc - np.min(acc)
        tot = acc
        look = None
        self._look = None
        if cost_n is not None and np.any(np.isfinite(cost_n)):
            trn = transition_costs(sf_t, sf_n, self.costs)
            self._look = (sf_n, trn)
            look = trn + cost_n[None, :]
            tot = acc + np.min(look, axis=1)
        st = int(np.argmin(tot))
        nxt = int(np.argmin(look[st])) if look is not None else -1
        self.acc = acc
        self.sf = sf_t
        self.prev = sf_t[st].copy()
        return st, nxt


def median3(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Element-wise median of three arrays, ignoring NaN (median of what is there)."""
    stack = np.stack([a, b, c])
    finite = np.isfinite(stack)
    cnt = finite.sum(axis=0)
    srt = np.sort(np.where(finite, stack, np.inf), axis=0)
    out = np.where(cnt == 3, srt[1], np.where(cnt == 2, 0.5 * (srt[0] + np.where(cnt == 2, srt[1], 0.0)),
                                              np.where(cnt == 1, srt[0], np.nan)))
    # when the current value is missing, report missing
    return np.where(np.isfinite(b), out, np.nan)


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

    def step(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=np.float64)
        if self.y is None:
            self.y = x.copy()
            return self.y.copy()
        with np.errstate(invalid="ignore", divide="ignore"):
            d = np.abs(np.log(x / self.y))
        alpha = self.alpha_min + (1.0 - self.alpha_min) * np.minimum(1.0, d / self.jump)
        new = self.y + alpha * (x - self.y)
        # a formant that appears or disappears takes the new value at once
        new = np.where(np.isfinite(self.y) & np.isfinite(x), new, x)
        self.y = new
        return new.copy()
