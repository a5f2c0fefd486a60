"""The live path: a source, the streaming engine, and a bounded result queue.

Threads and hand-offs::

    source thread (PortAudio callback / pacing thread)
        LivePipeline.on_block: append the block to a bounded deque, wake the
        worker, time itself. No analysis, no locks the display holds, no
        allocation beyond the block record.
    worker thread
        downmix -> input health -> optional WAV recording ->
        StreamingAnalyzer.process -> noise-floor voicing gate ->
        result queue (DropOldestQueue: drops the oldest, counts drops)
    consumer (display, logger, ``listen``)
        drain() -> list[Frame]; health() -> InputHealth

Noise floor and voicing: the engine takes a level below which a frame cannot
turn voicing on (``AnalysisSettings.voicing_floor_db``). The pipeline
measures the floor over the first ``live.noise_floor_s`` seconds (about 1 s)
while analysing with the configured settings. If the floor looks like a room
rather than a voice (at most ``live.max_noise_floor_db``) and floor +
``live.noise_margin_db`` is above the configured voicing floor, the engine is
flushed and restarted there with ``voicing_floor_db = floor + margin`` (frame
times continue; in a quiet room nothing changes). ``noise_margin_db=None``
turns this off.

After an input loss the engine state is flushed and a fresh analyzer starts
on the returning input; its frame times continue on the wall clock (the
new segment's ``start_time_s``), so nothing measured is lost or re-timed.
"""

from __future__ import annotations

import math
import threading
import time
from collections import deque
from dataclasses import dataclass, fields, replace

import numpy as np

from livevowel.audio.base import Block, Sink, Source
from livevowel.audio.health import HealthMeter, InputHealth, to_mono
from livevowel.audio.recorder import WavRecorder
from livevowel.audio.rqueue import DropOldestQueue
from livevowel.dsp.types import Frame, FrameTrack

#: on_block durations kept for percentiles (a ring).
DURATION_RING = 8192


@dataclass(frozen=True)
class LiveSettings:
    """Settings of the live path (config section ``live``).

    Attributes
    ----------
    block_ms : float
        Block (callback) length in milliseconds.
    queue_size : int
        Capacity of the result queue, frames (the oldest are dropped beyond it).
    input_queue_s : float
        Capacity of the input hand-off queue, seconds of audio.
    noise_floor_s : float
        Lead-in over which the noise floor is measured, seconds.
    noise_margin_db : float or None
        Frames quieter than floor + margin are marked unvoiced; None: no gate.
    max_noise_floor_db : float
        A floor louder than this (dBFS) is treated as a voice, not a room, and not used.
    clip_level : float
        Sample magnitude counted as clipping (full scale 1.0).
    lost_after_s : float
        Silence from the device (no callbacks) that counts as "input lost", seconds.
    retry_s : float
        Seconds between attempts to reopen a lost device.
    """

    block_ms: float = 5.0
    queue_size: int = 1000
    input_queue_s: float = 2.0
    noise_floor_s: float = 1.0
    noise_margin_db: float | None = 6.0
    max_noise_floor_db: float = -35.0
    clip_level: float = 0.99
    lost_after_s: float = 1.0
    retry_s: float = 2.0

    @classmethod
    def from_config(cls, settings) -> "LiveSettings":
        """From a :class:`livevowel.config.Settings` (its ``live`` section)."""
        sec = settings["live"]
        return cls(**{f.name: sec[f.name] for f in fields(cls) if f.name in sec})


class LivePipeline(Sink):
    """Run a source through the streaming engine on a worker thread.

    Parameters
    ----------
    source : Source
        Where the audio comes from (not yet started).
    settings : livevowel.dsp.engine.AnalysisSettings, keyword-only, optional
        Engine settings (default ``AnalysisSettings()``).
    live : LiveSettings, keyword-only, optional
        Live-path settings (default ``LiveSettings()``).
    queue_size : int, keyword-only, optional
        Overrides ``live.queue_size``.
    record_to : path, keyword-only, optional
        Also write the captured mono audio to this WAV file (atomically, at
        the source's rate; input gaps are filled with silence).

    Examples
    --------
    >>> p = LivePipeline(PacedFileSource("a.wav", pace=0))   # doctest: +SKIP
    >>> with p:
    ...     p.wait()
    >>> frames = p.drain()
    """

    def __init__(self, source: Source, *, settings=None, live: LiveSettings | None = None,
                 queue_size: int | None = None, record_to=None) -> None:
        from livevowel.dsp.engine import AnalysisSettings

        self.source = source
        self.settings = settings if settings is not None else AnalysisSettings()
        self.live = live if live is not None else LiveSettings()
        if queue_size is not None:
            self.live = replace(self.live, queue_size=int(queue_size))
        self.results: DropOldestQueue[Frame] = DropOldestQueue(self.live.queue_size)
        block_s = max(source.blocksize, 1) / source.rate_hz
        self._in_max = max(4, int(math.ceil(self.live.input_queue_s / block_s)))
        self._inq: deque = deque(maxlen=self._in_max)
        self._block_s = block_s
        self.dropped_blocks = 0
        self._in_seg = -1
        self._lost_seg = -1
        self.on_block_durations = np.zeros(DURATION_RING)
        self.on_block_count = 0
        self._wake = threading.Event()
        self._meter = HealthMeter(floor_s=self.live.noise_floor_s, max_floor_db=self.live.max_noise_floor_db,
                                  clip_level=self.live.clip_level, pace=getattr(source, "pace", 1.0))
        self._state = "starting"
        self._message = ""
        self._paused = False
        self._worker: threading.Thread | None = None
        self._analyzer = None
        self._seg: int | None = None
        self._seg_offset_s = 0.0
        self._last_wait_s = 0.0
        self._budget_static: dict[str, float] | None = None
        self.frames_out = 0
        self.busy_s = 0.0
        self.error: BaseException | None = None
        self._record_to = record_to
        self.recorder: WavRecorder | None = None
        self._discard_recording = False
        #: Engine settings in use (voicing floor raised once the noise floor is known).
        self.analysis_settings = self.settings
        self._floor_settled = self.live.noise_margin_db is None

    # -- Sink (source thread) --------------------------------------------
    def on_block(self, block: Block) -> None:
        t0 = time.perf_counter()
        if len(self._inq) >= self._in_max:
            self.dropped_blocks += 1
        self._inq.append(block)
        self._in_seg = block.segment
        self._wake.set()
        self.on_block_durations[self.on_block_count % DURATION_RING] = time.perf_counter() - t0
        self.on_block_count += 1

    def on_event(self, kind: str, message: str = "") -> None:
        if kind == "lost":
            self._lost_seg = self._in_seg
            self._state = "input lost"
            self._message = message
        elif kind in ("resumed", "error"):
            self._message = message
        self._inq.append((kind, message))
        self._wake.set()

    def backlog_s(self) -> float:
        return len(self._inq) * self._block_s

    # -- control (consumer thread) ----------------------------------------
    def start(self) -> "LivePipeline":
        """Start the worker, then the source. Returns self."""
        if self._worker is not None:
            raise RuntimeError("pipeline already started")
        # compiled kernels ready before capture starts (once per process: loaded from
        # the cache in about 0.4 s, compiled on a machine's first run), so no backlog builds up
        from livevowel.dsp.engine import warm_up

        warm_up(self.settings)
        if self._record_to is not None:
            self.recorder = WavRecorder(self._record_to, self.source.rate_hz)
        self._worker = threading.Thread(target=self._work, name="livevowel-live-worker", daemon=True)
        self._worker.start()
        try:
            self.source.start(self)
        except BaseException:
            self._discard_recording = True      # nothing was captured: leave no empty file behind
            self._inq.append(("end", ""))
            self._wake.set()
            self._worker.join()
            raise
        return self

    def stop(self, timeout: float = 30.0) -> None:
        """Stop the source, analyse what was captured, flush the engine, finish files."""
        self.source.stop()
        self._inq.append(("end", ""))
        self._wake.set()
        if self._worker is not None:
            self._worker.join(timeout=timeout)

    def wait(self, timeout: float | None = None) -> bool:
        """Wait until a finite source has been fully analysed; True when done."""
        if self._worker is None:
            return True
        self._worker.join(timeout=timeout)
        return not self._worker.is_alive()

    @property
    def done(self) -> bool:
        """The worker has finished (source ended or stopped, engine flushed)."""
        return self._worker is not None and not self._worker.is_alive()

    def pause(self) -> None:
        """Stop analysing (audio is still received, measured and recorded)."""
        self._paused = True

    def resume(self) -> None:
        """Analyse again after :meth:`pause` (a fresh engine state, times continue)."""
        self._paused = False

    def drain(self) -> list[Frame]:
        """Every result frame queued since the last call, oldest first."""
        return self.results.get_all()

    def drain_track(self) -> FrameTrack:
        """:meth:`drain` as a :class:`FrameTrack`."""
        return FrameTrack.from_frames(self.drain())

    def health(self) -> InputHealth:
        """A snapshot of the input state (safe to call from any thread, any time)."""
        m = self._meter
        state = self._state
        if self._paused and state == "listening":
            state = "paused"
        backlog = self.backlog_s()
        budget = self._budget_static
        algorithmic = sum(budget.values()) if budget else math.nan
        return InputHealth(
            state=state, level_db=m.level_db, peak_db=m.peak_db, clipping=m.clipping,
            clipped_samples=m.clipped_samples, noise_floor_db=m.noise_floor_db, floor_used=m.floor_used,
            room_floor_db=float(m.room_floor_db),
            snr_db=float(m.snr_db), overflows=m.overflows, dropped=self.results.dropped,
            dropped_blocks=self.dropped_blocks, backlog_s=backlog, lag_s=m.lag_s,
            latency_s=algorithmic + backlog + m.lag_s + self._last_wait_s, seconds=m.seconds,
            analysis_load=self.busy_s / m.seconds if m.seconds > 0 else 0.0, message=self._message)

    def latency_budget(self, *, consumer_poll_s: float = 0.0) -> dict[str, float]:
        """Algorithmic delay per stage, seconds (worst case per stage).

        ``block``: a sample waits for the rest of its block before delivery.
        The engine's stages (``StreamingAnalyzer.delay_s``: resampler, window,
        smoother ...) follow. ``queue``: the consumer's polling interval (a
        frame waits at most that long in the result queue).
        """
        budget = {"block": self._block_s}
        budget.update(self._engine_delays())
        budget["queue"] = float(consumer_poll_s)
        return budget

    def _engine_delays(self) -> dict[str, float]:
        from livevowel.dsp.engine import StreamingAnalyzer

        sa = self._analyzer or StreamingAnalyzer(self.source.rate_hz, settings=self.analysis_settings)
        return {str(k): float(v) for k, v in dict(sa.delay_s).items() if k != "total"}

    def __enter__(self) -> "LivePipeline":
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    # -- worker -------------------------------------------------------------
    def _work(self) -> None:
        try:
            self._budget_static = {"block": self._block_s, **self._engine_delays()}
            while True:
                item = None
                try:
                    item = self._inq.popleft()
                except IndexError:
                    self._wake.wait(0.05)
                    self._wake.clear()
                    continue
                if isinstance(item, Block):
                    self._process(item)
                    continue
                kind, _ = item
                if kind == "lost":
                    self._settle_floor()
                    self._end_segment()
                elif kind in ("end", "error"):
                    break
        except BaseException as exc:  # reported through health/error; files are still finished
            self.error = exc
            self._message = f"analysis failed: {exc}"
        finally:
            try:
                if self.error is None:
                    self._settle_floor()
                    self._end_segment()
            except BaseException as exc:
                self.error = exc
            self._meter.finish()
            if self.recorder is not None:
                if self._discard_recording:
                    self.recorder.abort()
                else:
                    self.recorder.close()
            self._state = "stopped"

    def _process(self, blk: Block) -> None:
        self._last_wait_s = max(0.0, time.monotonic() - blk.received_s)
        mono = to_mono(blk.samples)
        if self.recorder is not None:
            gap = blk.start_time_s - self.recorder.duration_s
            if gap > 1.0 / blk.rate_hz:
                self.recorder.write_silence(gap)
            self.recorder.write(mono)
        self._meter.add_block(mono, time_s=blk.start_time_s, rate_hz=blk.rate_hz, received_s=blk.received_s,
                              segment=blk.segment, overflow=blk.overflow)
        if self._state == "starting" or (self._state == "input lost" and blk.segment > self._lost_seg):
            self._state = "listening"
            if self._message.startswith("input"):
                self._message = ""
        self._analyze(blk, mono)
        if not self._floor_settled and not math.isnan(self._meter.noise_floor_db):
            self._settle_floor()

    def _settle_floor(self) -> None:
        """Raise the engine's voicing floor from the measured noise floor (restarting the engine there)."""
        if self._floor_settled:
            return
        self._floor_settled = True
        m = self._meter
        m.finish()
        if m.floor_used and self.live.noise_margin_db is not None:
            floor = m.noise_floor_db + float(self.live.noise_margin_db)
            if floor > self.settings.voicing_floor_db:
                self.analysis_settings = replace(self.settings, voicing_floor_db=floor)
                self._end_segment()

    def _analyze(self, blk: Block, mono: np.ndarray) -> None:
        from livevowel.dsp.engine import StreamingAnalyzer

        if self._paused:
            self._end_segment()
            return
        if blk.segment != self._seg or self._analyzer is None:
            self._end_segment()
            self._analyzer = StreamingAnalyzer(blk.rate_hz, settings=self.analysis_settings)
            self._seg = blk.segment
            self._seg_offset_s = blk.start_time_s
        t0 = time.perf_counter()
        track = self._analyzer.process(mono)
        self.busy_s += time.perf_counter() - t0
        self._emit(track)

    def _end_segment(self) -> None:
        if self._analyzer is not None:
            self._emit(self._analyzer.flush())
        self._analyzer = None
        self._seg = None

    def _emit(self, track: FrameTrack) -> None:
        if len(track) == 0:
            return
        if self._seg_offset_s:
            track.time_s = track.time_s + self._seg_offset_s
        self._meter.add_voiced_levels(track.level_db[track.voiced])
        put = self.results.put
        for i in range(len(track)):
            put(track.frame(i))
        self.frames_out += len(track)


def percentiles(durations: np.ndarray, count: int) -> dict[str, float]:
    """Median / p95 / p99 / max in ms of the filled part of a duration ring."""
    a = durations[: min(count, durations.shape[0])]
    if a.size == 0:
        return {"median_ms": math.nan, "p95_ms": math.nan, "p99_ms": math.nan, "max_ms": math.nan}
    a = a * 1e3
    return {"median_ms": float(np.median(a)), "p95_ms": float(np.percentile(a, 95)),
            "p99_ms": float(np.percentile(a, 99)), "max_ms": float(a.max())}
