"""Guided calibration: prompt the calibration vowels, measure them live, make tokens.

A speaker profile (:mod:`livevowel.profile`) needs the speaker's own F1/F2
(and F3) of at least the corner vowels /i/, /a/ or /ɑ/, and /u/.
:func:`run_calibration` asks for each vowel in turn (``takes`` times),
finds each attempt in the stream with the same segmentation and steady-part
measures as drills (:mod:`livevowel.session.attempts`), asks again when an
attempt is flagged (too short, clipped, too quiet, not measured ...) and
returns one :class:`~livevowel.profile.CalibrationToken` per take. A take
that could not be the vowel asked for by any speaker (:func:`plausible_as`:
say LOT when FLEECE was asked) is refused and asked again, so a take never
lands on the wrong vowel. The run is a self-paced drill of one block over
the reference set, kept in memory only (calibration takes are not session
trials).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import numpy as np

from livevowel.errors import UserError
from livevowel.session.runner import DrillSession

__all__ = ["CalibrationTake", "CalibrationSession", "corner_vowels", "resolve_vowels", "plausible_as",
           "calibration_drill", "run_calibration"]

#: Self-paced pause after each take before the next prompt, seconds.
PAUSE_S = 0.5
#: Speaker factors (speaker's formants / the set's) a take may imply. The
#: Peterson & Barney (1952) group means (from memory) put children about 1.4x
#: above men (/i/ F2 3200 vs 2290 Hz, /ɑ/ F1 1030 vs 730 Hz), so 1/1.55-1.6
#: lets a child calibrate against a men's set and a man against a children's.
SCALE_RANGE = (1.0 / 1.55, 1.6)


@dataclass(frozen=True)
class CalibrationTake:
    """One usable take: the vowel asked for and what was measured (Hz)."""

    vowel: str           # target id in the reference set
    take: int            # 1-based take number of this vowel
    f1_hz: float
    f2_hz: float
    f3_hz: float | None
    f0_hz: float | None
    start_s: float
    end_s: float

    def token(self, *, time: str | None = None):
        from livevowel.profile import CalibrationToken

        return CalibrationToken(self.vowel, self.f1_hz, self.f2_hz, self.f3_hz, self.f0_hz, time)


def corner_vowels(target_set) -> list[str]:
    """Target ids of ``target_set`` for /i/, /a/ or /ɑ/, and /u/ (the corners a profile needs).

    Raises :class:`UserError` naming the missing corner when the set lacks one.
    """
    from livevowel.profile import CORNERS

    out = []
    for name, symbols in CORNERS.items():
        hit = next((t.id for t in target_set.targets if (t.ipa or "").replace("ː", "") in symbols), None)
        if hit is None:
            raise UserError(f"target set {target_set.id} has no target for {name}; name the vowels with --vowels")
        out.append(hit)
    return out


def resolve_vowels(target_set, vowels: Sequence[str]) -> list[str]:
    """Target ids of ``vowels`` (ids, IPA symbols or keywords), each once."""
    ids: list[str] = []
    for v in vowels:
        t = target_set.find(v)
        if t is None:
            raise UserError(f"target set {target_set.id} has no vowel {v!r}; known: {', '.join(target_set.ids)}")
        if t.id in ids:
            raise UserError(f"--vowels names {t.id} twice ({v!r}); give each vowel once and use --takes for more")
        ids.append(t.id)
    return ids


def plausible_as(target_set, vowel_id: str, f1_hz: float, f2_hz: float) -> tuple[bool, str]:
    """Whether a take could be ``vowel_id`` said by some speaker.

    True when for some speaker factor ``k`` in :data:`SCALE_RANGE` the
    nearest target of the set to ``(F1 / k, F2 / k)`` is ``vowel_id``;
    otherwise False and the target the take resembles most at any of those
    factors (for the message).
    """
    best, best_d = vowel_id, float("inf")
    for k in np.geomspace(SCALE_RANGE[0], SCALE_RANGE[1], 49):
        t, d = target_set.nearest(f1_hz / k, f2_hz / k)
        if t.id == vowel_id:
            return True, t.id
        if d < best_d:
            best, best_d = t.id, d
    return False, best


def calibration_drill(target_set, vowels: Sequence[str], *, takes: int = 2):
    """A one-block self-paced drill prompting each vowel ``takes`` times in a row (ids or labels)."""
    from livevowel.session.drills import parse_drill

    if not 1 <= int(takes) <= 10:
        raise UserError(f"--takes {takes}: give 1 to 10 takes per vowel")
    items = []
    for vid in resolve_vowels(target_set, vowels):
        t = target_set.get(vid)
        word = t.words[0] if t.words else (t.lexical_set or t.id)
        items += [{"prompt": word, "target": t.id}] * int(takes)
    return parse_drill({"drill": "calibration", "title": "calibration vowels", "target_set": target_set.id,
                        "pause_s": PAUSE_S, "blocks": [{"id": "calibration", "items": items}]},
                       source="calibration")


class CalibrationSession(DrillSession):
    """The calibration drill: a take counts (and the next prompt follows) only
    when it is usable and plausible as the vowel asked for (:func:`plausible_as`);
    an attempt before the prompt is answered with "too early"."""

    def _judge(self, att, hop_s: float):
        from livevowel.session.judge import judge

        prompt = self.run.prompt if self.run.accepts(att.start_s) else None
        if prompt is None:
            j = judge(att, self.target_set, None, hop_s=hop_s)
            return replace(j, reason="too early: wait for the prompt"), None, None
        j = judge(att, self.target_set, prompt.target, hold_s=0.0, hop_s=hop_s)
        if j.hit is not None:
            ok, like = plausible_as(self.target_set, prompt.target, att.f1_hz, att.f2_hz)
            if ok:
                j = replace(j, hit=True, reason="used")
            else:
                t = self.target_set.get(prompt.target)
                j = replace(j, hit=None, reason=f"that sounded like {like}, not {t.lexical_set or t.id}")
        return j, prompt, self.run.attempt(j.hit, now_s=self.now_s)


def run_calibration(target_set, source, *, vowels: Sequence[str] | None = None, takes: int = 2,
                    analysis: Any = None, live: Any = None, attempt_settings: Any = None,
                    on_prompt: Callable[[Any, int], None] | None = None,
                    on_take: Callable[[Any, "CalibrationTake | None"], None] | None = None,
                    wait_s: float | None = None, poll_s: float = 0.005,
                    timeout_s: float | None = None) -> list[CalibrationTake]:
    """Prompt and measure the calibration vowels from ``source`` (not yet started).

    Parameters
    ----------
    target_set : TargetSet
        The reference set (its own space, not mapped).
    source : livevowel.audio.Source
        The microphone, a recording (``PacedFileSource``) or any other source.
    vowels : sequence of str, optional
        Target ids or labels (default :func:`corner_vowels`).
    takes : int
        Usable takes per vowel (1-10).
    analysis, live, attempt_settings :
        Engine, live-path and attempt settings (as drills use them).
    on_prompt : callable, optional
        ``on_prompt(target, take)`` when a vowel is asked for (``take`` 1-based).
    on_take : callable, optional
        ``on_take(outcome, take)`` after each attempt; ``take`` is None when
        the attempt was flagged and the vowel is asked again.
    wait_s : float, optional
        Give up when no attempt at all came for this long (seconds of input)
        after a prompt or the last attempt: :class:`UserError` saying to
        check the input (a muted or wrong microphone gives only silence).
    poll_s, timeout_s : float
        As for :func:`livevowel.session.runner.run_headless` (which runs it).

    Returns
    -------
    list of CalibrationTake
        In the order taken; fewer than asked when the input ended first.
    """
    from livevowel.session.attempts import AttemptSettings
    from livevowel.session.runner import run_headless
    from livevowel.session.store import SessionRecorder

    ids = list(vowels) if vowels else corner_vowels(target_set)
    drill = calibration_drill(target_set, ids, takes=takes)
    rec = SessionRecorder(memory_only=True, clips=False)
    rec.start(mode="self_paced", target_set=target_set.id, drill="calibration")
    got: list[CalibrationTake] = []
    count: dict[str, int] = {}

    def outcome(oc) -> None:
        take = None
        a = oc.attempt
        if oc.trial is not None and oc.prompt is not None:
            vid = oc.prompt.target
            count[vid] = count.get(vid, 0) + 1
            take = CalibrationTake(vid, count[vid], float(a.f1_hz), float(a.f2_hz),
                                   float(a.f3_hz) if a.f3_hz == a.f3_hz else None,
                                   float(a.f0_hz) if a.f0_hz == a.f0_hz else None, float(a.start_s), float(a.end_s))
            got.append(take)
        if on_take is not None:
            on_take(oc, take)

    session = CalibrationSession(drill, target_set, rec, mode="self_paced",
                                 attempt_settings=attempt_settings or AttemptSettings(), on_outcome=outcome)
    shown: tuple | None = None

    def announce() -> None:
        nonlocal shown
        p = session.prompt
        key = None if p is None else (p.block_index, p.trial)
        if p is not None and key != shown and session.run.state == "prompt":
            shown = key
            if on_prompt is not None:
                on_prompt(target_set.get(p.target), count.get(p.target, 0) + 1)
        if p is not None and wait_s is not None and not session.segmenter.in_attempt:
            since = max(p.shown_at_s, session.outcomes[-1].attempt.end_s if session.outcomes else 0.0)
            if session.now_s - since > wait_s:
                raise UserError(f"no voice heard for {wait_s:g} s; check the input (level, mute, device) with "
                                "'livevowel listen' and try again")

    try:
        run_headless(session, source, analysis=analysis, live=live, poll_s=poll_s, timeout_s=timeout_s,
                     on_poll=announce)
    finally:
        rec.close()
    return got
