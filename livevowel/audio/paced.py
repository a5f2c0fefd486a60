"""Sources that play prepared audio through the live path at a chosen pace.

* :class:`PacedFileSource` -- a recording, read block by block from disk
  (memory stays flat for long files), for tests, demos and reviewing a
  recording as if it were live.
* :class:`GeneratedVoiceSource` -- a synthetic voice rendered block by block
  with :class:`livevowel.dsp.synth.KlattVoice` from a synth ``Schedule``.

Both deliver blocks on a pacing thread: at pace 1.0 a block is handed over
when its last sample would have been captured by a microphone, so timing
behaves like live input (a slow consumer drops, as with a device); pace 2.0
runs at most twice as fast; pace 0 runs as fast as the sink takes it. At any
pace other than 1.0 the source waits while the sink's backlog is high
(back-pressure, no drops).
"""

from __future__ import annotations

import threading
import time
from pathlib import Path
from typing import Callable

import numpy as np

from livevowel.audio.base import Block, Sink, Source, check_pace
from livevowel.errors import UserError

#: Default block length, seconds (the same as the microphone's).
DEFAULT_BLOCK_S = 0.005
#: At pace 0, wait while the sink holds more than this much audio, seconds.
BACKLOG_HIGH_S = 0.25


class _PacedSource(Source):
    """Shared pacing thread; subclasses provide :meth:`_read`."""

    def __init__(self, *, rate_hz: float, channels: int, pace: float, block_s: float) -> None:
        self.rate_hz = float(rate_hz)
        self.channels = int(channels)
        self.pace = check_pace(pace)
        if not 0.001 <= block_s <= 0.5:
            raise ValueError(f"block_s must be 0.001..0.5 s, got {block_s}")
        self.blocksize = max(1, int(round(block_s * self.rate_hz)))
        self.live = False
        self._thread: threading.Thread | None = None
        self._stop = threading.Event()
        self._done = False
        self.error: BaseException | None = None

    # subclass hooks -------------------------------------------------------
    def _open(self) -> None:
        """Prepare for reading from the start."""

    def _read(self, n: int) -> np.ndarray | None:
        """Next up to ``n`` samples as (m, channels) float32, or None at the end."""
        raise NotImplementedError

    def _close(self) -> None:
        """Release what :meth:`_open` took."""

    # Source ---------------------------------------------------------------
    def start(self, sink: Sink) -> None:
        if self._thread is not None:
            raise RuntimeError(f"{self.name} was already started")
        self._open()
        self._thread = threading.Thread(target=self._run, args=(sink,), name=f"livevowel-{type(self).__name__}",
                                        daemon=True)
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        t = self._thread
        if t is not None and t is not threading.current_thread():
            t.join(timeout=5.0)

    @property
    def finished(self) -> bool:
        return self._done

    def _run(self, sink: Sink) -> None:
        pos = 0
        sink.on_event("started", self.name)
        t0 = time.monotonic()
        try:
            while not self._stop.is_set():
                x = self._read(self.blocksize)
                if x is None or x.shape[0] == 0:
                    break
                n = x.shape[0]
                if self.pace > 0:
                    due = t0 + (pos + n) / self.rate_hz / self.pace
                    while not self._stop.is_set():
                        wait = due - time.monotonic()
                        if wait <= 0:
                            break
                        time.sleep(min(wait, 0.05))
                if self.pace != 1.0:
                    # faster than real time: "at most this fast", never outrunning the sink
                    waited = time.monotonic()
                    while sink.backlog_s() > BACKLOG_HIGH_S and not self._stop.is_set():
                        time.sleep(0.001)
                    if self.pace > 0:
                        t0 += time.monotonic() - waited
                if self._stop.is_set():
                    break
                sink.on_block(Block(samples=x, rate_hz=self.rate_hz, start_time_s=pos / self.rate_hz,
                                    received_s=time.monotonic()))
                pos += n
        except Exception as exc:  # reported to the sink; the session ends cleanly
            self.error = exc
            sink.on_event("error", f"{self.name}: {exc}")
        finally:
            self._close()
            self._done = True
            if self.error is None:
                sink.on_event("end", self.name)


class PacedFileSource(_PacedSource):
    """A recording played through the live path at a given pace.

    Parameters
    ----------
    path : str or Path
        Any file libsndfile reads (WAV, FLAC, OGG), 8-96 kHz, any channels.
    pace : float, keyword-only
        1.0 real time (default), >1 faster, 0 as fast as the sink takes it.
    block_s : float, keyword-only
        Block length in seconds (default 0.005).

    Raises
    ------
    UserError
        Missing or unreadable file, or a rate outside 8-96 kHz.
    """

    def __init__(self, path: "str | Path", *, pace: float = 1.0, block_s: float = DEFAULT_BLOCK_S) -> None:
        import soundfile as sf

        from livevowel.audiofile import MAX_RATE_HZ, MIN_RATE_HZ

        self.path = Path(path)
        if not self.path.exists():
            raise UserError(f"{self.path}: no such file; check the name")
        try:
            info = sf.info(str(self.path))
        except (RuntimeError, TypeError, ValueError) as exc:
            raise UserError(f"{self.path}: not an audio file livevowel can read ({str(exc).split(':')[-1].strip()}); "
                            "use WAV, FLAC or OGG") from None
        if not MIN_RATE_HZ <= info.samplerate <= MAX_RATE_HZ:
            raise UserError(f"{self.path}: sample rate {info.samplerate} Hz is outside {MIN_RATE_HZ}-{MAX_RATE_HZ} Hz; "
                            "resample it first (e.g. sox IN -r 16000 OUT.wav)")
        if info.frames == 0:
            raise UserError(f"{self.path}: the file holds no samples; record again")
        super().__init__(rate_hz=info.samplerate, channels=info.channels, pace=pace, block_s=block_s)
        self.name = f"file {self.path.name}"
        self._frames = int(info.frames)
        self._fh = None

    @property
    def duration_s(self) -> float:
        return self._frames / self.rate_hz

    def _open(self) -> None:
        import soundfile as sf

        self._fh = sf.SoundFile(str(self.path))

    def _read(self, n: int) -> np.ndarray | None:
        x = self._fh.read(n, dtype="float32", always_2d=True)
        if x.shape[0] == 0:
            return None
        bad = ~np.isfinite(x)
        if bad.any():
            x[bad] = 0.0
        return x

    def _close(self) -> None:
        if self._fh is not None:
            self._fh.close()
            self._fh = None


class GeneratedVoiceSource(_PacedSource):
    """A synthetic voice (Klatt-style cascade synthesiser) as an input.

    Parameters
    ----------
    schedule : livevowel.dsp.synth.Schedule or callable
        What to say: a synth ``Schedule`` (its length ends the source), or a
        provider called with no arguments that returns one (for scenario
        modules that build it lazily).
    rate_hz : float, keyword-only
        Sample rate of the rendered voice in Hz (default 16000).
    pace : float, keyword-only
        1.0 real time (default), >1 faster, 0 as fast as the sink takes it.
    seed : int, keyword-only
        Seed of the synthesiser's jitter, shimmer and aspiration (deterministic).
    block_s : float, keyword-only
        Block length in seconds (default 0.005).
    """

    def __init__(self, schedule: "object | Callable[[], object]", *, rate_hz: float = 16000.0, pace: float = 1.0,
                 seed: int = 0, block_s: float = DEFAULT_BLOCK_S) -> None:
        if callable(schedule) and not hasattr(schedule, "segments"):
            schedule = schedule()
        super().__init__(rate_hz=rate_hz, channels=1, pace=pace, block_s=block_s)
        self.name = "demo voice"
        self.schedule = schedule
        self.seed = int(seed)
        self._total = int(round(_schedule_duration(schedule) * self.rate_hz))
        self._pos = 0
        self._voice = None

    @property
    def duration_s(self) -> float:
        return self._total / self.rate_hz

    def _open(self) -> None:
        from livevowel.dsp.synth import KlattVoice

        self._voice = KlattVoice(self.schedule, rate_hz=self.rate_hz, seed=self.seed)
        self._pos = 0

    def _read(self, n: int) -> np.ndarray | None:
        n = min(n, self._total - self._pos)
        if n <= 0:
            return None
        x = np.asarray(self._voice.render(n), dtype=np.float32).reshape(-1, 1)
        self._pos += n
        return x


def _schedule_duration(schedule: object) -> float:
    """Length of a synth Schedule in seconds."""
    for attr in ("duration_s", "total_s"):
        v = getattr(schedule, attr, None)
        if v is not None:
            return float(v() if callable(v) else v)
    segs = getattr(schedule, "segments", None)
    if segs is None:
        raise TypeError("schedule must be a livevowel.dsp.synth.Schedule")
    return float(sum(float(s.duration_s) for s in segs))
