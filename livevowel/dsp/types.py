"""Records passed between the engine and whoever consumes its output.

Everything here is plain data: numpy arrays in SI-ish units (seconds, Hz, dB
relative to full scale). ``NaN`` marks a measure that was not made (unvoiced
frame, no reliable formant).
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Iterator

import numpy as np

#: Column order of the per-frame table written by ``analyze`` and ``listen``.
FRAME_COLUMNS: tuple[str, ...] = (
    "time_s",
    "voiced",
    "f0_hz",
    "f1_hz",
    "f2_hz",
    "f3_hz",
    "b1_hz",
    "b2_hz",
    "b3_hz",
    "level_db",
)


@dataclass(frozen=True)
class Frame:
    """One analysis frame, as handed to a display or logger.

    Attributes
    ----------
    time_s : float
        Centre of the analysis window, seconds from the start of the input.
    voiced : bool
        Voicing decision (with hysteresis).
    f0_hz : float
        Fundamental frequency in Hz, ``nan`` when unvoiced.
    f1_hz, f2_hz, f3_hz : float
        Smoothed formant frequencies in Hz, ``nan`` when not measured.
    b1_hz, b2_hz, b3_hz : float
        Formant bandwidths in Hz, ``nan`` when not measured.
    level_db : float
        Frame RMS level in dB relative to a full-scale value of 1.0 (a
        full-scale sine reads about -3 dBFS).
    confidence : float
        0..1, how much the formant estimate can be trusted (0 when unvoiced).
    """

    time_s: float
    voiced: bool
    f0_hz: float
    f1_hz: float
    f2_hz: float
    f3_hz: float
    b1_hz: float
    b2_hz: float
    b3_hz: float
    level_db: float
    confidence: float


@dataclass
class FrameTrack:
    """A run of frames as parallel arrays (one element per frame).

    Same attributes as :class:`Frame`, each a 1-D numpy array of equal length.
    ``voiced`` is boolean; everything else is float64 with ``nan`` for
    "not measured".
    """

    time_s: np.ndarray
    voiced: np.ndarray
    f0_hz: np.ndarray
    f1_hz: np.ndarray
    f2_hz: np.ndarray
    f3_hz: np.ndarray
    b1_hz: np.ndarray
    b2_hz: np.ndarray
    b3_hz: np.ndarray
    level_db: np.ndarray
    confidence: np.ndarray

    def __post_init__(self) -> None:
        n = len(self.time_s)
        for f in fields(self):
            arr = np.asarray(getattr(self, f.name))
            if f.name == "voiced":
                arr = arr.astype(bool)
            else:
                arr = arr.astype(np.float64, copy=False)
            if arr.shape != (n,):
                raise ValueError(f"FrameTrack.{f.name} has shape {arr.shape}, expected ({n},)")
            object.__setattr__(self, f.name, arr)

    def __len__(self) -> int:
        return len(self.time_s)

    @classmethod
    def empty(cls) -> "FrameTrack":
        """A track with no frames."""
        return cls(**{f.name: np.zeros(0) for f in fields(cls)})

    @classmethod
    def concat(cls, tracks: "list[FrameTrack]") -> "FrameTrack":
        """Join tracks end to end (in the order given)."""
        if not tracks:
            return cls.empty()
        return cls(**{f.name: np.concatenate([getattr(t, f.name) for t in tracks]) for f in fields(cls)})

    @classmethod
    def from_frames(cls, frames: "list[Frame]") -> "FrameTrack":
        """Build a track from a list of :class:`Frame` records."""
        if not frames:
            return cls.empty()
        cols = np.array([[getattr(fr, name) for name in _TRACK_FIELDS] for fr in frames], dtype=np.float64).T.copy()
        # columns built here already have the checked shapes and types: skip __post_init__
        track = cls.__new__(cls)
        for name, col in zip(_TRACK_FIELDS, cols):
            setattr(track, name, col.astype(bool) if name == "voiced" else col)
        return track

    def __getitem__(self, index: "slice | np.ndarray") -> "FrameTrack":
        """Select frames by slice or boolean/integer index array."""
        if isinstance(index, (int, np.integer)):
            raise TypeError("use .frame(i) for a single Frame")
        return FrameTrack(**{f.name: getattr(self, f.name)[index] for f in fields(self)})

    def frame(self, i: int) -> Frame:
        """Frame ``i`` as a :class:`Frame` record."""
        return Frame(**{f.name: (bool(getattr(self, f.name)[i]) if f.name == "voiced"
                                 else float(getattr(self, f.name)[i])) for f in fields(self)})

    def __iter__(self) -> Iterator[Frame]:
        for i in range(len(self)):
            yield self.frame(i)

    def formants(self) -> np.ndarray:
        """``(n, 3)`` array of F1, F2, F3 in Hz."""
        return np.column_stack([self.f1_hz, self.f2_hz, self.f3_hz])


#: FrameTrack's attribute names, in order.
_TRACK_FIELDS: tuple[str, ...] = tuple(f.name for f in fields(FrameTrack))
