"""Where things go on the vowel plane: (F1, F2) <-> pixel, ranges and grid ticks.

The plane uses the phonetic orientation (an open convention of the trade):
front vowels on the left, so **F2 grows to the left**; open vowels low, so
**F1 grows downwards**. The origin of the frequency axes is therefore the
top-right corner of the plot rectangle.

Both axes are linear in the chosen display unit: Hz, or Bark (critical-band
rate, Traunmüller 1990, via :func:`livevowel.dsp.scales.scale_by_name`).
Everything here is pure arithmetic on numbers and numpy arrays; no pygame.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Iterable, Sequence

import numpy as np

#: Display units the plane understands.
UNITS: tuple[str, ...] = ("hz", "bark")

ScalePair = tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray], np.ndarray]]


def _identity(x):
    return np.asarray(x, dtype=float)


def scale_for(units: str) -> ScalePair:
    """(forward, inverse) functions from Hz to ``units`` and back.

    ``"hz"`` is the identity; ``"bark"`` uses the project's Traunmüller (1990)
    conversion from :mod:`livevowel.dsp.scales`.
    """
    if units not in UNITS:
        raise ValueError(f"units must be one of {UNITS}, got {units!r}")
    if units == "hz":
        return _identity, _identity
    from livevowel.dsp.scales import scale_by_name

    return scale_by_name("bark")


@dataclass(frozen=True)
class PlaneRange:
    """Frequency span shown on each axis, in Hz, ``(low, high)``."""

    f1_hz: tuple[float, float]
    f2_hz: tuple[float, float]

    def __post_init__(self) -> None:
        for name in ("f1_hz", "f2_hz"):
            lo, hi = getattr(self, name)
            if not (np.isfinite(lo) and np.isfinite(hi) and 0 < lo < hi):
                raise ValueError(f"PlaneRange.{name} must be 0 < low < high, got {(lo, hi)}")


#: Span shown when a set gives no usable outline (adult voices, Hz; common practice).
DEFAULT_RANGE = PlaneRange(f1_hz=(200.0, 1000.0), f2_hz=(600.0, 3000.0))


def range_for_outlines(outlines: Iterable[np.ndarray], *, units: str = "hz", margin: float = 0.10,
                       min_span: "tuple[float, float] | None" = None,
                       scale: "ScalePair | None" = None) -> PlaneRange:
    """A plane range that holds every outline with a margin.

    Parameters
    ----------
    outlines : iterable of (n, 2) arrays
        Region boundaries as (F1, F2) in Hz (e.g. ``Target.outline_hz()``).
    units : {"hz", "bark"}
        Unit in which the margin is measured (so it looks even on screen).
    margin : float, keyword-only
        Fraction of each axis span added on both sides (0.10 = 10 %).
    min_span : (float, float), optional
        Smallest span of (F1, F2) in display units; the range is widened
        about its centre when narrower (a single target would otherwise fill
        the screen). Default: 250 Hz / 1.5 Bark for F1 and 600 Hz / 2.5 Bark
        for F2.
    scale : (forward, inverse), optional
        Hz <-> display-unit functions; default :func:`scale_for` ``(units)``.

    Returns
    -------
    PlaneRange
        In Hz. Falls back to :data:`DEFAULT_RANGE` when no finite point is given.
    """
    if margin < 0:
        raise ValueError(f"margin must be >= 0, got {margin}")
    fwd, inv = scale if scale is not None else scale_for(units)
    pts = [np.asarray(o, dtype=float).reshape(-1, 2) for o in outlines]
    pts = np.concatenate(pts) if pts else np.zeros((0, 2))
    pts = pts[np.all(np.isfinite(pts), axis=1) & np.all(pts > 0, axis=1)]
    if len(pts) == 0:
        return DEFAULT_RANGE
    if min_span is None:
        min_span = (250.0, 600.0) if units == "hz" else (1.5, 2.5)
    out = []
    for col, span_min in zip((0, 1), min_span):
        u = fwd(pts[:, col])
        lo, hi = float(np.min(u)), float(np.max(u))
        span = hi - lo
        if span < span_min:
            mid = (lo + hi) / 2
            lo, hi, span = mid - span_min / 2, mid + span_min / 2, span_min
        lo, hi = lo - margin * span, hi + margin * span
        lo_hz, hi_hz = float(inv(np.array(lo))), float(inv(np.array(hi)))
        out.append((max(lo_hz, 50.0), hi_hz))
    return PlaneRange(f1_hz=out[0], f2_hz=out[1])


def nice_ticks(lo: float, hi: float, *, count: int = 6) -> np.ndarray:
    """Round tick values inside ``[lo, hi]``, about ``count`` of them.

    Steps are 1, 2, 2.5 or 5 times a power of ten ("nice numbers",
    Heckbert 1990, Graphics Gems); the one giving closest to ``count``
    intervals over the span is used.
    """
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi <= lo:
        raise ValueError(f"need finite lo < hi, got {lo}, {hi}")
    if count < 1:
        raise ValueError(f"count must be >= 1, got {count}")
    span = hi - lo
    raw = span / count
    power = 10.0 ** math.floor(math.log10(raw))
    # the nice step whose number of intervals comes closest to ``count``
    steps = [m * power for m in (1.0, 2.0, 2.5, 5.0, 10.0)]
    step = min(steps, key=lambda s: (abs(span / s - count), -s))
    first = math.ceil(lo / step - 1e-9) * step
    ticks = np.arange(first, hi + step * 1e-9, step)
    return np.round(ticks, 10)


@dataclass(frozen=True)
class Rect:
    """Plot rectangle in pixels: left, top, width, height."""

    x: float
    y: float
    w: float
    h: float

    def __post_init__(self) -> None:
        if self.w <= 0 or self.h <= 0:
            raise ValueError(f"Rect needs positive width and height, got {self.w}x{self.h}")

    def contains(self, px: float, py: float) -> bool:
        return self.x <= px <= self.x + self.w and self.y <= py <= self.y + self.h


class Plane:
    """The mapping between (F1, F2) in Hz and pixels inside a rectangle.

    Parameters
    ----------
    rng : PlaneRange
        Frequencies at the edges, Hz.
    rect : Rect
        Plot rectangle, pixels (y grows downwards, as on screen).
    units : {"hz", "bark"}, keyword-only
        Each axis is linear in this unit.
    scale : (forward, inverse), optional
        Hz <-> unit functions; default :func:`scale_for` ``(units)``.

    Notes
    -----
    With ``u = forward(f)`` and the range ends ``u1lo..u1hi`` (F1) and
    ``u2lo..u2hi`` (F2)::

        x = rect.x + rect.w * (u2hi - u(F2)) / (u2hi - u2lo)     # F2 grows to the left
        y = rect.y + rect.h * (u(F1) - u1lo) / (u1hi - u1lo)     # F1 grows downwards
    """

    def __init__(self, rng: PlaneRange, rect: Rect, *, units: str = "hz",
                 scale: "ScalePair | None" = None) -> None:
        self.range = rng
        self.rect = rect
        self.units = units
        self._fwd, self._inv = scale if scale is not None else scale_for(units)
        self._u1 = (float(self._fwd(np.array(rng.f1_hz[0]))), float(self._fwd(np.array(rng.f1_hz[1]))))
        self._u2 = (float(self._fwd(np.array(rng.f2_hz[0]))), float(self._fwd(np.array(rng.f2_hz[1]))))

    def to_units(self, f_hz):
        """Hz -> display unit (array in, array out)."""
        return self._fwd(np.asarray(f_hz, dtype=float))

    def from_units(self, u):
        """Display unit -> Hz."""
        return self._inv(np.asarray(u, dtype=float))

    def to_pixel(self, f1_hz, f2_hz) -> tuple[np.ndarray, np.ndarray]:
        """(F1, F2) in Hz -> (x, y) in pixels (floats; NaN in, NaN out)."""
        u1 = self.to_units(f1_hz)
        u2 = self.to_units(f2_hz)
        r = self.rect
        x = r.x + r.w * (self._u2[1] - u2) / (self._u2[1] - self._u2[0])
        y = r.y + r.h * (u1 - self._u1[0]) / (self._u1[1] - self._u1[0])
        return x, y

    def to_hz(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """(x, y) in pixels -> (F1, F2) in Hz (inverse of :meth:`to_pixel`)."""
        r = self.rect
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        u2 = self._u2[1] - (x - r.x) / r.w * (self._u2[1] - self._u2[0])
        u1 = self._u1[0] + (y - r.y) / r.h * (self._u1[1] - self._u1[0])
        return self.from_units(u1), self.from_units(u2)

    def outline_to_pixels(self, outline_hz: np.ndarray) -> list[tuple[float, float]]:
        """An (n, 2) array of (F1, F2) Hz -> list of (x, y) pixel points."""
        o = np.asarray(outline_hz, dtype=float).reshape(-1, 2)
        x, y = self.to_pixel(o[:, 0], o[:, 1])
        return [(float(a), float(b)) for a, b in zip(x, y) if np.isfinite(a) and np.isfinite(b)]

    def ticks(self, *, count_f1: int = 6, count_f2: int = 7) -> tuple[np.ndarray, np.ndarray]:
        """Nice grid values for F1 and F2, **in display units**, inside the range."""
        return (nice_ticks(*self._u1, count=count_f1), nice_ticks(*self._u2, count=count_f2))

    def f1_tick_y(self, u: Sequence[float]) -> np.ndarray:
        """Pixel rows of F1 grid values given in display units."""
        u = np.asarray(u, dtype=float)
        return self.rect.y + self.rect.h * (u - self._u1[0]) / (self._u1[1] - self._u1[0])

    def f2_tick_x(self, u: Sequence[float]) -> np.ndarray:
        """Pixel columns of F2 grid values given in display units."""
        u = np.asarray(u, dtype=float)
        return self.rect.x + self.rect.w * (self._u2[1] - u) / (self._u2[1] - self._u2[0])
