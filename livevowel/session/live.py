"""A drill on the practice screen: the pieces the display loop takes as they are.

The display loop (:func:`livevowel.ui.loop.run`) wants a *pipeline* (start,
stop, drain, health, done) and the screen a *target controller* (current,
next, previous, update, label). A drill provides both:

* :class:`DrillFeed` wraps a tapped live pipeline; every ``drain()`` hands
  the new audio and frames to the :class:`~livevowel.session.runner.DrillSession`
  (which segments, judges, counts and records) and passes the frames on to
  the screen. It reports ``done`` when the drill is over.
* :class:`DrillController` makes the prompt's target the current one and
  puts the prompt, the task and the last result in its ``label`` (shown in
  the screen's header). The screen's next/previous keys become the coach's
  *next* and *repeat*; :meth:`DrillController.override_last` and
  :meth:`DrillController.skip_block` are there for keys the screen may bind.
  It also gives the screen the prompt's task -- the hit size and hold the
  attempt is judged at (after any adaptive change) -- so the region drawn is
  the one judged, and the block's recorded counts for the header; the
  screen's pulse and tone follow the recorded results (:meth:`take_events`).
"""

from __future__ import annotations

from typing import Any, Sequence

from livevowel.feedback import HitEvent, Tally
from livevowel.session.runner import DrillSession, Outcome


class ResultFollower:
    """Mixin for screen controllers: a session's recorded results as screen events.

    Call :meth:`_follow` from ``update`` with the session's outcomes; the
    screen collects the hits and misses with :meth:`take_events` (and pulses
    and sounds the tone for those, at the size each was judged at).
    """

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        self._seen = 0
        self._events: list[HitEvent] = []
        super().__init__(*args, **kwargs)

    def _follow(self, outcomes: Sequence[Outcome], time_s: float) -> list[Outcome]:
        """The counted outcomes since the last call (noted as events)."""
        new = [o for o in outcomes[self._seen:] if o.trial is not None]
        self._seen = len(outcomes)
        for o in new:
            self._events.append(HitEvent("hit" if o.trial.hit else "miss", float(time_s),
                                         o.judgement.target_id or o.trial.target, o.judgement.hit_size_sd))
        return new

    def take_events(self) -> list[HitEvent]:
        """Hits and misses recorded since the last call (oldest first)."""
        out, self._events = self._events, []
        return out


class DrillFeed:
    """A pipeline for the display loop that also runs the drill session."""

    def __init__(self, session: DrillSession, pipeline: Any) -> None:
        self.session = session
        self.pipeline = pipeline
        self.outcomes: list[Outcome] = []

    @property
    def source(self) -> Any:
        """The input the wrapped pipeline reads (the display loop asks whether it is live)."""
        return getattr(self.pipeline, "source", None)

    def start(self) -> "DrillFeed":
        self.pipeline.start()
        return self

    def stop(self, *a: Any, **kw: Any) -> None:
        """Stop the pipeline. Its audio still goes to the session (for the clips of
        attempts already closed), its last frames do not: the loop has read every
        frame when the input ended by itself, and otherwise (quit, time limit) the
        rest is the flush of a stopped input, whose open attempt the session's
        ``finish(stopped=True)`` keeps unjudged."""
        self.pipeline.stop(*a, **kw)
        for b in self.pipeline.take_blocks():
            self.session.add_audio(b.samples, start_s=b.start_time_s, rate_hz=b.rate_hz)
        self.pipeline.drain()

    def drain(self) -> list:
        for b in self.pipeline.take_blocks():
            self.session.add_audio(b.samples, start_s=b.start_time_s, rate_hz=b.rate_hz)
        frames = self.pipeline.drain()
        if not self.session.done:
            self.outcomes += self.session.add_frames(frames)
        return frames

    def health(self) -> Any:
        return self.pipeline.health()

    @property
    def done(self) -> bool:
        return self.session.done or self.pipeline.done

    def pause(self) -> None:
        fn = getattr(self.pipeline, "pause", None)
        if fn is not None:
            fn()

    def resume(self) -> None:
        fn = getattr(self.pipeline, "resume", None)
        if fn is not None:
            fn()

    def __getattr__(self, name: str) -> Any:  # latency_budget, results ... of the real pipeline
        return getattr(self.pipeline, name)


class DrillController(ResultFollower):
    """The screen's target controller, driven by a drill session.

    Parameters
    ----------
    session : DrillSession
    targets : sequence of Target
        The targets the screen draws (the session's set).
    """

    locked = True

    def __init__(self, session: DrillSession, targets: Sequence[Any]) -> None:
        super().__init__()
        self.session = session
        self.targets = tuple(targets)
        self._ids = [t.id for t in self.targets]
        self._index = 0
        self.version = 0
        self.label = ""
        self._final: Tally | None = None
        self.update(0.0)

    @property
    def current(self) -> Any:
        return self.targets[self._index]

    @property
    def hit_size_sd(self) -> float | None:
        """The prompt's hit size (SD units; None: the target's own), as judged."""
        p = self.session.prompt
        return None if p is None else p.hit_size_sd

    @property
    def hold_s(self) -> float | None:
        """The prompt's hold, seconds (0: the attempt is judged without one)."""
        p = self.session.prompt
        return None if p is None else p.hold_s

    @property
    def tally(self) -> Tally:
        """Recorded hits and trials of the current block (after the drill: of the session)."""
        s = self.session
        if s.done or s.prompt is None:
            if self._final is None:      # asked every frame: read the record once
                summ = s.recorder.store.summary(s.recorder.session_id)
                self._final = Tally(summ.hits, summ.trials, 0, "session")
            return self._final
        st = s.run.block
        counted = st.counted()
        streak = 0
        for r in reversed(counted):
            if not r.hit:
                break
            streak += 1
        return Tally(sum(r.hit for r in counted), len(counted), streak, f"block {st.index + 1}")

    def update(self, time_s: float) -> None:
        """Follow the prompt; refresh the label; note new recorded results."""
        s = self.session
        if self._follow(s.outcomes, time_s):
            self._final = None
        p = s.prompt
        if p is not None:
            tid = s.target_set.get(p.target).id
            if tid in self._ids:
                i = self._ids.index(tid)
                if i != self._index:
                    self._index = i
                    self.version += 1
        self.label = self.describe()

    def describe(self) -> str:
        """Prompt, block, trial, task and the last result, in one line."""
        s = self.session
        p = s.prompt
        if s.done or p is None:
            summ = s.recorder.store.summary(s.recorder.session_id)
            return f"drill finished: {summ.hits}/{summ.trials} hits"
        nb = len(s.drill.blocks)
        size = f"{p.hit_size_sd:.1f} SD" if p.hit_size_sd is not None else ""
        hold = f", hold {p.hold_s:.2f} s" if p.hold_s > 0 else ""
        text = f"say \u201c{p.item.prompt}\u201d  \u00b7  block {p.block_index + 1}/{nb} trial {p.trial}  ({size}{hold})"
        if s.outcomes:
            o = s.outcomes[-1]
            if o.trial is not None:
                res = "hit" if o.trial.hit else "miss"
                like = f", sounded like {o.judgement.nearest_id}" if o.judgement.nearest_id else ""
                text += f"  \u00b7  last: {res} {o.judgement.closeness:.0f}{like}"
            elif o.prompt is not None:
                text += f"  \u00b7  last: not counted ({o.judgement.reason})"
        if s.run.mode == "coach" and s.run.state == "result":
            text += "  \u00b7  \u2192 next, \u2190 again"
        return text

    # screen keys -------------------------------------------------------------------
    def next(self) -> bool:
        """Coach: the next prompt (self-paced: nothing)."""
        if self.session.run.mode != "coach":
            return False
        self.session.next()
        self.update(self.session.now_s)
        return True

    def previous(self) -> bool:
        """Coach: the same prompt again."""
        if self.session.run.mode != "coach":
            return False
        self.session.repeat()
        self.update(self.session.now_s)
        return True

    def select(self, target_id: str) -> bool:
        return False

    def skip_block(self) -> bool:
        if self.session.run.mode != "coach":
            return False
        self.session.skip_block()
        self.update(self.session.now_s)
        return True

    def override_last(self, hit: bool | None, note: str | None = None) -> bool:
        """Coach: judge the last attempt yourself (stored beside the automatic result)."""
        if not self.session.outcomes:
            return False
        self.session.override(self.session.outcomes[-1].number, hit=hit, note=note)
        self.update(self.session.now_s)
        return True
