"""The one small interface every input source implements.

A :class:`Source` delivers :class:`Block` records to a :class:`Sink` from a
thread the source owns (PortAudio's callback thread for the microphone, a
pacing thread for recordings and the generated voice). The sink's
:meth:`Sink.on_block` runs on that thread, so it must return quickly: no
blocking, no large allocations, no locks shared with a display.
"""

from __future__ import annotations

import abc
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Block:
    """A run of consecutive input samples.

    Attributes
    ----------
    samples : ndarray, shape (n, channels), float32
        Samples in [-1, 1] (full scale 1.0). The array belongs to the block
        (sources copy out of device buffers).
    rate_hz : float
        Sample rate in Hz (the device's own rate; the engine resamples).
    start_time_s : float
        Capture time of the first sample, seconds since the session started.
        Within a segment it advances by exactly ``n / rate_hz`` per block;
        after an input loss the next segment starts at the wall-clock time
        the input came back.
    received_s : float
        ``time.monotonic()`` when the block was handed over (the instant its
        last sample became available), for latency figures.
    segment : int
        0 for the first stretch of input; incremented each time input resumes
        after a loss (sample counting restarts there).
    overflow : bool
        The device reported lost input samples just before this block.
    """

    samples: np.ndarray
    rate_hz: float
    start_time_s: float
    received_s: float = 0.0
    segment: int = 0
    overflow: bool = False

    @property
    def n(self) -> int:
        """Number of samples (per channel)."""
        return int(self.samples.shape[0])

    @property
    def duration_s(self) -> float:
        """Length in seconds."""
        return self.samples.shape[0] / self.rate_hz


class Sink:
    """Receives blocks and events from a source (base class: ignores all).

    Every method may be called from the source's own thread.
    """

    def on_block(self, block: Block) -> None:
        """A block of samples is ready. Must not block."""

    def on_event(self, kind: str, message: str = "") -> None:
        """Something happened to the input.

        ``kind`` is one of ``"started"`` (first block is coming),
        ``"lost"`` (device gone; the source retries), ``"resumed"`` (input
        is back; the next block starts a new segment), ``"end"`` (a finite
        source delivered everything) or ``"error"`` (the source gave up;
        ``message`` says why).
        """

    def backlog_s(self) -> float:
        """Seconds of audio accepted but not yet processed.

        Sources running as fast as possible (pace 0) wait while this is
        high, so accelerated runs exert back-pressure instead of dropping.
        """
        return 0.0


class Source(abc.ABC):
    """An input: starts delivering blocks to a sink, stops on request.

    Attributes
    ----------
    name : str
        What the user would call it ("microphone 'pulse'", "file a.wav", "demo voice").
    rate_hz : float
        Sample rate of the blocks, Hz.
    channels : int
        Channels per block (columns of ``Block.samples``).
    blocksize : int
        Samples per block (the last block of a recording may be shorter).
    pace : float
        1.0 real time, >1 faster, 0 as fast as the sink takes it. Live input is always 1.0.
    live : bool
        True for a device (cannot be paced or rewound).
    """

    name: str = "source"
    rate_hz: float = 0.0
    channels: int = 1
    blocksize: int = 0
    pace: float = 1.0
    live: bool = False

    @abc.abstractmethod
    def start(self, sink: Sink) -> None:
        """Begin delivering blocks to ``sink`` (returns at once)."""

    @abc.abstractmethod
    def stop(self) -> None:
        """Stop delivering (idempotent; waits for the source's thread)."""

    @property
    def finished(self) -> bool:
        """True once a finite source has delivered everything (or stopped)."""
        return False

    @property
    def duration_s(self) -> float | None:
        """Total length for finite sources, ``None`` for live input."""
        return None

    def __enter__(self) -> "Source":
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()


def check_pace(pace: float) -> float:
    """Validate a pace factor (1.0 real time, >1 faster, 0 as fast as possible)."""
    pace = float(pace)
    if not np.isfinite(pace) or pace < 0:
        raise ValueError(f"pace must be 0 (as fast as possible) or a positive factor, got {pace}")
    return pace
