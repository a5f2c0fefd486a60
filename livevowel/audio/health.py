"""Input health: what the consumer is told about the signal and the path.

:class:`HealthMeter` is fed by the pipeline's worker thread (one block at a
time, cheap numpy reductions) and produces :class:`InputHealth` snapshots.

Noise floor: the 10th percentile of block levels over the first
``floor_s`` seconds of the session (common practice: the quietest part of a
short lead-in is the room). When that estimate is louder than
``max_floor_db`` the session probably started with a voice, so the floor is
reported but not used for gating.

The SNR is measured against the room's floor as the session goes on: the
quietest one-second stretch of the last ``ROOM_WINDOWS`` (the lead-in among
them), so that a session that started with the speaker already talking gets
a floor at the first pause, and a quieter room found later lowers it. Until
that floor looks like a room (at most ``max_floor_db``) no SNR is reported:
a "noisy" warning from a voice measured as its own floor would be wrong.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass

import numpy as np

#: States shown to the user.
STATES = ("starting", "listening", "input lost", "paused", "stopped")

_TINY = 1e-12

#: A stretch whose floor is below this (dBFS) holds digital silence, not a room.
DIGITAL_SILENCE_DB = -100.0
#: Length of the stretches the room's floor is measured over after the lead-in, seconds ...
ROOM_WINDOW_S = 1.0
#: ... and how many of the latest are kept (the floor is their quietest: it follows a room
#: that gets noisier within this many stretches).
ROOM_WINDOWS = 10


@dataclass(frozen=True)
class InputHealth:
    """A snapshot of the input and the live path.

    Attributes
    ----------
    state : str
        "starting" (no audio yet), "listening", "input lost" (device gone,
        retrying), "paused" or "stopped".
    level_db : float
        RMS level of the latest block, dB re full scale 1.0 (-120 for silence).
    peak_db : float
        Peak sample of the latest block, dBFS.
    clipping : bool
        Samples at or above the clip level in the last half second.
    clipped_samples : int
        Samples at or above the clip level so far.
    noise_floor_db : float
        Noise floor measured over the first second, dBFS (``nan`` until measured).
    floor_used : bool
        Whether the floor gates voicing (false when it looks like a voice, not a room).
    room_floor_db : float
        The room's floor as the input goes on: the quietest of the last
        ``ROOM_WINDOWS`` one-second stretches (10th percentile of their block
        levels), the lead-in included, dBFS, leaving out stretches of digital
        silence (below ``DIGITAL_SILENCE_DB``) unless all are; ``nan`` until
        measured.
    snr_db : float
        Voiced-frame level minus ``room_floor_db``, dB; ``nan`` until both are
        known, and while that floor still looks like a voice (louder than
        ``max_floor_db``: the speaker spoke through every stretch measured,
        e.g. from the first moment).
    overflows : int
        Blocks the device flagged as having lost input samples.
    dropped : int
        Results dropped from the bounded output queue (consumer too slow).
    dropped_blocks : int
        Input blocks dropped before analysis (analysis too slow).
    backlog_s : float
        Audio waiting for analysis, seconds.
    lag_s : float
        Back-pressure seen as late delivery: wall time elapsed minus audio
        delivered, above its lowest value in this stretch of input, seconds.
        Servers that buffer (PulseAudio) show a slow consumer here, not as overflows.
    latency_s : float
        Estimated input-to-result delay now: algorithmic delay + backlog + lag, seconds.
    seconds : float
        Audio received so far, seconds.
    analysis_load : float
        Time the worker spent analysing per second of audio (above 1.0 the
        machine cannot keep up and latency grows).
    message : str
        Last event worth showing ("input lost: ...", a source error), or "".
    """

    state: str = "starting"
    level_db: float = -120.0
    peak_db: float = -120.0
    clipping: bool = False
    clipped_samples: int = 0
    noise_floor_db: float = math.nan
    floor_used: bool = False
    room_floor_db: float = math.nan
    snr_db: float = math.nan
    overflows: int = 0
    dropped: int = 0
    dropped_blocks: int = 0
    backlog_s: float = 0.0
    lag_s: float = 0.0
    latency_s: float = math.nan
    seconds: float = 0.0
    analysis_load: float = 0.0
    message: str = ""


def to_mono(samples: np.ndarray) -> np.ndarray:
    """(n,) or (n, ch) -> (n,) float32 (mean of the channels)."""
    x = np.asarray(samples)
    if x.ndim == 2:
        x = x[:, 0] if x.shape[1] == 1 else x.mean(axis=1)
    return x.astype(np.float32, copy=False)


class HealthMeter:
    """Running input measures; fed by one thread, read by any.

    Parameters
    ----------
    floor_s : float
        Length of the lead-in over which the noise floor is measured, seconds.
    max_floor_db : float
        A floor louder than this is reported but not used for gating, dBFS.
    clip_level : float
        Absolute sample value counted as clipped (full scale 1.0).
    pace : float
        Pace of the source (1.0 for devices): lag compares delivered audio
        with wall time x pace; 0 (as fast as possible) measures no lag.
    """

    def __init__(self, *, floor_s: float = 1.0, max_floor_db: float = -35.0, clip_level: float = 0.99,
                 pace: float = 1.0) -> None:
        self.pace = float(pace)
        self.floor_s = float(floor_s)
        self.max_floor_db = float(max_floor_db)
        self.clip_level = float(clip_level)
        self.level_db = -120.0
        self.peak_db = -120.0
        self.clipped_samples = 0
        self._last_clip_s = -math.inf
        self._now_s = 0.0
        self._floor_levels: list[float] = []
        self.noise_floor_db = math.nan
        self.floor_used = False
        self._window_levels: list[float] = []
        self._window_end_s = self.floor_s
        self._room_windows: deque = deque(maxlen=ROOM_WINDOWS)
        self._voiced_db = math.nan
        self.seconds = 0.0
        self.overflows = 0
        # back-pressure, per segment
        self._seg = -1
        self._seg_t0 = 0.0
        self._seg_samples = 0
        self._min_deficit = math.inf
        self.lag_s = 0.0

    def add_block(self, mono: np.ndarray, *, time_s: float, rate_hz: float, received_s: float, segment: int,
                  overflow: bool) -> None:
        """Account for one block of mono samples captured at ``time_s``."""
        n = mono.shape[0]
        if n == 0:
            return
        ms = float(np.dot(mono, mono)) / n
        peak = float(np.max(np.abs(mono)))
        self.level_db = max(-120.0, 10.0 * math.log10(ms + _TINY))
        self.peak_db = max(-120.0, 20.0 * math.log10(peak + _TINY))
        end_s = time_s + n / rate_hz
        self._now_s = end_s
        if peak >= self.clip_level:
            self.clipped_samples += int(np.count_nonzero(np.abs(mono) >= self.clip_level))
            self._last_clip_s = end_s
        if overflow:
            self.overflows += 1
        self.seconds += n / rate_hz
        if math.isnan(self.noise_floor_db):
            if segment == 0 and end_s <= self.floor_s + 1e-9:
                self._floor_levels.append(self.level_db)
            if end_s >= self.floor_s - 1e-9 or segment > 0:
                self._settle_floor()
        else:                           # the room's floor after the lead-in, one-second stretches
            self._window_levels.append(self.level_db)
            if end_s >= self._window_end_s + ROOM_WINDOW_S - 1e-9:
                self._room_windows.append(float(np.percentile(self._window_levels, 10)))
                self._window_levels = []
                self._window_end_s = end_s
        # delivered audio against wall time
        if self.pace <= 0:
            return
        if segment != self._seg:
            self._seg, self._seg_samples, self._min_deficit = segment, 0, math.inf
            self._seg_t0 = received_s - n / rate_hz / self.pace
        self._seg_samples += n
        deficit = (received_s - self._seg_t0) - self._seg_samples / rate_hz / self.pace
        self._min_deficit = min(self._min_deficit, deficit)
        self.lag_s = max(0.0, deficit - self._min_deficit)

    def _settle_floor(self) -> None:
        if not self._floor_levels:
            return
        self.noise_floor_db = float(np.percentile(self._floor_levels, 10))
        self.floor_used = self.noise_floor_db <= self.max_floor_db
        self._floor_levels = []
        self._room_windows.append(self.noise_floor_db)
        self._window_end_s = self._now_s

    def finish(self) -> None:
        """End of input: settle the floor even if the input was shorter than ``floor_s``."""
        if math.isnan(self.noise_floor_db):
            self._settle_floor()

    def add_voiced_levels(self, levels_db: np.ndarray) -> None:
        """Frame levels (dBFS) of voiced frames, for the SNR estimate (slow average, ~0.5 s)."""
        for v in np.asarray(levels_db, dtype=float):
            if math.isfinite(v):
                self._voiced_db = v if math.isnan(self._voiced_db) else 0.98 * self._voiced_db + 0.02 * v

    @property
    def room_floor_db(self) -> float:
        # a stretch of digital silence (start-up buffers, a system noise gate) is no room: it counts
        # only where every stretch kept is that quiet (a source with no noise at all)
        rooms = [w for w in self._room_windows if w > DIGITAL_SILENCE_DB]
        return min(rooms) if rooms else (min(self._room_windows) if self._room_windows else math.nan)

    @property
    def snr_db(self) -> float:
        room = self.room_floor_db
        if math.isnan(self._voiced_db) or math.isnan(room) or room > self.max_floor_db:
            return math.nan
        return self._voiced_db - room

    @property
    def clipping(self) -> bool:
        return self._now_s - self._last_clip_s <= 0.5
