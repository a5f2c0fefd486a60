"""Judgement of an attempt against the current target.

An attempt is a *hit* when

1. it is usable (no blocking flag, see :data:`livevowel.session.attempts.BLOCKING_FLAGS`),
2. the median (F1, F2) of its steady part lies inside the target region at
   the task's hit size -- Mahalanobis distance ``<= hit_size_sd``, the
   rule of :mod:`livevowel.targets` -- and
3. the vowel stayed inside that region for at least ``hold_s`` without a
   break (the longest run of consecutive frames inside, times the hop).

The closeness score (0-100, 50 on the region edge) is the target set's
``closeness_from_distance`` at the same hit size. The nearest target in the
set (Mahalanobis distance) says what the attempt sounded like.

Pass the set in the speaker's space (``profile.map_set(ts)``) to judge
against a loaded speaker profile, and ``speaker_space=True`` to record that.

The judgement computed here is the *automatic* one; a coach's override is
stored beside it (see :mod:`livevowel.session.store`), never over it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from livevowel.session.attempts import Attempt


@dataclass(frozen=True)
class Judgement:
    """The automatic result for one attempt.

    Attributes
    ----------
    target_id : str or None
        The target judged against (``None``: no target, free practice).
    hit : bool or None
        ``None`` when not judged (attempt flagged, formants not measured,
        or no target).
    distance_sd : float
        Distance of the steady-part median from the target centre, SD units.
    closeness : float
        0..100 at the task's hit size (``nan`` when not measured).
    hit_size_sd : float or None
        Hit size used, SD units.
    hold_s, time_in_target_s : float
        Hold asked for, and the longest unbroken stretch inside, seconds.
    nearest_id : str or None
        Nearest target in the set; ``nearest_distance`` its distance (SD).
    speaker_space : bool
        Judged in the speaker's space (profile loaded).
    reason : str
        A few words for the screen: ``"hit"``, ``"outside the target"``,
        ``"held 0.12 s of 0.30 s"``, ``"not judged: too_short"``...
    """

    target_id: str | None
    hit: bool | None
    distance_sd: float
    closeness: float
    hit_size_sd: float | None
    hold_s: float
    time_in_target_s: float
    nearest_id: str | None
    nearest_distance: float
    speaker_space: bool
    reason: str


def longest_inside_s(attempt: Attempt, target, *, hit_size_sd: float, hop_s: float) -> float:
    """Longest unbroken stretch (seconds) of frames inside the target region."""
    tr = attempt.track
    if len(tr) == 0:
        return 0.0
    d = np.asarray(target.distance(tr.f1_hz, tr.f2_hz), dtype=float)
    inside = tr.voiced & np.isfinite(d) & (d <= hit_size_sd)
    best = run = 0
    for v in inside:
        run = run + 1 if v else 0
        best = max(best, run)
    return best * hop_s


def judge(attempt: Attempt, target_set, target_id: str | None, *, hit_size_sd: float | None = None,
          hold_s: float = 0.0, hop_s: float = 0.010, speaker_space: bool = False) -> Judgement:
    """Judge one attempt.

    Parameters
    ----------
    attempt : Attempt
    target_set : livevowel.targets.TargetSet
        The set (in the speaker's space when a profile is loaded).
    target_id : str or None
        Target of the current prompt (id, IPA symbol or lexical set).
    hit_size_sd : float, optional, keyword-only
        Hit size in SD units; default the target's own.
    hold_s : float, keyword-only
        Seconds the vowel must stay inside the region (0: no hold).
    hop_s : float, keyword-only
        Hop between frames, seconds.
    speaker_space : bool, keyword-only
        Recorded in the judgement.
    """
    from livevowel.targets import closeness_from_distance

    f1, f2 = attempt.f1_hz, attempt.f2_hz
    measured = math.isfinite(f1) and math.isfinite(f2)
    nearest_id, nearest_d = None, float("nan")
    if measured:
        nt, nearest_d = target_set.nearest(f1, f2)
        nearest_id = nt.id
    if target_id is None:
        return Judgement(None, None, float("nan"), float("nan"), hit_size_sd, hold_s, 0.0, nearest_id, nearest_d,
                         speaker_space, "no target")
    target = target_set.get(target_id)
    size = float(hit_size_sd) if hit_size_sd is not None else float(target.hit_size_sd)
    if not measured:
        return Judgement(target.id, None, float("nan"), float("nan"), size, hold_s, 0.0, None, nearest_d,
                         speaker_space, "not judged: formants not measured")
    d = float(target.distance(f1, f2))
    score = float(closeness_from_distance(d, size))
    inside_s = longest_inside_s(attempt, target, hit_size_sd=size, hop_s=hop_s)
    if not attempt.usable:
        blocking = ", ".join(attempt.flags)
        return Judgement(target.id, None, d, score, size, hold_s, inside_s, nearest_id, nearest_d, speaker_space,
                         f"not judged: {blocking}")
    if d > size:
        hit, reason = False, "outside the target"
    elif hold_s > 0 and inside_s + 1e-9 < hold_s:
        hit, reason = False, f"held {inside_s:.2f} s of {hold_s:.2f} s"
    else:
        hit, reason = True, "hit"
    return Judgement(target.id, hit, d, score, size, hold_s, inside_s, nearest_id, nearest_d, speaker_space, reason)
