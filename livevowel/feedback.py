"""Hit logic of practice: attempts, holds, hits and streaks; which target is current.

Pure session logic, no screen and no clock of its own: callers pass the time
of each analysis frame (seconds of input), so the same rules hold for live
input, a recording played at any pace, and tests with a fake clock.

Rules
-----
* An **attempt** is one stretch of reliable voice (the dot is shown). Gaps
  shorter than ``gap_s`` do not split it; it counts once it has lasted
  ``min_attempt_s``.
* A **hit** is the dot held inside the current target's region without a
  break for ``hold_s`` (default 0.25 s). One hit at most per attempt.
* The **streak** is the number of hits in a row; a counted attempt that ends
  without a hit sets it back to zero. Changing the target drops an attempt
  in progress without scoring it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence


@dataclass(frozen=True)
class HitEvent:
    """Something the screen may react to: ``kind`` is "attempt", "hit" or "miss".

    ``size_sd``: the hit size (SD units) it was judged at, where that is not
    the target's own (a drill's task); None otherwise.
    """

    kind: str
    time_s: float
    target_id: str
    size_sd: float | None = None


@dataclass(frozen=True)
class Tally:
    """Counts a controller keeps for the screen's header instead of the screen's own.

    A drill judges each attempt itself (:mod:`livevowel.session.judge`); its
    controller hands the screen these numbers so that the header shows what
    is recorded. ``scope`` says what they cover (e.g. "block 2").
    """

    hits: int
    trials: int
    streak: int
    scope: str = ""


@dataclass
class TargetScore:
    """Attempts and hits on one target."""

    attempts: int = 0
    hits: int = 0


class HitCounter:
    """Counts attempts, hits and the streak from a stream of dot states.

    Parameters (keyword-only)
    -------------------------
    hold_s : float
        Time the dot must stay inside the region for a hit, seconds.
    min_attempt_s : float
        Shortest voiced stretch that counts as an attempt, seconds.
    gap_s : float
        Longest break in the voice that still continues the same attempt, seconds.
    """

    def __init__(self, *, hold_s: float = 0.25, min_attempt_s: float = 0.12, gap_s: float = 0.15) -> None:
        if hold_s <= 0:
            raise ValueError(f"hold_s must be > 0, got {hold_s}")
        if min_attempt_s < 0 or gap_s < 0:
            raise ValueError("min_attempt_s and gap_s must be >= 0")
        self.hold_s = float(hold_s)
        self.min_attempt_s = float(min_attempt_s)
        self.gap_s = float(gap_s)
        self.attempts = 0
        self.hits = 0
        self.streak = 0
        self.best_streak = 0
        self.scores: dict[str, TargetScore] = {}
        self._reset_attempt()

    def _reset_attempt(self) -> None:
        self._in_attempt = False
        self._start = 0.0
        self._last_seen = 0.0
        self._counted = False
        self._hit = False
        self._inside_since: float | None = None
        self._target: str | None = None

    @property
    def hold_progress(self) -> float:
        """0..1: how far the current hold is towards a hit (1 once hit)."""
        if self._hit:
            return 1.0
        if self._inside_since is None:
            return 0.0
        return min(1.0, (self._last_seen - self._inside_since) / self.hold_s)

    @property
    def in_attempt(self) -> bool:
        return self._in_attempt

    def score(self, target_id: str) -> TargetScore:
        return self.scores.setdefault(target_id, TargetScore())

    def abandon(self) -> None:
        """Drop an attempt in progress without scoring it (e.g. the target changed)."""
        self._reset_attempt()

    def _end_attempt(self, t: float, out: list) -> None:
        if self._counted and not self._hit:
            self.streak = 0
            out.append(HitEvent("miss", t, self._target or ""))
        self._reset_attempt()

    def update(self, time_s: float, *, present: bool, inside: bool, target_id: str) -> list[HitEvent]:
        """Feed one frame; returns the events it caused (often none).

        Parameters
        ----------
        time_s : float
            Frame time, seconds (must not go backwards within an attempt).
        present : bool
            A reliable voice measure exists (the dot is shown).
        inside : bool
            The dot is inside the current target's region (ignored when not present).
        target_id : str
            The current target.
        """
        out: list[HitEvent] = []
        t = float(time_s)
        if self._in_attempt and target_id != self._target:
            self._reset_attempt()
        if not present:
            self._inside_since = None
            if self._in_attempt and t - self._last_seen > self.gap_s:
                self._end_attempt(t, out)
            return out
        if self._in_attempt and t - self._last_seen > self.gap_s:
            self._end_attempt(t, out)
        if not self._in_attempt:
            self._in_attempt = True
            self._start = t
            self._target = target_id
        self._last_seen = t
        if not self._counted and t - self._start >= self.min_attempt_s:
            self._counted = True
            self.attempts += 1
            self.score(target_id).attempts += 1
            out.append(HitEvent("attempt", t, target_id))
        if inside:
            if self._inside_since is None:
                self._inside_since = t
            if not self._hit and t - self._inside_since >= self.hold_s - 1e-9:
                if not self._counted:  # a hit is always an attempt too
                    self._counted = True
                    self.attempts += 1
                    self.score(target_id).attempts += 1
                    out.append(HitEvent("attempt", t, target_id))
                self._hit = True
                self.hits += 1
                self.score(target_id).hits += 1
                self.streak += 1
                self.best_streak = max(self.best_streak, self.streak)
                out.append(HitEvent("hit", t, target_id))
        else:
            self._inside_since = None
        return out


class TargetController:
    """Which target is current, and moving between targets.

    The screen asks ``current`` every frame and calls :meth:`update` with the
    input time, so a drill or a scripted demo can subclass this and change
    the target on its own schedule.

    Parameters
    ----------
    targets : sequence of Target
        The targets that can be chosen, in stepping order.
    current_id : str, optional
        Start here (default: the first target).
    locked : bool, keyword-only
        Practice on one target: next/previous/select do nothing.
    """

    def __init__(self, targets: Sequence[Any], current_id: str | None = None, *, locked: bool = False) -> None:
        self.targets = tuple(targets)
        if not self.targets:
            raise ValueError("TargetController needs at least one target")
        ids = [t.id for t in self.targets]
        if current_id is None:
            self._index = 0
        elif current_id in ids:
            self._index = ids.index(current_id)
        else:
            raise ValueError(f"no target {current_id!r}; known: {', '.join(ids)}")
        self.locked = locked
        self.version = 0
        #: Short description for the screen's header ("" for free stepping).
        self.label = "one target" if locked else ""

    #: Size (SD units) at which the screen draws and tests the current region;
    #: None: the target's own ``hit_size_sd``. A drill sets its task's size.
    hit_size_sd: float | None = None
    #: Hold (s) for the screen's hold arc and hits; None or 0: the screen's own.
    hold_s: float | None = None
    #: Counts for the header (:class:`Tally`); None: the screen counts itself.
    tally: "Tally | None" = None

    def take_events(self) -> "list[HitEvent] | None":
        """Results judged by the controller's owner since the last call, or None
        when the screen's own hold-based hits are the ones to show (the plain
        controller). A drill returns its recorded hits and misses, and the
        screen pulses and sounds the tone for those instead."""
        return None

    @property
    def current(self) -> Any:
        return self.targets[self._index]

    def _set(self, index: int) -> bool:
        index %= len(self.targets)
        if self.locked or index == self._index:
            return False
        self._index = index
        self.version += 1
        return True

    def next(self) -> bool:
        """Step to the next target; False when nothing changed."""
        return self._set(self._index + 1)

    def previous(self) -> bool:
        """Step to the previous target; False when nothing changed."""
        return self._set(self._index - 1)

    def select(self, target_id: str) -> bool:
        """Make ``target_id`` current; False when locked, unknown or already current."""
        for i, t in enumerate(self.targets):
            if t.id == target_id:
                return self._set(i)
        return False

    def update(self, time_s: float) -> None:
        """Called with the input time of every frame; the plain controller ignores it."""


class ScriptedController(TargetController):
    """A controller that follows a timetable ``[(start_s, target_id), ...]``.

    From each ``start_s`` (input time, seconds) on, ``target_id`` is current.
    Used by the demo; a drill can do the same with its prompts. Keys and
    clicks do not move it (it is locked).
    """

    def __init__(self, targets: Sequence[Any], timetable: Sequence[tuple[float, str]]) -> None:
        steps = sorted((float(t), str(i)) for t, i in timetable)
        if not steps:
            raise ValueError("ScriptedController needs a non-empty timetable")
        super().__init__(targets, steps[0][1], locked=True)
        ids = [t.id for t in self.targets]
        for _, tid in steps:
            if tid not in ids:
                raise ValueError(f"timetable names unknown target {tid!r}")
        self._steps = steps
        self.label = "targets follow the script"

    def update(self, time_s: float) -> None:
        want = self._steps[0][1]
        for start, tid in self._steps:
            if time_s >= start:
                want = tid
        if want != self.current.id:
            self._index = [t.id for t in self.targets].index(want)
            self.version += 1
