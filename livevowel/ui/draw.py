"""Drawing primitives of the practice screen (pygame surfaces in, pixels out).

Only small helpers live here: text placed by an anchor, translucent
polygons and discs, the voice dot with its trail, the hold arc, the hit
pulse and the level meter. The screen (:mod:`livevowel.ui.screen`) decides
what goes where.
"""

from __future__ import annotations

import math
from typing import Sequence

import pygame
import pygame.gfxdraw

RGB = tuple[int, int, int]


def blit_text(surface, text_surface, x: float, y: float, anchor: str = "topleft") -> pygame.Rect:
    """Blit ``text_surface`` with its ``anchor`` point (a pygame.Rect attribute) at (x, y)."""
    r = text_surface.get_rect(**{anchor: (int(round(x)), int(round(y)))})
    surface.blit(text_surface, r)
    return r


def translucent_polygon(surface, points: Sequence[tuple[float, float]], color: RGB, alpha: int) -> None:
    """Fill a polygon with ``color`` at opacity ``alpha`` (0..255), blended onto ``surface``."""
    if len(points) < 3 or alpha <= 0:
        return
    pts = [(int(round(x)), int(round(y))) for x, y in points]
    pygame.gfxdraw.filled_polygon(surface, pts, (*color, int(alpha)))


def outline(surface, points: Sequence[tuple[float, float]], color: RGB, width: int) -> None:
    """Closed anti-aliased outline of ``width`` pixels."""
    if len(points) < 3:
        return
    if width <= 1:
        pygame.draw.aalines(surface, color, True, points)
    else:
        pygame.draw.lines(surface, color, True, points, width)
        pygame.draw.aalines(surface, color, True, points)


def disc(surface, x: float, y: float, r: float, color: RGB, alpha: int = 255, *, aa: bool = True) -> None:
    """A filled disc blended at ``alpha``; ``aa`` adds an anti-aliased rim (best when opaque)."""
    xi, yi, ri = int(round(x)), int(round(y)), max(1, int(round(r)))
    c = (*color, int(max(0, min(255, alpha))))
    pygame.gfxdraw.filled_circle(surface, xi, yi, ri, c)
    if aa:
        pygame.gfxdraw.aacircle(surface, xi, yi, ri, c)


def ring(surface, x: float, y: float, r: float, color: RGB, width: int, alpha: int = 255) -> None:
    """A circle outline ``width`` pixels thick, blended at ``alpha``."""
    xi, yi = int(round(x)), int(round(y))
    c = (*color, int(max(0, min(255, alpha))))
    for k in range(max(1, width)):
        rr = int(round(r)) - k
        if rr > 0:
            pygame.gfxdraw.aacircle(surface, xi, yi, rr, c)
            pygame.gfxdraw.circle(surface, xi, yi, rr, c)


def arc(surface, x: float, y: float, r: float, fraction: float, color: RGB, width: int) -> None:
    """Clockwise arc from 12 o'clock covering ``fraction`` (0..1) of a turn, ``width`` px thick."""
    if fraction <= 0:
        return
    fraction = min(1.0, fraction)
    n = max(2, int(64 * fraction) + 1)
    ang = [-math.pi / 2 + 2 * math.pi * fraction * k / (n - 1) for k in range(n)]
    pts = [(x + r * math.cos(a), y + r * math.sin(a)) for a in ang]
    pygame.draw.lines(surface, color, fraction >= 0.999, pts, width)
    for px, py in (pts[0], pts[-1]):  # round caps
        pygame.draw.circle(surface, color, (int(round(px)), int(round(py))), max(1, width // 2))


def dot_with_trail(surface, trail: Sequence[tuple[float, float, float, float]], x: float | None,
                   y: float | None, *, confidence: float, color: RGB, edge: RGB, radius: float) -> None:
    """The voice dot and the fading trail behind it.

    ``trail`` holds (x, y, age_fraction, stroke) with age 0 (newest) .. 1
    (oldest); older points are smaller and fainter. Successive points of the
    same stroke are joined; a new stroke (after a gap in the voice) is not
    joined to the last. The dot's radius and opacity grow with
    ``confidence`` (0..1). Pass ``x=None`` for no dot (trail only).
    """
    # fill gaps between successive trail points so a fast glide reads as a stroke
    pts: list[tuple[float, float, float]] = []
    step = max(2.0, radius * 0.3)
    for i, p in enumerate(trail):
        if i and trail[i - 1][3] == p[3]:
            q = trail[i - 1]
            n = int(math.hypot(p[0] - q[0], p[1] - q[1]) // step)
            for k in range(1, n):
                w = k / n
                pts.append((q[0] + w * (p[0] - q[0]), q[1] + w * (p[1] - q[1]), q[2] + w * (p[2] - q[2])))
        pts.append(p[:3])
    for tx, ty, age in pts:
        a = 1.0 - age
        disc(surface, tx, ty, radius * (0.22 + 0.4 * a), color, int(18 + 100 * a * a), aa=False)
    if x is None or y is None:
        return
    c = max(0.0, min(1.0, confidence))
    r = radius * (0.65 + 0.35 * c)
    disc(surface, x, y, r + max(2, radius * 0.18), edge, 230)
    disc(surface, x, y, r, color, int(110 + 145 * c))


def level_meter(surface, rect: pygame.Rect, level_db: float, *, floor_db: float = -60.0, back: RGB,
                fill: RGB, warn: RGB, clipping: bool) -> None:
    """A horizontal bar from ``floor_db`` to 0 dBFS; turns ``warn`` when clipping."""
    pygame.draw.rect(surface, back, rect, border_radius=max(2, rect.h // 4))
    if level_db is None or not math.isfinite(level_db):
        return
    frac = max(0.0, min(1.0, (level_db - floor_db) / -floor_db))
    if frac > 0:
        r = pygame.Rect(rect.x, rect.y, max(2, int(rect.w * frac)), rect.h)
        pygame.draw.rect(surface, warn if clipping else fill, r, border_radius=max(2, rect.h // 4))
    # mark at -6 dBFS: above it, speech is getting close to clipping
    mx = rect.x + int(rect.w * (1 - 6 / -floor_db))
    pygame.draw.line(surface, warn, (mx, rect.y - 2), (mx, rect.bottom + 1), 2)


def wrap_text(fontbook, text: str, size: int, width_px: int) -> list[str]:
    """Split ``text`` into lines no wider than ``width_px`` at ``size``."""
    f = fontbook.font(size)
    words = text.split()
    lines: list[str] = []
    cur = ""
    for w in words:
        trial = f"{cur} {w}".strip()
        if f.size(trial)[0] <= width_px or not cur:
            cur = trial
        else:
            lines.append(cur)
            cur = w
    if cur:
        lines.append(cur)
    return lines
