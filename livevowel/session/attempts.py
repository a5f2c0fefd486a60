"""Attempts: voiced runs cut out of a stream of frames, and their measures.

An *attempt* is one try at a vowel: a run of voiced frames longer than a
minimum (``min_duration_s``, 120 ms by default), where a short unvoiced dip
(up to ``hangover_s``) does not split the run. The segmenter is pure and is
fed one :class:`~livevowel.dsp.types.Frame` at a time (or a whole
:class:`~livevowel.dsp.types.FrameTrack`), so the same code serves the live
screen, a recording and a test.

Nothing is dropped silently. A run that is too short, too quiet, clipped or
mostly unmeasured is still returned, with the reason in
:attr:`Attempt.flags`; only voiced blips shorter than ``ignore_below_s``
(30 ms, i.e. two or three frames of a noise burst) are not reported as
attempts, and those are counted in :attr:`AttemptSegmenter.ignored_blips`.

Measures are taken over the *steady part* of the attempt: the most stable
stretch of at least ``steady_min_s`` (80 ms) -- the window with the least
spread of log F1 and log F2, grown at both ends while the frames stay within
``steady_tolerance`` (relative) of its medians -- or, when no such stretch is
measured (short or patchy attempts), the middle half of the attempt.

Units: seconds, Hz, dB relative to full scale (as in the frame records).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Iterable, Mapping

import numpy as np

from livevowel.dsp.types import Frame, FrameTrack

#: Flags that make an attempt unusable for judgement (it is kept and stored,
#: but is not scored as a trial).
BLOCKING_FLAGS: tuple[str, ...] = ("too_short", "too_quiet", "clipped", "unmeasured", "stopped")

#: Every flag an attempt can carry, with its meaning (for help and reports).
FLAG_MEANINGS: dict[str, str] = {
    "too_short": "voiced for less than the minimum attempt length",
    "too_quiet": "median level below the minimum level",
    "clipped": "the input was clipped (samples at full scale)",
    "unmeasured": "formants were measured in too few frames",
    "cut": "voicing went on past the longest attempt; the run was cut there",
    "stopped": "the input was stopped (quit, time limit) during the attempt, which may be incomplete",
}


@dataclass(frozen=True)
class AttemptSettings:
    """How attempts are cut from the stream and when they are flagged.

    Parameters (keyword-only)
    -------------------------
    min_duration_s : float
        Shortest voiced run, in seconds, that counts as a usable attempt
        (shorter runs are reported with the flag ``too_short``).
    hangover_s : float
        Longest unvoiced dip, in seconds, that does not end an attempt.
    ignore_below_s : float
        Voiced blips shorter than this (seconds) are counted, not reported.
    max_duration_s : float
        A run is closed (flag ``cut``) when it reaches this length, seconds.
    min_level_db : float
        Median frame level (dBFS) below which an attempt is ``too_quiet``.
    clip_level_db : float
        Without the audio samples, a frame level (dBFS) at or above which the
        input counts as clipped. With samples, see ``clip_sample_level``.
    clip_sample_level : float
        Absolute sample value (full scale 1.0) at or above which a sample is
        taken as clipped; ``clip_min_samples`` such samples flag the attempt.
    clip_min_samples : int
        Number of clipped samples that flag an attempt as ``clipped``.
    min_measured_fraction : float
        Fraction (0..1) of frames that must have F1 and F2 measured.
    steady_min_s : float
        Shortest steady stretch, seconds.
    steady_tolerance : float
        Relative deviation of F1 and F2 (``|log(f / median)|``) allowed when
        growing the steady stretch.
    """

    min_duration_s: float = 0.12
    hangover_s: float = 0.06
    ignore_below_s: float = 0.03
    max_duration_s: float = 8.0
    min_level_db: float = -50.0
    clip_level_db: float = -1.0
    clip_sample_level: float = 0.999
    clip_min_samples: int = 3
    min_measured_fraction: float = 0.5
    steady_min_s: float = 0.08
    steady_tolerance: float = 0.08

    def __post_init__(self) -> None:
        for name in ("min_duration_s", "hangover_s", "ignore_below_s", "max_duration_s", "steady_min_s",
                     "steady_tolerance"):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and math.isfinite(v) and v >= 0):
                raise ValueError(f"AttemptSettings.{name} must be a finite number >= 0, got {v!r}")
        if self.max_duration_s <= self.min_duration_s:
            raise ValueError("AttemptSettings.max_duration_s must be above min_duration_s")
        if not 0 <= self.min_measured_fraction <= 1:
            raise ValueError("AttemptSettings.min_measured_fraction must be within 0..1")
        if self.clip_min_samples < 1:
            raise ValueError("AttemptSettings.clip_min_samples must be at least 1")

    @classmethod
    def from_config(cls, settings) -> "AttemptSettings":
        """Build from the ``attempts`` section of :class:`livevowel.config.Settings`."""
        sec: Mapping = settings["attempts"]
        return cls(
            min_duration_s=sec["min_ms"] / 1e3,
            hangover_s=sec["hangover_ms"] / 1e3,
            ignore_below_s=sec["ignore_below_ms"] / 1e3,
            max_duration_s=sec["max_s"],
            min_level_db=sec["min_level_db"],
            min_measured_fraction=sec["min_measured_fraction"],
            steady_min_s=sec["steady_min_ms"] / 1e3,
        )


@dataclass(frozen=True)
class Attempt:
    """One attempt with its measures.

    Attributes
    ----------
    start_s, end_s : float
        Start of the first and end of the last voiced frame, seconds of
        stream time (frame centre -/+ half a hop).
    duration_s : float
        ``end_s - start_s``, seconds.
    track : FrameTrack
        Every frame from the first to the last voiced frame (for review).
    steady_start_s, steady_end_s : float
        The steady part over which the measures were taken, seconds.
    steady_method : str
        ``"stable"`` (most stable stretch) or ``"middle"`` (middle half).
    f1_hz, f2_hz, f3_hz, f0_hz : float
        Medians over the measured frames of the steady part; ``nan`` if none.
    level_db : float
        Median frame level over the attempt, dBFS.
    peak_level_db : float
        Highest frame level of the attempt, dBFS.
    measured_fraction : float
        Fraction of frames with F1 and F2 measured (0..1).
    flags : tuple of str
        Reasons the attempt is doubtful (see :data:`FLAG_MEANINGS`).
    """

    start_s: float
    end_s: float
    duration_s: float
    track: FrameTrack = field(repr=False)
    steady_start_s: float
    steady_end_s: float
    steady_method: str
    f1_hz: float
    f2_hz: float
    f3_hz: float
    f0_hz: float
    level_db: float
    peak_level_db: float
    measured_fraction: float
    flags: tuple[str, ...] = ()

    @property
    def usable(self) -> bool:
        """True when no flag in :data:`BLOCKING_FLAGS` is set."""
        return not any(f in BLOCKING_FLAGS for f in self.flags)

    def with_flags(self, *extra: str) -> "Attempt":
        """A copy with more flags (kept unique, in order)."""
        flags = list(self.flags)
        for f in extra:
            if f not in flags:
                flags.append(f)
        return replace(self, flags=tuple(flags))

    def steady_track(self) -> FrameTrack:
        """Frames of the steady part."""
        t = self.track.time_s
        return self.track[(t >= self.steady_start_s - 1e-9) & (t <= self.steady_end_s + 1e-9)]


def _hop_of(times: np.ndarray, default: float) -> float:
    if len(times) >= 2:
        d = np.diff(times)
        d = d[d > 0]
        if len(d):
            return float(np.median(d))
    return default


def steady_part(track: FrameTrack, *, hop_s: float, min_s: float = 0.08,
                tolerance: float = 0.08) -> tuple[int, int, str]:
    """Index range ``[i, j)`` of the steady part of ``track``.

    Parameters
    ----------
    track : FrameTrack
        The frames of one attempt.
    hop_s : float
        Hop between frames, seconds.
    min_s : float, keyword-only
        Shortest stable stretch, seconds.
    tolerance : float, keyword-only
        Relative deviation of F1 and F2 from the stretch medians allowed
        while growing it.

    Returns
    -------
    (i, j, method)
        ``method`` is ``"stable"`` or ``"middle"``.
    """
    n = len(track)
    if n == 0:
        return 0, 0, "middle"
    valid = track.voiced & np.isfinite(track.f1_hz) & np.isfinite(track.f2_hz) \
        & (track.f1_hz > 0) & (track.f2_hz > 0)
    w = max(1, int(math.ceil(min_s / hop_s - 1e-9)))
    if n >= w and valid.sum() >= w:
        with np.errstate(invalid="ignore", divide="ignore"):
            l1 = np.where(valid, np.log(np.where(valid, track.f1_hz, 1.0)), np.nan)
            l2 = np.where(valid, np.log(np.where(valid, track.f2_hz, 1.0)), np.nan)
        win_valid = np.lib.stride_tricks.sliding_window_view(valid, w).all(axis=1)
        if win_valid.any():
            s1 = np.lib.stride_tricks.sliding_window_view(np.nan_to_num(l1), w).std(axis=1)
            s2 = np.lib.stride_tricks.sliding_window_view(np.nan_to_num(l2), w).std(axis=1)
            cost = np.where(win_valid, s1 + s2, np.inf)
            i = int(np.argmin(cost))
            j = i + w
            m1 = float(np.median(l1[i:j]))
            m2 = float(np.median(l2[i:j]))

            def ok(k: int) -> bool:
                return bool(valid[k]) and abs(l1[k] - m1) <= tolerance and abs(l2[k] - m2) <= tolerance

            while i > 0 and ok(i - 1):
                i -= 1
            while j < n and ok(j):
                j += 1
            return i, j, "stable"
    q = n // 4
    i, j = q, n - q
    if j <= i:
        i, j = 0, n
    return i, j, "middle"


def _median(x: np.ndarray) -> float:
    x = x[np.isfinite(x)]
    return float(np.median(x)) if len(x) else float("nan")


def measure_attempt(track: FrameTrack, *, settings: AttemptSettings = AttemptSettings(),
                    hop_s: float | None = None, samples: np.ndarray | None = None,
                    extra_flags: Iterable[str] = ()) -> Attempt:
    """Measure one attempt from its frames.

    Parameters
    ----------
    track : FrameTrack
        Frames from the first to the last voiced frame (at least one frame).
    settings : AttemptSettings, keyword-only
        Thresholds for the flags and the steady part.
    hop_s : float, optional
        Hop between frames, seconds (default: from the frame times, else 10 ms).
    samples : array, optional
        The audio of the attempt (full scale 1.0); used for the clipping
        check. Without it, clipping is judged from the frame levels.
    extra_flags : iterable of str
        Flags already known (e.g. ``"cut"``).

    Returns
    -------
    Attempt
    """
    if len(track) == 0:
        raise ValueError("measure_attempt needs at least one frame")
    hop = hop_s if hop_s is not None else _hop_of(track.time_s, 0.010)
    if not hop > 0:
        raise ValueError(f"hop_s must be positive, got {hop!r}")
    voiced_idx = np.flatnonzero(track.voiced)
    first = int(voiced_idx[0]) if len(voiced_idx) else 0
    last = int(voiced_idx[-1]) if len(voiced_idx) else len(track) - 1
    track = track[first:last + 1]
    start_s = float(track.time_s[0]) - hop / 2
    end_s = float(track.time_s[-1]) + hop / 2
    i, j, method = steady_part(track, hop_s=hop, min_s=settings.steady_min_s, tolerance=settings.steady_tolerance)
    st = track[i:j]
    valid_st = st.voiced & np.isfinite(st.f1_hz) & np.isfinite(st.f2_hz)
    measured = track.voiced & np.isfinite(track.f1_hz) & np.isfinite(track.f2_hz)
    measured_fraction = float(measured.mean())
    level = _median(track.level_db)
    peak = float(np.nanmax(track.level_db)) if np.isfinite(track.level_db).any() else float("nan")

    flags: list[str] = list(extra_flags)
    duration = end_s - start_s
    if duration < settings.min_duration_s - 1e-9:
        flags.append("too_short")
    if not (level >= settings.min_level_db):
        flags.append("too_quiet")
    if samples is not None:
        a = np.abs(np.asarray(samples, dtype=np.float64))
        if int(np.count_nonzero(a >= settings.clip_sample_level)) >= settings.clip_min_samples:
            flags.append("clipped")
    elif peak >= settings.clip_level_db:
        flags.append("clipped")
    if measured_fraction < settings.min_measured_fraction:
        flags.append("unmeasured")
    uniq: list[str] = []
    for f in flags:
        if f not in uniq:
            uniq.append(f)
    return Attempt(
        start_s=start_s,
        end_s=end_s,
        duration_s=duration,
        track=track,
        steady_start_s=float(st.time_s[0]) - hop / 2 if len(st) else start_s,
        steady_end_s=float(st.time_s[-1]) + hop / 2 if len(st) else end_s,
        steady_method=method,
        f1_hz=_median(st.f1_hz[valid_st]),
        f2_hz=_median(st.f2_hz[valid_st]),
        f3_hz=_median(st.f3_hz[valid_st]),
        f0_hz=_median(st.f0_hz[st.voiced]),
        level_db=level,
        peak_level_db=peak,
        measured_fraction=measured_fraction,
        flags=tuple(uniq),
    )


@dataclass(frozen=True)
class AttemptSpan:
    """A closed voiced run, before measurement: its frames and known flags."""

    track: FrameTrack
    hop_s: float
    flags: tuple[str, ...] = ()

    @property
    def start_s(self) -> float:
        return float(self.track.time_s[0]) - self.hop_s / 2

    @property
    def end_s(self) -> float:
        return float(self.track.time_s[-1]) + self.hop_s / 2


class AttemptSegmenter:
    """Cut a stream of frames into attempts (pure; fed frame by frame).

    Parameters
    ----------
    settings : AttemptSettings, keyword-only
    hop_s : float, optional, keyword-only
        Hop between frames, seconds. Default: learned from the first two
        frames (10 ms until then).

    Use :meth:`push` for each frame (or :meth:`push_track`); each returns
    the attempts that closed on that input, already measured. Call
    :meth:`flush` at the end of input to close a run still open.
    """

    def __init__(self, *, settings: AttemptSettings = AttemptSettings(), hop_s: float | None = None) -> None:
        self.settings = settings
        self._hop = hop_s
        self._hop_fixed = hop_s is not None
        self._last_time: float | None = None
        self._run: list[Frame] = []      # frames of the open run (first voiced .. now)
        self._last_voiced = -1           # index in _run of the last voiced frame
        self.ignored_blips = 0

    @property
    def hop_s(self) -> float:
        """Hop between frames in seconds (as given or learned)."""
        return self._hop if self._hop is not None else 0.010

    @property
    def in_attempt(self) -> bool:
        """True while a voiced run is open."""
        return bool(self._run)

    @property
    def open_start_s(self) -> float | None:
        """Start time (seconds) of the open run, or ``None``."""
        return self._run[0].time_s - self.hop_s / 2 if self._run else None

    def push(self, frame: Frame) -> list[AttemptSpan]:
        """Feed one frame; return the runs closed by it (usually none).

        A jump in frame times longer than the hangover (the input was paused,
        or frames were lost) closes the open run first: the speech on either
        side of the jump is not one attempt."""
        prev = self._last_time
        if not self._hop_fixed and prev is not None and self._hop is None:
            d = frame.time_s - prev
            if d > 0:
                self._hop = d
        self._last_time = frame.time_s
        out: list[AttemptSpan] = []
        s = self.settings
        if self._run and prev is not None and frame.time_s - prev > s.hangover_s + self.hop_s + 1e-9:
            out += self._close(())
        if self._run:
            if frame.voiced:
                self._run.append(frame)
                self._last_voiced = len(self._run) - 1
                first = self._run[0].time_s
                if frame.time_s - first + self.hop_s >= s.max_duration_s - 1e-9:
                    out += self._close(("cut",))
            else:
                gap = frame.time_s - self._run[self._last_voiced].time_s
                if gap > s.hangover_s + 1e-9:
                    out += self._close(())
                else:
                    self._run.append(frame)
        elif frame.voiced:
            self._run = [frame]
            self._last_voiced = 0
        return out

    def push_track(self, track: "FrameTrack | Iterable[Frame]") -> list[AttemptSpan]:
        """Feed many frames; return all runs closed by them."""
        out: list[AttemptSpan] = []
        for fr in track:
            out += self.push(fr)
        return out

    def flush(self, *, stopped: bool = False) -> list[AttemptSpan]:
        """End of input: close the open run, if any.

        ``stopped``: the input was stopped rather than ending by itself (the
        user quit, a time limit); an open run is flagged ``stopped`` (kept, not
        judged), since the attempt may have gone on."""
        return self._close(("stopped",) if stopped else ()) if self._run else []

    def _close(self, flags: tuple[str, ...]) -> list[AttemptSpan]:
        frames = self._run[: self._last_voiced + 1]
        self._run = []
        self._last_voiced = -1
        if not frames:
            return []
        duration = frames[-1].time_s - frames[0].time_s + self.hop_s
        if duration < self.settings.ignore_below_s - 1e-9:
            self.ignored_blips += 1
            return []
        return [AttemptSpan(FrameTrack.from_frames(frames), self.hop_s, flags)]


def measure_span(span: AttemptSpan, *, settings: AttemptSettings = AttemptSettings(),
                 samples: np.ndarray | None = None) -> Attempt:
    """:func:`measure_attempt` for a span from the segmenter."""
    return measure_attempt(span.track, settings=settings, hop_s=span.hop_s, samples=samples,
                           extra_flags=span.flags)


def segment_track(track: FrameTrack, *, settings: AttemptSettings = AttemptSettings(),
                  hop_s: float | None = None) -> list[Attempt]:
    """All attempts in a whole track (no audio: clipping judged from levels)."""
    seg = AttemptSegmenter(settings=settings, hop_s=hop_s)
    spans = seg.push_track(track) + seg.flush()
    return [measure_span(sp, settings=settings) for sp in spans]
