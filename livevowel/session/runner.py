"""Running a drill: attempts from the stream, judged, counted and recorded.

:class:`DrillSession` is the glue between the live path and the session
logic, shared by the practice screen and the headless run. It is fed from
the consumer's thread (no threads of its own):

* :meth:`DrillSession.add_audio` -- mono samples with their stream time (for
  the clips: a little audio before and after each attempt);
* :meth:`DrillSession.add_frames` -- frames from ``LivePipeline.drain()``;
  returns an :class:`Outcome` per attempt that closed (for the screen);
* :meth:`DrillSession.tick` -- the stream time moved on (self-paced advance);
* coach actions :meth:`~DrillSession.next`, :meth:`~DrillSession.repeat`,
  :meth:`~DrillSession.override`, :meth:`~DrillSession.skip_block`;
* :meth:`DrillSession.finish` -- the summary.

:func:`run_headless` runs a whole drill from a source (e.g.
``PacedFileSource(path, pace=0)``) with no screen and no keys (self-paced),
which is how tests and users without a screen drive it.
"""

from __future__ import annotations

import math
import time
from collections import deque
from dataclasses import dataclass
from typing import Callable

import numpy as np

from livevowel.dsp.types import Frame
from livevowel.session.attempts import Attempt, AttemptSegmenter, AttemptSettings, measure_span
from livevowel.session.drills import Drill, DrillRun, Prompt, TrialResult
from livevowel.session.judge import Judgement, judge
from livevowel.session.store import SessionRecorder, SessionSummary, track_to_json

#: Audio kept before and after each attempt in its clip, seconds.
CLIP_PRE_S = 0.25
CLIP_POST_S = 0.15


@dataclass(frozen=True)
class Outcome:
    """What happened with one attempt (for the screen and the log).

    ``trial`` is the counted trial (``None`` when the attempt did not count:
    flagged, or made while no prompt was up); ``number`` is the attempt's
    number in the session.
    """

    number: int
    attempt: Attempt
    judgement: Judgement
    prompt: Prompt | None
    trial: TrialResult | None

    def line(self) -> str:
        """One line for a log: number, time, prompt, result, measures."""
        a, j = self.attempt, self.judgement
        where = f"{a.start_s:7.2f}-{a.end_s:6.2f} s"
        if self.prompt is not None:
            what = f"{self.prompt.item.prompt!r}->{self.prompt.target}"
        elif j.target_id:   # free practice judges against the screen's target
            what = f"->{j.target_id}"
        else:
            what = "(target changed)" if "target changed" in j.reason else "(between prompts)"
        if self.trial is not None:
            res = "HIT " if self.trial.hit else "miss"
            res += f" {j.closeness:3.0f}"
        else:
            res = "----"
        meas = (f"F1 {a.f1_hz:4.0f} F2 {a.f2_hz:4.0f} Hz" if math.isfinite(a.f1_hz) and math.isfinite(a.f2_hz)
                else "F1/F2 not measured")
        target = j.target_id or (self.prompt.target if self.prompt is not None else None)
        if not j.nearest_id:
            near = ""
        elif self.trial is not None and self.trial.hit and j.nearest_id != target:
            near = f" (in range; nearest centre {j.nearest_id})"   # a hit that "sounded like" another vowel puzzles
        else:
            near = f" sounded like {j.nearest_id}"
        if self.trial is not None:
            note = "" if j.reason == "hit" else f" ({j.reason})"
        elif self.prompt is None and j.target_id is None and "target changed" not in j.reason:
            note = " (not counted)"
        else:
            note = f" ({j.reason})"
        return f"#{self.number:<3} {where}  {what:<22} {res}  {meas}{near}{note}"


class _AudioRing:
    """The last few seconds of mono audio, addressable by stream time."""

    def __init__(self, keep_s: float) -> None:
        self.keep_s = keep_s
        self.blocks: deque[tuple[float, np.ndarray]] = deque()
        self.rate_hz: float | None = None
        self.end_s = 0.0

    def add(self, samples: np.ndarray, start_s: float, rate_hz: float) -> None:
        x = np.asarray(samples, dtype=np.float32)
        if x.ndim == 2:
            x = x.mean(axis=1) if x.shape[1] > 1 else x[:, 0]
        if self.rate_hz is None:
            self.rate_hz = float(rate_hz)
        self.blocks.append((float(start_s), x))
        self.end_s = float(start_s) + len(x) / self.rate_hz
        while self.blocks and self.blocks[0][0] + len(self.blocks[0][1]) / self.rate_hz < self.end_s - self.keep_s:
            self.blocks.popleft()

    def get(self, t0: float, t1: float) -> np.ndarray | None:
        if self.rate_hz is None:
            return None
        parts = []
        for start, x in self.blocks:
            end = start + len(x) / self.rate_hz
            if end <= t0 or start >= t1:
                continue
            i = max(0, int(round((t0 - start) * self.rate_hz)))
            j = min(len(x), int(round((t1 - start) * self.rate_hz)))
            if j > i:
                parts.append(x[i:j])
        return np.concatenate(parts) if parts else None


class DrillSession:
    """One drill session: segment, judge, count, record (see module docstring).

    Parameters
    ----------
    drill : Drill
    target_set : TargetSet
        In the speaker's space when a profile is loaded (then pass
        ``speaker_space=True``).
    recorder : SessionRecorder
        Already started (:meth:`SessionRecorder.start`).
    mode : str, keyword-only
        ``"self_paced"`` or ``"coach"``.
    attempt_settings : AttemptSettings, keyword-only
    pause_s : float, optional, keyword-only
        Self-paced pause after each result (default: the drill's).
    seed : int, optional, keyword-only
        Seed for shuffled blocks without one (the seeds used are recorded).
    start_s : float, keyword-only
        Stream time of the first prompt.
    clip_pre_s, clip_post_s : float, keyword-only
        Audio kept before and after each attempt in its clip, seconds.
    on_outcome : callable, optional, keyword-only
        Called with each :class:`Outcome` as it is recorded.

    Attribute ``on_prompt`` (callable, default None) is called with each new
    :class:`~livevowel.session.drills.Prompt` when it is put to the speaker
    (a repeat counts as new), before any attempt answers it.
    """

    def __init__(self, drill: Drill, target_set, recorder: SessionRecorder, *, mode: str = "self_paced",
                 attempt_settings: AttemptSettings = AttemptSettings(), pause_s: float | None = None,
                 seed: int | None = None, start_s: float = 0.0, speaker_space: bool = False,
                 clip_pre_s: float = CLIP_PRE_S, clip_post_s: float = CLIP_POST_S,
                 on_outcome: Callable[[Outcome], None] | None = None) -> None:
        self.drill = drill
        self.run = DrillRun(drill, mode=mode, pause_s=pause_s, default_hit_size_sd=target_set.default_hit_size_sd,
                            seed=seed, start_s=start_s)
        self._init_feed(target_set, recorder, attempt_settings=attempt_settings, start_s=start_s,
                        speaker_space=speaker_space, clip_pre_s=clip_pre_s, clip_post_s=clip_post_s,
                        on_outcome=on_outcome)

    def _init_feed(self, target_set, recorder: SessionRecorder, *, attempt_settings: AttemptSettings,
                   start_s: float, speaker_space: bool, clip_pre_s: float, clip_post_s: float,
                   on_outcome: Callable[[Outcome], None] | None) -> None:
        """What every session fed from the stream keeps (``self.run`` is set before)."""
        self.target_set = target_set
        self.recorder = recorder
        self.settings = attempt_settings
        self.speaker_space = speaker_space
        self.segmenter = AttemptSegmenter(settings=attempt_settings)
        self.clip_pre_s = float(clip_pre_s)
        self.clip_post_s = float(clip_post_s)
        self.audio = _AudioRing(attempt_settings.max_duration_s + clip_pre_s + clip_post_s + 3.0)
        self.outcomes: list[Outcome] = []
        self._pending: list[tuple[Outcome, dict]] = []   # waiting for the clip's trailing audio
        self._number = 0
        self.now_s = start_s
        self.on_outcome = on_outcome
        self.on_prompt: Callable[[Prompt], None] | None = None
        self._announced: Prompt | None = None
        self._write_events()

    # -- feeding ----------------------------------------------------------------
    def add_audio(self, samples: np.ndarray, *, start_s: float, rate_hz: float) -> None:
        """Mono (or multi-channel) samples starting at stream time ``start_s``."""
        self.audio.add(samples, start_s, rate_hz)
        self._flush_pending(final=False)

    def add_frames(self, frames: "list[Frame]") -> list[Outcome]:
        """Frames from the engine, oldest first; returns outcomes of attempts that closed."""
        out: list[Outcome] = []
        for fr in frames:
            for span in self.segmenter.push(fr):
                out.append(self._on_span(span))
            self.tick(fr.time_s)
        self._flush_pending(final=False)
        return out

    def tick(self, now_s: float) -> None:
        """The stream reached ``now_s``: self-paced runs move to the next prompt when due."""
        self.now_s = max(self.now_s, now_s)
        self.run.tick(self.now_s)
        self._write_events()

    def end_of_input(self, *, stopped: bool = False) -> list[Outcome]:
        """The input ended (``stopped``: was stopped during it): close an open
        attempt (flagged ``stopped``) and write everything pending."""
        out = [self._on_span(span) for span in self.segmenter.flush(stopped=stopped)]
        self.run.settle(self.now_s)
        self._flush_pending(final=True)
        return out

    # -- coach actions ------------------------------------------------------------
    def next(self) -> None:
        self.run.next(self.now_s)
        self._write_events()

    def repeat(self) -> None:
        self.run.repeat(self.now_s)
        self._announce()

    def skip_block(self) -> None:
        self.run.skip_block(self.now_s)
        self._write_events()

    def override(self, number: int, *, hit: "bool | None | object" = ..., note: str | None = None,
                 counted: bool | None = None) -> None:
        """A coach's judgement of attempt ``number``, stored beside the automatic one."""
        self._flush_pending(final=True)
        oc = next((o for o in self.outcomes if o.number == number), None)
        if oc is None:
            from livevowel.errors import UserError

            raise UserError(f"no attempt {number} in this session")
        if oc.trial is not None and oc.prompt is not None and (hit is not ... or counted is not None):
            self.run.override(oc.prompt.block_index, oc.trial.trial, hit=hit, counted=counted)
        self.recorder.override(number, hit=hit, note=note, counted=counted)

    # -- state ------------------------------------------------------------------------
    @property
    def done(self) -> bool:
        return self.run.done

    @property
    def prompt(self) -> Prompt | None:
        return self.run.prompt

    def finish(self, *, stopped: bool = False) -> SessionSummary:
        """Write what is pending, stamp the end, return the summary
        (``stopped``: see :meth:`end_of_input`)."""
        self.end_of_input(stopped=stopped)
        self._write_events()
        return self.recorder.finish()

    # -- internals ----------------------------------------------------------------------
    def _on_span(self, span) -> Outcome:
        samples = self.audio.get(span.start_s, span.end_s)
        att = measure_span(span, settings=self.settings, samples=samples)
        j, prompt, trial = self._judge(att, span.hop_s)
        self._number += 1
        oc = Outcome(self._number, att, j, prompt, trial)
        self.outcomes.append(oc)
        row = self._row(oc)
        self._pending.append((oc, row))
        self._write_events()
        return oc

    def _judge(self, att: Attempt, hop_s: float) -> tuple[Judgement, Prompt | None, TrialResult | None]:
        """Judge an attempt against the prompt it answers; register the trial."""
        prompt = self.run.prompt if self.run.accepts(att.start_s) else None
        target = prompt.target if prompt is not None else None
        j = judge(att, self.target_set, target, hit_size_sd=prompt.hit_size_sd if prompt else None,
                  hold_s=prompt.hold_s if prompt else 0.0, hop_s=hop_s, speaker_space=self.speaker_space)
        trial = self.run.attempt(j.hit, now_s=self.now_s) if prompt is not None else None
        return j, prompt, trial

    def _row(self, oc: Outcome) -> dict:
        a, j, p = oc.attempt, oc.judgement, oc.prompt
        row = {
            "number": oc.number, "start_s": a.start_s, "end_s": a.end_s, "duration_s": a.duration_s,
            "f1_hz": a.f1_hz, "f2_hz": a.f2_hz, "f3_hz": a.f3_hz, "f0_hz": a.f0_hz,
            "level_db": a.level_db, "peak_level_db": a.peak_level_db,
            "steady_start_s": a.steady_start_s, "steady_end_s": a.steady_end_s, "steady_method": a.steady_method,
            "measured_fraction": a.measured_fraction, "flags": ",".join(a.flags),
            "auto_hit": None if j.hit is None else int(j.hit), "closeness": j.closeness,
            "nearest_id": j.nearest_id, "nearest_distance": j.nearest_distance,
            "time_in_target_s": j.time_in_target_s, "speaker_space": int(j.speaker_space),
            "counted": 1, "track_json": track_to_json(a.track),
        }
        if p is not None:
            row.update({"block_index": p.block_index, "block_id": p.block_id, "prompt": p.item.prompt,
                        "target_id": j.target_id, "hit_size_sd": j.hit_size_sd, "hold_s": p.hold_s,
                        "trial": oc.trial.trial if oc.trial is not None else None})
        return row

    def _flush_pending(self, *, final: bool) -> None:
        keep = []
        for oc, row in self._pending:
            t1 = oc.attempt.end_s + self.clip_post_s
            if not final and self.audio.rate_hz is not None and self.audio.end_s < t1:
                keep.append((oc, row))
                continue
            clip = self.audio.get(max(0.0, oc.attempt.start_s - self.clip_pre_s), t1)
            self.recorder.attempt(row, samples=clip, rate_hz=self.audio.rate_hz)
            if self.on_outcome is not None:
                self.on_outcome(oc)
        self._pending = keep
        self._announce()            # a prompt held back for these results

    def _write_events(self) -> None:
        for ev in self.run.pop_events():
            self.recorder.event(ev["kind"], stream_s=ev["stream_s"], block_index=ev["block_index"],
                                detail=ev["detail"])
        self._announce()

    def _announce(self) -> None:
        """Call ``on_prompt`` once for each prompt put to the speaker, after the results of the
        attempts before it (a result waits for its clip's tail; the next prompt waits for it)."""
        p = getattr(self.run, "prompt", None)
        if p is not None and p is not self._announced and self.on_prompt is not None and not self._pending:
            self._announced = p
            self.on_prompt(p)


def tapped_pipeline(source, *, analysis=None, live=None, queue_size: int = 200_000):
    """A :class:`~livevowel.audio.pipeline.LivePipeline` that also keeps the raw blocks.

    The blocks (for the attempt clips) are taken with ``take_blocks()`` on
    the consumer's thread and handed to :meth:`DrillSession.add_audio`; frames
    come from ``drain()`` as usual. Use it in place of ``LivePipeline`` when
    running a :class:`DrillSession`, screen or not.
    """
    from livevowel.audio.pipeline import LivePipeline

    class TappedPipeline(LivePipeline):
        def __init__(self, *a, **kw) -> None:
            super().__init__(*a, **kw)
            self._taps: deque = deque()

        def on_block(self, block) -> None:  # source thread: keep it cheap
            self._taps.append(block)
            super().on_block(block)

        def take_blocks(self) -> list:
            out = []
            while self._taps:
                out.append(self._taps.popleft())
            return out

    return TappedPipeline(source, settings=analysis, live=live, queue_size=queue_size)


def feed(session: DrillSession, pipe) -> list[Outcome]:
    """Hand a tapped pipeline's new audio and frames to ``session``; returns closed attempts."""
    for b in pipe.take_blocks():
        session.add_audio(b.samples, start_s=b.start_time_s, rate_hz=b.rate_hz)
    return session.add_frames(pipe.drain())


def run_headless(session: DrillSession, source, *, analysis=None, live=None, poll_s: float = 0.005,
                 timeout_s: float | None = None, warn: Callable[[str], None] | None = None,
                 on_poll: Callable[[], None] | None = None, input_limit_s: float | None = None) -> SessionSummary:
    """Run ``session`` from ``source`` through the live path until the drill or the input ends.

    Parameters
    ----------
    session : DrillSession
    source : livevowel.audio.Source
        Not yet started (e.g. ``PacedFileSource(path, pace=0)``).
    analysis : AnalysisSettings, optional
    live : LiveSettings, optional
    poll_s : float
        Consumer polling interval, seconds.
    timeout_s : float, optional
        Give up (stop the source) after this much wall-clock time.
    warn : callable, optional
        Called with a one-line message when the live path dropped input or results.
    on_poll : callable, optional
        Called before the start and after each hand-over of new frames (e.g.
        to show a new prompt).
    input_limit_s : float, optional
        Stop once this many seconds of input have been measured (stream time,
        as ``--seconds`` of the screen commands).

    Returns
    -------
    SessionSummary
    """
    pipe = tapped_pipeline(source, analysis=analysis, live=live)
    t0 = time.monotonic()
    stopped = False
    if on_poll is not None:
        on_poll()
    pipe.start()
    try:
        while True:
            finished = pipe.done
            feed(session, pipe)
            if on_poll is not None:
                on_poll()
            if session.done or finished:
                break
            if ((timeout_s is not None and time.monotonic() - t0 > timeout_s)
                    or (input_limit_s is not None and session.now_s >= input_limit_s)):
                stopped = True
                break
            time.sleep(poll_s)
    finally:
        pipe.stop()
    if stopped:          # the flush of a stopped input: its audio for the clips, not its frames
        for b in pipe.take_blocks():
            session.add_audio(b.samples, start_s=b.start_time_s, rate_hz=b.rate_hz)
    elif not session.done:
        feed(session, pipe)
    if pipe.error is not None:
        from livevowel.errors import RunFailure

        session.finish(stopped=True)
        raise RunFailure(f"analysis failed: {pipe.error}")
    msgs = []
    if pipe.dropped_blocks:
        msgs.append(f"the analysis fell behind the input and {pipe.dropped_blocks} blocks were dropped; attempt "
                    "times after the first drop are unreliable (play recordings with --pace 0)")
    if pipe.results.dropped:
        msgs.append(f"{pipe.results.dropped} analysis frames were dropped before they were read")
    for m in msgs:
        session.recorder.event("warning", detail={"message": m})
        if warn is not None:
            warn(m)
    return session.finish(stopped=stopped)
