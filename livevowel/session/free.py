"""Free practice with a record: no drill, every attempt judged and saved.

On the practice screen without a drill the speaker (or a coach) chooses the
current target with the keys or a click. :class:`FreeSession` records that
practice the way a drill is recorded: each attempt is found in the stream
(:class:`~livevowel.session.attempts.AttemptSegmenter`), judged against the
target that was current while it lasted (an attempt during which the target
was changed is saved but not judged, as the screen drops it), at the
target's own hit size and the screen's hold
(:func:`~livevowel.session.judge.judge`, the rule drills use), and saved to the session record with its clip as soon as its trailing
audio is in (session mode ``free``; every judged attempt is a trial, with
no blocks). Progress across sessions then counts free practice per target
beside drills.

:class:`FreeController` is the screen's target controller for such a run:
the plain stepping controller, plus the saved counts for the header and the
saved results for the pulse and tone, so that what the screen counts is what
the record says.
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

from livevowel.feedback import HitEvent, Tally, TargetController
from livevowel.session.live import ResultFollower
from livevowel.session.attempts import AttemptSettings
from livevowel.session.drills import TrialResult
from livevowel.session.judge import judge
from livevowel.session.runner import CLIP_POST_S, CLIP_PRE_S, DrillSession, Outcome
from livevowel.session.store import SessionRecorder

__all__ = ["FreeSession", "FreeController"]


class _NoPrompts:
    """The run of a session without a drill: no prompts, no blocks, never done."""

    mode = "free"
    state = "free"
    prompt = None
    done = False
    block_states: tuple = ()

    def accepts(self, attempt_start_s: float) -> bool:
        return False

    def tick(self, now_s: float) -> None:
        pass

    def settle(self, now_s: float) -> None:
        pass

    def next(self, now_s: float) -> None:
        pass

    def repeat(self, now_s: float) -> None:
        pass

    def skip_block(self, now_s: float) -> None:
        pass

    def override(self, block_index: int, trial: int, **kw: Any) -> None:
        pass

    def pop_events(self) -> list[dict]:
        return []


class FreeSession(DrillSession):
    """Records free practice: fed like a :class:`~livevowel.session.runner.DrillSession`.

    Parameters
    ----------
    target_set : TargetSet
        The set practised (in the speaker's space when a profile is loaded).
    recorder : SessionRecorder
        Started with ``mode="free"``.
    target_of : callable
        Returns the id of the target current now (the screen's controller),
        or None (nothing to judge against).
    hold_s : float, keyword-only
        Hold asked of each attempt, seconds (the screen's).
    attempt_settings, speaker_space, clip_pre_s, clip_post_s, on_outcome, start_s :
        As for :class:`~livevowel.session.runner.DrillSession`.
    """

    def __init__(self, target_set, recorder: SessionRecorder, target_of: Callable[[], "str | None"], *,
                 hold_s: float, attempt_settings: AttemptSettings = AttemptSettings(),
                 speaker_space: bool = False, clip_pre_s: float = CLIP_PRE_S, clip_post_s: float = CLIP_POST_S,
                 on_outcome: Callable[[Outcome], None] | None = None, start_s: float = 0.0) -> None:
        if not hold_s >= 0:
            raise ValueError(f"hold_s must be >= 0 s, got {hold_s!r}")
        self.drill = None
        self.run = _NoPrompts()
        self.target_of = target_of
        self.hold_s = float(hold_s)
        self._trials = 0
        self._changes: list[tuple[float, str | None]] = []   # (stream time, target id from then on)
        self._init_feed(target_set, recorder, attempt_settings=attempt_settings, start_s=start_s,
                        speaker_space=speaker_space, clip_pre_s=clip_pre_s, clip_post_s=clip_post_s,
                        on_outcome=on_outcome)

    def add_frames(self, frames) -> list[Outcome]:
        """Frames from the engine, oldest first (the current target is noted with them)."""
        if frames:
            tid = self.target_of()
            if not self._changes or self._changes[-1][1] != tid:
                self._changes.append((float(frames[0].time_s), tid))
            # keep what an attempt still open could need
            horizon = float(frames[0].time_s) - self.settings.max_duration_s - 5.0
            while len(self._changes) > 1 and self._changes[1][0] <= horizon:
                self._changes.pop(0)
        return super().add_frames(frames)

    def _targets_during(self, t0: float, t1: float) -> set:
        ids = {tid for t, tid in self._changes if t0 < t <= t1}
        before = [tid for t, tid in self._changes if t <= t0]
        ids.add(before[-1] if before else (self._changes[0][1] if self._changes else self.target_of()))
        return ids

    def _judge(self, att, hop_s: float):
        """Judge against the screen's target (none when it changed during the attempt)."""
        from dataclasses import replace

        during = self._targets_during(att.start_s, att.end_s)
        target = next(iter(during)) if len(during) == 1 else None
        j = judge(att, self.target_set, target, hold_s=self.hold_s, hop_s=hop_s, speaker_space=self.speaker_space)
        if len(during) > 1:
            j = replace(j, reason="not judged: the target changed during the attempt")
        trial = None
        if j.hit is not None:
            self._trials += 1
            trial = TrialResult(self._trials, j.target_id, bool(j.hit), bool(j.hit))
        return j, None, trial

    def _row(self, oc: Outcome) -> dict:
        row = super()._row(oc)
        j = oc.judgement
        if j.target_id is not None:
            row.update({"target_id": j.target_id, "hit_size_sd": j.hit_size_sd, "hold_s": j.hold_s,
                        "trial": oc.trial.trial if oc.trial is not None else None})
        return row


class FreeController(ResultFollower, TargetController):
    """The stepping controller of free practice, showing what :class:`FreeSession` records.

    Parameters
    ----------
    targets, current_id, locked :
        As for :class:`~livevowel.feedback.TargetController`.
    """

    def __init__(self, targets: Sequence[Any], current_id: str | None = None, *, locked: bool = False) -> None:
        super().__init__(targets, current_id, locked=locked)
        self.session: FreeSession | None = None
        self._hits = self._trials = self._streak = 0

    def attach(self, session: FreeSession) -> None:
        """Follow ``session``'s results (its ``target_of`` should read :attr:`current`)."""
        self.session = session

    @property
    def tally(self) -> Tally | None:  # type: ignore[override]
        """Recorded trials, hits and the streak of this session (None before :meth:`attach`)."""
        if self.session is None:
            return None
        return Tally(self._hits, self._trials, self._streak, "saved")

    def take_events(self) -> list[HitEvent] | None:
        return None if self.session is None else super().take_events()

    def update(self, time_s: float) -> None:
        if self.session is None:
            return
        for o in self._follow(self.session.outcomes, time_s):
            self._trials += 1
            self._hits += int(o.trial.hit)
            self._streak = self._streak + 1 if o.trial.hit else 0
