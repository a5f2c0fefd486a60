"""Finding attempts in recordings: the live path's segmentation and judgement, run on files.

A coach reviewing recorded homework wants exactly what the learner would
have seen live. So a recording is analysed with the engine's *causal*
frames (``analyze(..., causal=True)``, which equals the streaming analyser
fed block by block), the samples are taken as the live file source hands
them over (float32, all channels), and the frames go through the session
layer's own :class:`~livevowel.session.attempts.AttemptSegmenter` and
:func:`~livevowel.session.judge.judge` (through
:class:`~livevowel.session.runner.DrillSession` when there is a drill).

How attempts become trials (``pacing``):

``"sequence"`` (default)
    The recording holds the drill's prompts said in order, one attempt per
    trial: each judged attempt is the next trial, and the next prompt follows
    at once (the drill run coach-led, moving on after every trial). A flagged
    attempt (too short, too quiet...) is kept but does not use up a prompt,
    as live. Block rules (advance criteria, adaptive hit size) apply as live.
``"self_paced"``
    The drill's self-paced timing, as ``livevowel drill --source file:PATH``
    would run it: prompts follow ``pause_s`` after each result, and an
    attempt made during the pause is not a trial. The results equal that
    live run's.

Without a drill, ``target`` names one target every attempt aims at (a file
of repetitions of one vowel); with neither, attempts are found, measured and
given their nearest target ("sounded like"), but not judged.

Analysis (:func:`analyse_file`) is a pure function of a path and settings,
so it can run in worker processes; replay and storage
(:func:`review_analysed`) run in the caller's process, which owns the
database.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from livevowel.errors import UserError

#: ``sessions.mode`` of a session made by reviewing a recording.
REVIEW_MODE = "review"
#: How attempts become trials (see the module docstring).
PACINGS = ("sequence", "self_paced")


@dataclass
class Analysed:
    """The engine's causal frames of one recording (picklable; made by :func:`analyse_file`).

    ``error`` is a one-line message when the file could not be analysed
    (then ``frames`` is ``None``).
    """

    path: str
    frames: Any = None            # FrameTrack
    rate_hz: float = 0.0
    channels: int = 0
    duration_s: float = 0.0
    voice: str = ""
    ceiling_hz: float = float("nan")
    warnings: list[str] = field(default_factory=list)
    error: str | None = None


def read_as_live(path: "str | os.PathLike") -> tuple[np.ndarray, float, list[str]]:
    """Samples as the live file source delivers them: ``(n, channels)`` float32, rate in Hz, warnings."""
    from livevowel.audiofile import read_audio

    rec = read_audio(path)
    return rec.samples.astype(np.float32), rec.rate_hz, list(rec.warnings)


def analyse_file(path: str, analysis_values: Mapping | None = None) -> Analysed:
    """Worker: read one recording and compute the engine's causal frames.

    Parameters
    ----------
    path : str
        Audio file (see :func:`livevowel.audiofile.read_audio`).
    analysis_values : mapping, optional
        The ``analysis`` section of the settings (``Settings.values["analysis"]``);
        default the built-in settings.

    Returns
    -------
    Analysed
        With ``error`` set (and no frames) when the file is unusable.
    """
    from livevowel.dsp.engine import AnalysisSettings, analyze

    try:
        x, rate, warns = read_as_live(path)
        if analysis_values is not None:
            from livevowel.config import Settings

            settings = AnalysisSettings.from_config(Settings({"analysis": dict(analysis_values)}))
        else:
            settings = AnalysisSettings()
        res = analyze(x, rate, settings=settings, causal=True)
    except UserError as exc:
        return Analysed(path=str(path), error=str(exc))
    return Analysed(path=str(path), frames=res.frames, rate_hz=float(rate), channels=int(x.shape[1]),
                    duration_s=x.shape[0] / rate, voice=res.voice, ceiling_hz=float(res.ceiling_hz),
                    warnings=warns + [w for w in res.warnings if w not in warns])


def single_target_drill(target_id: str, target_set) -> "Any":
    """A one-block drill in which every attempt aims at ``target_id`` (for ``--target``)."""
    from livevowel.session.drills import AdvanceRule, Block, Drill, Item

    t = target_set.get(target_id)
    block = Block(id=t.id, items=(Item(prompt=t.words[0] if t.words else t.id, target=t.id),),
                  repetitions=1, advance=AdvanceRule(trials=100_000))
    return Drill(id=f"target-{t.id}", title=f"every attempt aims at {t.id}", target_set=target_set.id,
                 blocks=(block,), pause_s=0.0)


@dataclass
class ReviewResult:
    """What reviewing one recording found.

    Attributes
    ----------
    path : str
    session_id : int
        Session number in the record (in memory with ``store=False``).
    rows : list of dict
        Attempt rows as stored (columns of the ``attempts`` table).
    summary : SessionSummary
    drill_done : bool or None
        ``True`` when every block of the drill was finished before the
        recording ended, ``False`` when the recording ended first, ``None``
        without a drill.
    after_drill : int
        Attempts made after the drill had ended (stored, not trials).
    warnings : list of str
    """

    path: str
    session_id: int
    rows: list[dict]
    summary: Any
    drill_done: bool | None
    after_drill: int
    warnings: list[str]

    @property
    def no_speech(self) -> bool:
        """True when no attempt at all was found."""
        return not self.rows


def _mono(samples: np.ndarray) -> np.ndarray:
    x = np.asarray(samples, dtype=np.float32)
    if x.ndim == 2:
        x = x.mean(axis=1) if x.shape[1] > 1 else x[:, 0]
    return x


def _free_rows(frames, samples, rate_hz, target_set, recorder, attempt_settings, clip_pre_s, clip_post_s,
               speaker_space) -> None:
    """No drill, no target: attempts measured and given their nearest target, not judged."""
    from livevowel.session.attempts import AttemptSegmenter, measure_span
    from livevowel.session.judge import judge
    from livevowel.session.store import track_to_json

    mono = _mono(samples)
    seg = AttemptSegmenter(settings=attempt_settings)
    spans = seg.push_track(frames) + seg.flush()
    for number, span in enumerate(spans, start=1):
        i0 = max(0, int(round(span.start_s * rate_hz)))
        i1 = min(len(mono), int(round(span.end_s * rate_hz)))
        a = measure_span(span, settings=attempt_settings, samples=mono[i0:i1])
        j = judge(a, target_set, None, hop_s=span.hop_s, speaker_space=speaker_space)
        row = {
            "number": number, "start_s": a.start_s, "end_s": a.end_s, "duration_s": a.duration_s,
            "f1_hz": a.f1_hz, "f2_hz": a.f2_hz, "f3_hz": a.f3_hz, "f0_hz": a.f0_hz,
            "level_db": a.level_db, "peak_level_db": a.peak_level_db,
            "steady_start_s": a.steady_start_s, "steady_end_s": a.steady_end_s, "steady_method": a.steady_method,
            "measured_fraction": a.measured_fraction, "flags": ",".join(a.flags),
            "auto_hit": None, "closeness": None, "nearest_id": j.nearest_id,
            "nearest_distance": j.nearest_distance, "time_in_target_s": None,
            "speaker_space": int(speaker_space), "counted": 1, "track_json": track_to_json(a.track),
        }
        c0 = max(0, int(round((a.start_s - clip_pre_s) * rate_hz)))
        c1 = min(len(mono), int(round((a.end_s + clip_post_s) * rate_hz)))
        recorder.attempt(row, samples=mono[c0:c1], rate_hz=rate_hz)


def review_analysed(analysed: Analysed, samples: np.ndarray, *, target_set, recorder, drill=None,
                    pacing: str = "sequence", attempt_settings=None, speaker_space: bool = False,
                    clip_pre_s: float | None = None, clip_post_s: float | None = None,
                    seed: int | None = None) -> ReviewResult:
    """Replay one analysed recording through the session layer and record it.

    Parameters
    ----------
    analysed : Analysed
        From :func:`analyse_file` (``error`` must be ``None``).
    samples : ndarray, shape (n, channels)
        The recording as :func:`read_as_live` gives it (for clips and the
        clipping check).
    target_set : TargetSet
        The set judged against (mapped into the speaker's space when a
        profile is used; then pass ``speaker_space=True``).
    recorder : SessionRecorder
        Already started (:meth:`SessionRecorder.start`); finished here.
    drill : Drill, optional, keyword-only
        Prompts and task; ``None``: attempts are not judged.
    pacing : str, keyword-only
        ``"sequence"`` or ``"self_paced"`` (module docstring).
    attempt_settings : AttemptSettings, optional, keyword-only
    clip_pre_s, clip_post_s : float, optional, keyword-only
        Audio kept before/after each attempt in its clip, seconds (default:
        the live values).
    seed : int, optional, keyword-only
        Seed for shuffled blocks without their own.
    """
    from livevowel.session.attempts import AttemptSettings
    from livevowel.session.runner import CLIP_POST_S, CLIP_PRE_S, DrillSession

    if analysed.error is not None:
        raise ValueError(f"review_analysed: {analysed.path} was not analysed ({analysed.error})")
    if pacing not in PACINGS:
        raise UserError(f"pacing {pacing!r} is not one of {', '.join(PACINGS)}")
    att = attempt_settings or AttemptSettings()
    pre = CLIP_PRE_S if clip_pre_s is None else float(clip_pre_s)
    post = CLIP_POST_S if clip_post_s is None else float(clip_post_s)
    frames = analysed.frames
    warnings = list(analysed.warnings)
    drill_done = None
    after = 0
    if drill is None:
        _free_rows(frames, samples, analysed.rate_hz, target_set, recorder, att, pre, post, speaker_space)
        summary = recorder.finish()
    else:
        mode = "coach" if pacing == "sequence" else "self_paced"
        sess = DrillSession(drill, target_set, recorder, mode=mode, attempt_settings=att, seed=seed,
                            speaker_space=speaker_space, clip_pre_s=pre, clip_post_s=post)
        sess.add_audio(samples, start_s=0.0, rate_hz=analysed.rate_hz)
        if mode == "coach":
            for fr in frames:
                sess.add_frames([fr])
                if sess.run.state == "result":
                    sess.next()
        else:
            step = 64
            for k in range(0, len(frames), step):
                sess.add_frames(list(frames[k:k + step]))
        summary = sess.finish()
        drill_done = sess.run.done
        after = sum(1 for o in sess.outcomes if o.prompt is None)
    sid = recorder.session_id
    rows = recorder.store.attempts(sid)
    return ReviewResult(path=analysed.path, session_id=sid, rows=rows, summary=summary, drill_done=drill_done,
                        after_drill=after, warnings=warnings)


def has_attempts(frames, *, settings=None) -> bool:
    """True when the segmenter finds at least one attempt (flagged or not) in ``frames``."""
    from livevowel.session.attempts import AttemptSegmenter, AttemptSettings

    if frames is None or len(frames) == 0:
        return False
    seg = AttemptSegmenter(settings=settings or AttemptSettings())
    return bool(seg.push_track(frames) + seg.flush())


def no_speech_message(analysed: Analysed, *, ignored_below_s: float = 0.03) -> str:
    """One line saying why nothing was found in a recording."""
    fr = analysed.frames
    voiced = int(np.count_nonzero(fr.voiced)) if fr is not None else 0
    why = "the file is silent" if any("silent" in w or "digital silence" in w for w in analysed.warnings) else (
        "no voiced frame" if voiced == 0 else f"only voiced blips shorter than {1e3 * ignored_below_s:.0f} ms")
    return (f"{analysed.path}: no speech found in {analysed.duration_s:.1f} s ({why}); nothing stored for it. "
            "Check the recording (level, microphone) and that it is the right file")


def file_time_utc(path: "str | os.PathLike") -> str | None:
    """Modification time of a file as ISO 8601 UTC text (when the recording was last written)."""
    try:
        t = os.stat(path).st_mtime
    except OSError:
        return None
    return _dt.datetime.fromtimestamp(t, _dt.timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


def format_row(row: Mapping) -> str:
    """One line per attempt for the terminal."""
    def num(v, fmt: str) -> str:
        return format(v, fmt) if isinstance(v, (int, float)) and math.isfinite(v) else "-"

    res = row.get("override_hit")
    if res is None:
        res = row.get("auto_hit")
    counts = row.get("trial") is not None and row.get("counted", 1) and res is not None
    mark = ("HIT " if res else "miss") if counts else "----"
    what = f"{row['prompt']!r}->{row['target_id']}" if row.get("prompt") else "(no prompt)"
    meas = (f"F1 {num(row.get('f1_hz'), '4.0f')} F2 {num(row.get('f2_hz'), '4.0f')} Hz"
            if row.get("f1_hz") is not None and row.get("f2_hz") is not None else "F1/F2 not measured")
    near = f" sounded like {row['nearest_id']}" if row.get("nearest_id") else ""
    score = f" {num(row.get('closeness'), '3.0f')}" if counts else ""
    flags = f" [{row['flags']}]" if row.get("flags") else ""
    return (f"#{row['number']:<3} {num(row['start_s'], '7.2f')}-{num(row['end_s'], '6.2f')} s  {what:<22} "
            f"{mark}{score}  {meas}{near}{flags}")


__all__ = ["Analysed", "PACINGS", "REVIEW_MODE", "ReviewResult", "analyse_file", "file_time_utc", "format_row",
           "has_attempts", "no_speech_message", "read_as_live", "review_analysed", "single_target_drill"]
