"""Speaker group (adult male, adult female, child) from F0 and formant candidates.

F0 alone does not separate the groups: the group means are far apart (about
130 / 220 / 260 Hz for men / women / children, Peterson & Barney 1952 and
Hillenbrand et al. 1995, from memory) but the ranges overlap, and many
women speak at 250-300 Hz. The formants carry the other half of the evidence:
a shorter vocal tract raises all formants together, children's by about
15-25 % over women's, women's by about 15 % over men's (common practice). F0
and the formant scale covary across speakers but each adds information; the
"sliding template" view of Nearey & Assmann (2007) models a vowel token as a
vowel pattern shifted in log frequency by a speaker scale that F0 predicts
only loosely.

:func:`group_costs` scores each group against its own vowel table:
for each voiced frame, the best match over the group's vowel means (F0, F1,
F2, F3 of Peterson & Barney 1952, Table II, from memory) and over every
increasing choice of three formant candidates for F1..F3 (or two, with a
fixed cost for a missing F3), of the squared log-frequency differences
divided by the spreads in :data:`LOG_SD`. The formant part of a frame's
cost is capped (formants that fit no vowel of any group say little; the
frame's F0 still counts), and the costs add up
over frames: the sum is, up to constants, minus the log-likelihood of the
frames under a Gaussian model in log frequency for each group, with the
vowel (per frame) and the candidate assignment as hidden choices. The
group with the lowest total wins.

Limits: the templates are American English vowels of the 1950s; a speaker
whose vowels sit elsewhere (another accent, another language) fits every
group worse, and a single vowel can fit another group's neighbouring vowel
(e.g. a woman's /i/ with a high F1 near a child's /ɪ/). Several vowels
before the decision help. On the project's Klatt vowels at Hillenbrand et
al. (1995) means (``python -m livevowel.benchmarks.autovoice``) about 9 in
10 single-vowel tokens are placed right where F0 alone placed 7 in 10; the
:data:`LOG_SD` values were compared with a few nearby choices on that same
set, so it is not an untouched test of them.

Nearey, T. M. & Assmann, P. F. (2007). Probabilistic 'sliding template'
models for indirect vowel normalization. In M. J. Solé, P. S. Beddor &
M. Ohala (eds.), Experimental Approaches to Phonology, 246-269. Oxford UP.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from livevowel.dsp._jit import jit

__all__ = ["GROUP_VOICES", "PB1952_MEANS", "LOG_SD", "group_costs", "add_frame_cost", "voice_from_costs",
           "voice_from_frames"]

#: Engine voice of each group, in the order of :func:`group_costs`' output.
GROUP_VOICES: tuple[str, ...] = ("adult_male", "adult_female", "child")

#: Peterson & Barney (1952), Table II: mean F0, F1, F2, F3 (Hz) of ten
#: American English vowels (heed hid head had hod hawed hood who'd hud heard)
#: for men, women and children. Entered from memory.
PB1952_MEANS: dict[str, tuple[tuple[float, float, float, float], ...]] = {
    "adult_male": ((136, 270, 2290, 3010), (135, 390, 1990, 2550), (130, 530, 1840, 2480),
                   (127, 660, 1720, 2410), (124, 730, 1090, 2440), (129, 570, 840, 2410),
                   (137, 440, 1020, 2240), (141, 300, 870, 2240), (130, 640, 1190, 2390),
                   (133, 490, 1350, 1690)),
    "adult_female": ((235, 310, 2790, 3310), (232, 430, 2480, 3070), (223, 610, 2330, 2990),
                     (210, 860, 2050, 2850), (212, 850, 1220, 2810), (216, 590, 920, 2710),
                     (232, 470, 1160, 2680), (231, 370, 950, 2670), (221, 760, 1400, 2780),
                     (218, 500, 1640, 1960)),
    "child": ((272, 370, 3200, 3730), (269, 530, 2730, 3600), (260, 690, 2610, 3570),
              (251, 1010, 2320, 3320), (256, 1030, 1370, 3170), (263, 680, 1060, 3180),
              (276, 560, 1410, 3310), (274, 430, 1170, 3260), (261, 850, 1590, 3360),
              (261, 560, 1820, 2160)),
}

#: Spread (standard deviation of the natural log) of F0, F1, F2, F3 around a
#: group's vowel mean. The formant values are about the scatter of single
#: speakers' tokens around the group means in the published vowel plots plus
#: dialect differences between studies (15 / 10 / 7 %; common practice, from
#: memory). F0's is deliberately wider than its within-group scatter (about
#: 0.12-0.15): it is the cue the groups share most.
LOG_SD: tuple[float, float, float, float] = (0.20, 0.15, 0.10, 0.07)

#: Cost (in squared SD units) of a frame whose candidates give no F3.
MISSING_F3_COST = 4.0

#: Largest formant cost of one frame (formants that fit nothing are not evidence).
FRAME_COST_CAP = 25.0



@lru_cache(maxsize=8)
def _log_templates() -> np.ndarray:
    """(groups, vowels, 4) natural logs of :data:`PB1952_MEANS`."""
    return np.log(np.array([PB1952_MEANS[v] for v in GROUP_VOICES], dtype=np.float64))


def group_costs(f0_hz, cand_hz) -> np.ndarray:
    """Summed cost per speaker group (lower = better fit), in :data:`GROUP_VOICES` order.

    Parameters
    ----------
    f0_hz : array (n,)
        F0 of voiced frames, Hz. Frames with a non-finite or non-positive F0 are left out.
    cand_hz : array (n, K)
        Formant candidates of the same frames, Hz, ascending, NaN-padded
        (as :func:`livevowel.dsp.lpc.formant_candidates` returns them).

    Returns
    -------
    array (3,)
        Sum over frames of each frame's capped cost (see the module notes);
        zeros when no frame is usable.
    """
    f0 = np.asarray(f0_hz, dtype=np.float64).reshape(-1)
    cand = np.asarray(cand_hz, dtype=np.float64)
    if cand.ndim != 2 or cand.shape[0] != f0.shape[0]:
        raise ValueError(f"group_costs: cand_hz must be (n, K) with n = len(f0_hz) = {len(f0)}, "
                         f"got shape {cand.shape}")
    out = np.zeros(len(GROUP_VOICES))
    cand = np.require(cand, requirements="CW")
    lt, sd = _kernel_tables()
    for i in range(len(f0)):
        if math.isfinite(f0[i]) and f0[i] > 0:
            _frame_cost_kernel(float(f0[i]), cand[i], lt, sd, FRAME_COST_CAP, MISSING_F3_COST, out)
    return out


@lru_cache(maxsize=1)
def _kernel_tables() -> tuple[np.ndarray, np.ndarray]:
    """Log templates (G, V, 4) and spreads (4,) as the kernel takes them."""
    return np.ascontiguousarray(_log_templates()), np.asarray(LOG_SD, dtype=np.float64)


def add_frame_cost(costs: np.ndarray, f0_hz: float, cand_hz: np.ndarray) -> None:
    """Add one voiced frame's capped cost per group to ``costs`` (3,) in place (the streaming
    form of :func:`group_costs`: adding frames one by one gives the same sums)."""
    if math.isfinite(f0_hz) and f0_hz > 0:
        lt, sd = _kernel_tables()
        _frame_cost_kernel(float(f0_hz), np.require(np.asarray(cand_hz, dtype=np.float64), requirements="CW"),
                           lt, sd, FRAME_COST_CAP, MISSING_F3_COST, costs)


def voice_from_costs(costs: np.ndarray) -> str:
    """The group with the lowest summed cost; ties go to the adult female voice, then adult male."""
    order = (1, 0, 2)
    best = min(order, key=lambda i: (costs[i], order.index(i)))
    return GROUP_VOICES[best]


@jit
def _frame_cost_kernel(f0, cand, lt, sd, cap, miss, out):  # pragma: no cover - compiled
    """One frame of :func:`group_costs`, added to ``out`` (G,)."""
    g_n, v_n = lt.shape[0], lt.shape[1]
    k = cand.shape[0]
    lc = np.empty(k)
    for i in range(k):
        lc[i] = math.log(cand[i]) if cand[i] > 0 else np.nan
    lf0 = math.log(f0)
    for g in range(g_n):
        best_g = np.inf
        for v in range(v_n):
            t1 = lt[g, v, 1] / sd[1]
            t2 = lt[g, v, 2] / sd[2]
            t3 = lt[g, v, 3] / sd[3]
            form = np.inf
            for a in range(k):
                x1 = lc[a] / sd[1]
                if not math.isfinite(x1):
                    continue
                for b in range(a + 1, k):
                    x2 = lc[b] / sd[2]
                    if not math.isfinite(x2):
                        continue
                    d12 = (x1 - t1) ** 2 + (x2 - t2) ** 2
                    dp = d12 + miss
                    if dp < form:
                        form = dp
                    for c in range(b + 1, k):
                        x3 = lc[c] / sd[3]
                        if not math.isfinite(x3):
                            continue
                        d = d12 + (x3 - t3) ** 2
                        if d < form:
                            form = d
            f0t = ((lf0 - lt[g, v, 0]) / sd[0]) ** 2
            tot = min(form, cap) + f0t
            if tot < best_g:
                best_g = tot
        out[g] += best_g


def voice_from_frames(f0_hz, cand_hz, *, default: str = "adult_female") -> str:
    """Engine voice whose group fits the frames best (:func:`group_costs`).

    ``default`` is returned when no frame has an F0. Ties go to the adult
    female voice, then adult male.
    """
    f0 = np.asarray(f0_hz, dtype=np.float64).reshape(-1)
    if not np.any(np.isfinite(f0) & (f0 > 0)):
        return default
    return voice_from_costs(group_costs(f0, cand_hz))
