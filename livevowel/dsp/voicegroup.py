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

from functools import lru_cache
from itertools import combinations

import numpy as np

__all__ = ["GROUP_VOICES", "PB1952_MEANS", "LOG_SD", "group_costs", "voice_from_frames"]

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

_CHUNK = 256


@lru_cache(maxsize=8)
def _choices(k: int) -> tuple[np.ndarray, np.ndarray]:
    """Increasing candidate-index triples (F1, F2, F3) and pairs (F1, F2)."""
    triples = np.array(list(combinations(range(k), 3)), dtype=np.int64).reshape(-1, 3)
    pairs = np.array(list(combinations(range(k), 2)), dtype=np.int64).reshape(-1, 2)
    return triples, pairs


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
    keep = np.isfinite(f0) & (f0 > 0)
    f0, cand = f0[keep], cand[keep]
    out = np.zeros(len(GROUP_VOICES))
    if len(f0) == 0:
        return out
    lt = _log_templates()                                   # (G, V, 4)
    g_n, v_n = lt.shape[:2]
    sd = np.asarray(LOG_SD)
    tf = lt[..., 1:].reshape(g_n * v_n, 3) / sd[1:]         # scaled template formants (GV, 3)
    k = cand.shape[1]
    lc = np.log(np.where(cand > 0, cand, np.nan))            # NaN candidates stay NaN
    triples, pairs = _choices(k)
    for a in range(0, len(f0), _CHUNK):
        lcc = lc[a:a + _CHUNK]
        n = lcc.shape[0]
        form = np.full((n, g_n * v_n), np.inf)
        if len(triples):
            sv = lcc[:, triples] / sd[1:]                              # (n, T, 3)
            d = ((sv[:, :, None, :] - tf[None, None, :, :]) ** 2).sum(-1)   # (n, T, GV)
            d = np.where(np.isfinite(d), d, np.inf)
            form = np.minimum(form, d.min(axis=1))
        if len(pairs):
            sv = lcc[:, pairs] / sd[1:3]                               # (n, P, 2)
            d = ((sv[:, :, None, :] - tf[None, None, :, :2]) ** 2).sum(-1) + MISSING_F3_COST
            d = np.where(np.isfinite(d), d, np.inf)
            form = np.minimum(form, d.min(axis=1))
        f0t = ((np.log(f0[a:a + n])[:, None] - lt[..., 0].reshape(1, -1)) / sd[0]) ** 2   # (n, GV)
        tot = (np.minimum(form, FRAME_COST_CAP) + f0t).reshape(n, g_n, v_n).min(axis=2)   # (n, G)
        out += tot.sum(axis=0)
    return out


def voice_from_frames(f0_hz, cand_hz, *, default: str = "adult_female") -> str:
    """Engine voice whose group fits the frames best (:func:`group_costs`).

    ``default`` is returned when no frame has an F0. Ties go to the adult
    female voice, then adult male.
    """
    f0 = np.asarray(f0_hz, dtype=np.float64).reshape(-1)
    if not np.any(np.isfinite(f0) & (f0 > 0)):
        return default
    c = group_costs(f0, cand_hz)
    order = (1, 0, 2)                 # tie-break: adult_female, adult_male, child
    best = min(order, key=lambda i: (c[i], order.index(i)))
    return GROUP_VOICES[best]
