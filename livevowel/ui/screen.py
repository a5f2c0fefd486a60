"""The practice screen as a reusable component.

:class:`PracticeScreen` is fed analysis frames (``feed``) and input health
(``set_health``), reacts to pygame events (``handle_event``) and paints
itself onto any surface (``draw``). It does not own a window, a clock or an
audio path, so the practice command, the demo and later drills all reuse it:
they differ only in the frame stream and the target controller they pass
(:class:`livevowel.feedback.TargetController` or a subclass).

What is on the screen
---------------------
* a header: the current target (IPA symbol and an example word), hits out of
  attempts, and the streak;
* the vowel plane in phonetic orientation (F2 grows to the left, F1
  downwards) with a labelled grid in Hz or Bark;
* the target regions; the current one filled and outlined in the theme's
  target colour, the others quiet;
* the voice dot (size and opacity follow confidence), a ~300 ms fading
  trail, and an arc that fills while the dot is held inside the target; a
  pulse when a hit is counted;
* a status strip: input level with clipping warning, noise state, F0,
  F1/F2/F3, latency, and the input state.

No dot is drawn when the newest frame is unvoiced, unmeasured or below the
confidence threshold, or when frames stop arriving.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import numpy as np
import pygame

from livevowel.feedback import HitCounter, HitEvent, TargetController
from livevowel.ui import draw as D
from livevowel.ui.fonts import FontBook
from livevowel.ui.geometry import Plane, Rect, range_for_outlines
from livevowel.ui.theme import get_theme, next_theme


#: Between the parts of a screen title (and of the header's second line); the header
#: drops parts from the left where the line is too wide.
TITLE_SEP = "  \u00b7  "


@dataclass(frozen=True)
class ScreenOptions:
    """How the screen looks and judges (the ``practice`` section of the settings)."""

    units: str = "hz"
    theme: str = "light"
    large_text: bool = False
    trail: bool = True
    trail_s: float = 0.30
    hold_s: float = 0.25
    min_confidence: float = 0.4
    tone: bool = True
    tone_volume: float = 0.15
    fps: int = 60
    stale_s: float = 0.25

    @classmethod
    def from_settings(cls, settings, **over) -> "ScreenOptions":
        """Options from ``settings['practice']`` (a :class:`livevowel.config.Settings`)."""
        p = settings["practice"]
        o = cls(units=p["units"], theme=p["theme"], large_text=p["large_text"], trail=p["trail"],
                trail_s=p["trail_ms"] / 1000.0, hold_s=p["hold_ms"] / 1000.0,
                min_confidence=p["min_confidence"], tone=p["tone"], tone_volume=p["tone_volume"],
                fps=int(p["fps"]))
        return replace(o, **{k: v for k, v in over.items() if v is not None})


#: Keys of the screen: (key names shown in the help, what they do).
KEY_HELP: tuple[tuple[str, str], ...] = (
    ("Space", "pause / resume listening"),
    ("→  or  N", "next target"),
    ("←  or  P", "previous target"),
    ("click", "make the clicked region the target"),
    ("U", "grid in Hz / Bark"),
    ("T", "trail on / off"),
    ("C", "colours: light, dark, high contrast"),
    ("L", "large text on / off"),
    ("M", "hit tone on / off"),
    ("F  or  F11", "full screen on / off"),
    ("H  or  ?", "this help"),
    ("Esc  or  Q", "quit (Esc first closes this help)"),
)

PULSE_S = 0.8
HIT_FLASH_S = 1.2


@dataclass(frozen=True)
class Layout:
    """Pixel rectangles of the screen parts and the text unit ``u`` (px per design px)."""

    width: int
    height: int
    u: float
    header: pygame.Rect
    plot: pygame.Rect
    strip: pygame.Rect


def compute_layout(width: int, height: int, *, text_scale: float = 1.0) -> Layout:
    """Split a ``width`` x ``height`` window into header, plot and status strip.

    Sizes are designed for 1280x800 and scale with the smaller of the two
    ratios; ``text_scale`` (large-text mode) enlarges text and the bands that
    hold it.
    """
    base = max(0.55, min(width / 1280.0, height / 800.0))
    u = base * text_scale
    header_h = int(78 * u)
    strip_h = int(56 * u)
    left = int(26 * base)
    right = int(84 * u)  # room for the F1 labels
    top_axis = int(34 * u)  # room for the F2 labels
    plot = pygame.Rect(left, header_h + top_axis, max(50, width - left - right),
                       max(50, height - header_h - top_axis - strip_h - int(14 * base)))
    return Layout(width, height, u, pygame.Rect(0, 0, width, header_h), plot,
                  pygame.Rect(0, height - strip_h, width, strip_h))


def _ink(text_surface, rect):
    """The part of ``rect`` (where ``text_surface`` is blitted) that holds ink: a font's line
    box has room above and below its glyphs that must not count as a collision."""
    return text_surface.get_bounding_rect().move(rect.topleft)


def _free_label_spot(sym, word, cx: float, cy: float, placed: list, bounds) -> tuple:
    """Where a region's symbol (bottom at ``cy``) and word (under it) go, centred on ``cx``: the
    first of the centre, then up and down by half and whole label heights, whose ink meets no
    ink in ``placed`` and stays within ``bounds``; the centre if none does.

    Returns ``(symbol rect, word rect or None, vertical move in px, [ink rects])``."""
    h = sym.get_height() + (word.get_height() if word is not None else 0)
    first = None
    for dy in (0.0, -0.5 * h, 0.5 * h, -h, h):
        r = sym.get_rect(midbottom=(int(round(cx)), int(round(cy + dy))))
        wr = word.get_rect(midtop=(r.centerx, r.bottom)) if word is not None else None
        ink = [_ink(sym, r)] + ([_ink(word, wr)] if wr is not None else [])
        if first is None:
            first = (r, wr, 0.0, ink)
        if all(bounds.contains(i) and i.collidelist(placed) < 0 for i in ink):
            return r, wr, dy, ink
    return first


class PracticeScreen:
    """Vowel plane, targets, dot and counters, fed by a frame stream.

    Parameters
    ----------
    target_set : TargetSet
        The regions to draw (already mapped through the speaker's profile
        when one is used).
    controller : TargetController, optional
        Decides the current target (default: free stepping over the set).
    options : ScreenOptions, keyword-only
    fonts : FontBook, optional
        Shared font cache (one is made when omitted; needs ``pygame.font``).
    on_hit : callable, optional
        Called with each hit :class:`~livevowel.feedback.HitEvent` (e.g. a tone).
    """

    def __init__(self, target_set: Any, controller: TargetController | None = None, *,
                 options: ScreenOptions | None = None, fonts: FontBook | None = None,
                 on_hit: Callable[[HitEvent], None] | None = None, title: str = "") -> None:
        self.target_set = target_set
        self.targets = tuple(target_set.targets)
        self.controller = controller or TargetController(self.targets)
        self.options = options or ScreenOptions()
        self.units = self.options.units
        self.theme_name = self.options.theme
        self.large_text = self.options.large_text
        self.show_trail = self.options.trail
        self.tone_on = self.options.tone
        self.fonts = fonts or FontBook()
        self.on_hit = on_hit
        self.title = title or getattr(target_set, "title", "")
        self.counter = HitCounter(hold_s=self.options.hold_s)
        self.paused = False
        self.show_help = False
        self.caution_text: str | None = None
        self.health: Any = None
        self.message = ""
        self._outlines = {t.id: np.asarray(t.outline_hz(64), dtype=float) for t in self.targets}
        self._centres = {t.id: (float(t.f1_hz), float(t.f2_hz)) for t in self.targets}
        self._strip_cut: tuple | None = None     # (what decided it, cut level) of the status strip
        self._sized_outlines: dict[tuple[str, float], np.ndarray] = {}
        self._by_id = {t.id: t for t in self.targets}
        self._trail: deque = deque()   # (time_s, f1_hz, f2_hz, stroke number)
        self._stroke = 0
        self._dot: Any = None          # newest reliable frame, or None
        self._last_frame: Any = None   # newest frame of any kind
        self._newest_t = -math.inf
        self._last_arrival = -math.inf
        self._pulses: list[tuple[float, str, float | None]] = []   # (start, target id, size SD or None)
        self._hit_flash = -math.inf
        #: (time_s, f1_hz, f2_hz, current target id, inside) of every dot shown.
        self.dot_log: deque = deque(maxlen=500_000)
        self.events: deque = deque(maxlen=10_000)
        self._static: pygame.Surface | None = None
        self._static_key: tuple | None = None
        self._plane: Plane | None = None
        self._layout: Layout | None = None
        self.frames_seen = 0
        #: Show the input-to-result latency (the loop turns it off for input not paced in real time).
        self.show_latency = True

    # ------------------------------------------------------------------ input
    @property
    def theme(self):
        return get_theme(self.theme_name, large_text=self.large_text)

    def reliable(self, fr) -> bool:
        """A frame the dot may show: voiced, F1 and F2 measured, confident enough."""
        return bool(fr.voiced) and math.isfinite(fr.f1_hz) and math.isfinite(fr.f2_hz) \
            and fr.f1_hz > 0 and fr.f2_hz > 0 and fr.confidence >= self.options.min_confidence

    def feed(self, frames: Sequence[Any], *, now_s: float) -> list[HitEvent]:
        """Take the frames that arrived since the last call (oldest first).

        ``now_s`` is the display clock (monotonic seconds) used for the
        stale-input check and the animations. Returns the hit/attempt events.
        Frames fed while paused are dropped.
        """
        out: list[HitEvent] = []
        if not frames:
            return out
        self._last_arrival = now_s
        if self.paused:
            self._dot = None
            return out
        take = getattr(self.controller, "take_events", None)
        for fr in frames:
            self.frames_seen += 1
            t = float(fr.time_s)
            self.controller.update(t)
            cur = self.controller.current
            size, hold = self.task()
            hold = hold if hold > 0 else float(self.options.hold_s)   # the counter needs a hold > 0
            if hold != self.counter.hold_s:
                self.counter.hold_s = hold
            ok = self.reliable(fr)
            if size is None:
                inside = bool(ok and cur.contains(fr.f1_hz, fr.f2_hz))
            else:
                inside = bool(ok and cur.distance(fr.f1_hz, fr.f2_hz) <= size)
            ev = self.counter.update(t, present=ok, inside=inside, target_id=cur.id)
            judged = take() if take is not None else None
            # a controller that judges attempts itself (a drill) decides what pulses and sounds
            shown = ev if judged is None else judged
            for e in shown:
                self.events.append(e)
                if e.kind == "hit":
                    self._pulses.append((now_s, e.target_id, e.size_sd if e.size_sd is not None
                                         else (size if e.target_id == cur.id else None)))
                    self._hit_flash = now_s
                    if self.on_hit is not None and self.tone_on:
                        self.on_hit(e)
            out += shown
            self._last_frame = fr
            self._newest_t = t
            if ok:
                self._dot = fr
                self._trail.append((t, float(fr.f1_hz), float(fr.f2_hz), float(self._stroke)))
                self.dot_log.append((t, float(fr.f1_hz), float(fr.f2_hz), cur.id, inside))
            else:
                self._dot = None
                self._stroke += 1  # the trail is never drawn across a gap in the voice
        horizon = self._newest_t - self.options.trail_s
        while self._trail and self._trail[0][0] < horizon:
            self._trail.popleft()
        return out

    def task(self) -> tuple[float | None, float]:
        """``(hit_size_sd, hold_s)`` the current region is drawn and tested at:
        the controller's (a drill's prompt, after adaptive changes) where it
        gives them, else the target's own size (None) and the screen's hold.
        A hold of 0 (judged without one) hides the hold arc."""
        c = self.controller
        size = getattr(c, "hit_size_sd", None)
        hold = getattr(c, "hold_s", None)
        return (None if size is None else float(size),
                float(hold) if hold is not None and hold >= 0 else float(self.options.hold_s))

    def outline_of(self, target: Any) -> np.ndarray:
        """(n, 2) outline in Hz of ``target``: the current one at the task's size."""
        return self.outline_at(target, self.task()[0] if target.id == self.controller.current.id else None)

    def outline_at(self, target: Any, size: float | None) -> np.ndarray:
        """(n, 2) outline in Hz of ``target`` at ``size`` SD (None: its own hit size)."""
        if size is None or size == target.hit_size_sd:
            return self._outlines[target.id]
        key = (target.id, size)
        got = self._sized_outlines.get(key)
        if got is None:
            if len(self._sized_outlines) > 64:
                self._sized_outlines.clear()
            got = self._sized_outlines[key] = np.asarray(target.outline_hz(64, size_sd=size), dtype=float)
        return got

    def set_health(self, health: Any) -> None:
        """The input's state (:class:`livevowel.audio.InputHealth` or None)."""
        self.health = health

    def dot_visible(self, now_s: float) -> bool:
        return self._dot is not None and not self.paused and now_s - self._last_arrival <= self.options.stale_s

    def dot_position(self, now_s: float) -> tuple[float, float] | None:
        """Pixel position of the dot at the last draw's layout, or None when hidden."""
        if not self.dot_visible(now_s) or self._plane is None:
            return None
        x, y = self._plane.to_pixel(self._dot.f1_hz, self._dot.f2_hz)
        return float(x), float(y)

    # ----------------------------------------------------------------- events
    def toggle_units(self) -> None:
        self.units = "bark" if self.units == "hz" else "hz"

    def handle_event(self, event) -> str | None:
        """React to a pygame event; returns "quit", "fullscreen", "pause" or None."""
        if event.type == pygame.QUIT:
            return "quit"
        if event.type == pygame.KEYDOWN:
            if self.caution_text is not None:
                self.caution_text = None
                return "caution-closed"
            k = event.key
            if k in (pygame.K_ESCAPE,):
                if self.show_help:
                    self.show_help = False
                    return None
                return "quit"
            if k == pygame.K_q:
                return "quit"
            if k in (pygame.K_h, pygame.K_F1, pygame.K_QUESTION) or getattr(event, "unicode", "") == "?":
                self.show_help = not self.show_help
            elif k == pygame.K_SPACE:
                self.paused = not self.paused
                if self.paused:
                    self._dot = None
                    self._trail.clear()
                    self.counter.abandon()
                return "pause"
            elif k in (pygame.K_RIGHT, pygame.K_n):
                self._step(self.controller.next)
            elif k in (pygame.K_LEFT, pygame.K_p):
                self._step(self.controller.previous)
            elif k == pygame.K_u:
                self.toggle_units()
            elif k == pygame.K_t:
                self.show_trail = not self.show_trail
            elif k == pygame.K_c:
                self.theme_name = next_theme(self.theme_name)
            elif k == pygame.K_l:
                self.large_text = not self.large_text
            elif k == pygame.K_m:
                self.tone_on = not self.tone_on
                self.message = "hit tone on" if self.tone_on else "hit tone off"
            elif k in (pygame.K_f, pygame.K_F11):
                return "fullscreen"
            return None
        if event.type == pygame.MOUSEBUTTONDOWN and getattr(event, "button", 1) == 1:
            if self.caution_text is not None:
                self.caution_text = None
                return "caution-closed"
            tid = self.target_at(*event.pos)
            if tid is not None:
                self._step(lambda: self.controller.select(tid))
        return None

    def _step(self, fn) -> None:
        if fn():
            self.counter.abandon()
            self.message = ""
        elif getattr(self.controller, "locked", False):
            self.message = "the target is fixed in this session"

    def target_at(self, x: float, y: float) -> str | None:
        """Id of the region under pixel (x, y) at the last draw's layout, else the
        region whose centre is within ~40 px, else None."""
        if self._plane is None or not self._plane.rect.contains(x, y):
            return None
        f1, f2 = self._plane.to_hz(x, y)
        f1, f2 = float(f1), float(f2)
        inside = [t for t in self.targets if t.contains(f1, f2)]
        best, best_d = None, math.inf
        for t in (inside or self.targets):
            cx, cy = self._plane.to_pixel(*self._centres[t.id])
            d = math.hypot(float(cx) - x, float(cy) - y)
            if d < best_d:
                best, best_d = t, d
        if best is None or (not inside and best_d > 40 * (self._layout.u if self._layout else 1)):
            return None
        return best.id

    # ------------------------------------------------------------------- draw
    def plane_for(self, width: int, height: int) -> Plane:
        """The (F1, F2) <-> pixel mapping for a window of this size."""
        lay = compute_layout(width, height, text_scale=self.theme.text_scale)
        rng = range_for_outlines(self._outlines.values(), units=self.units)
        p = lay.plot
        return Plane(rng, Rect(p.x, p.y, p.w, p.h), units=self.units)

    def _region_label(self, t) -> str:
        if self.fonts.has_ipa and getattr(t, "ipa", ""):
            return t.ipa
        return getattr(t, "lexical_set", None) or t.id

    def _build_static(self, size: tuple[int, int]) -> None:
        th = self.theme
        w, h = size
        lay = compute_layout(w, h, text_scale=th.text_scale)
        plane = self.plane_for(w, h)
        self._layout, self._plane = lay, plane
        u = lay.u
        F = self.fonts
        s = pygame.Surface(size).convert() if pygame.display.get_surface() else pygame.Surface(size)
        s.fill(th.background)
        pr = lay.plot
        pygame.draw.rect(s, th.plot, pr)
        # grid and tick labels
        uf1, uf2 = plane.ticks(count_f1=7, count_f2=8)
        tick = int(17 * u)
        lw = max(1, int(round(th.line_scale)))
        for v, yy in zip(uf1, plane.f1_tick_y(uf1)):
            yy = int(round(yy))
            if pr.top <= yy <= pr.bottom:
                pygame.draw.line(s, th.grid, (pr.left, yy), (pr.right, yy), lw)
                D.blit_text(s, F.text(_fmt(v, self.units), tick, th.axis_text), pr.right + 8 * u, yy, "midleft")
        for v, xx in zip(uf2, plane.f2_tick_x(uf2)):
            xx = int(round(xx))
            if pr.left <= xx <= pr.right:
                pygame.draw.line(s, th.grid, (xx, pr.top), (xx, pr.bottom), lw)
                D.blit_text(s, F.text(_fmt(v, self.units), tick, th.axis_text), xx, pr.top - 6 * u, "midbottom")
        unit = "Hz" if self.units == "hz" else "Bark"
        D.blit_text(s, F.text(f"← F2 ({unit})", tick, th.axis_text, bold=True), pr.left + 4 * u, pr.top + 4 * u)
        D.blit_text(s, F.text(f"F1 ({unit}) ↓", tick, th.axis_text, bold=True), pr.right - 4 * u,
                    pr.bottom - 4 * u, "bottomright")
        pygame.draw.rect(s, th.grid, pr, lw)
        # regions: the others first, the current one on top
        cur = self.controller.current
        for t in self.targets:
            if t.id == cur.id:
                continue
            pts = plane.outline_to_pixels(self._outlines[t.id])
            D.translucent_polygon(s, pts, th.region_line, th.region_fill_alpha)
            D.outline(s, pts, th.region_line, max(1, int(round(1.5 * th.line_scale * u))))
        pts = plane.outline_to_pixels(self.outline_of(cur))
        D.translucent_polygon(s, pts, th.current, th.current_fill_alpha)
        D.outline(s, pts, th.current, max(2, int(round(4 * th.line_scale * u))))
        # labels: the current target's first, then the others at their centres, each moved up or down
        # (by up to one label height) off any label already placed, so that labels of regions that
        # crowd together (a speaker's profile can move them) stay readable
        placed: list = []
        moves: dict = {}
        order = [cur] + [t for t in self.targets if t.id != cur.id]
        for t in order:
            cx, cy = plane.to_pixel(*self._centres[t.id])
            is_cur = t.id == cur.id
            col = th.current if is_cur else th.text
            sym = F.text(self._region_label(t), int((40 if is_cur else 30) * u), col, bold=is_cur)
            word = F.text(t.words[0], int(17 * u), col if is_cur else th.muted_text) if t.words else None
            if is_cur:
                # the current target's label sits above its region, where the dot will not cover it
                top = min(p[1] for p in pts)
                if top - 2 * u - sym.get_height() >= pr.top:
                    r = D.blit_text(s, sym, cx, top - 2 * u, "midbottom")
                else:  # no room above: below (drawn once)
                    r = D.blit_text(s, sym, cx, max(p[1] for p in pts) + 2 * u, "midtop")
                placed.append(_ink(sym, r))
                if word is not None:
                    placed.append(_ink(word, D.blit_text(s, word, r.right + 6 * u, r.centery + 4 * u, "midleft")))
                continue
            r, wr, dy, ink = _free_label_spot(sym, word, cx, cy, placed, pr)
            s.blit(sym, r)
            if word is not None:
                s.blit(word, wr)
            placed += ink
            moves[t.id] = dy
        #: the region labels' ink (symbols and words, px), the current target's first, and how far
        #: each other label was moved off the others (px, 0 = on its region's centre)
        self.label_rects, self.label_moves = placed, moves
        # header, static part: the current target
        hx = int(26 * u)
        D.blit_text(s, F.text("target", int(17 * u), th.muted_text), hx, lay.header.centery - 22 * u, "midleft")
        sym = F.text(self._region_label(cur), int(50 * u), th.current, bold=True)
        r = D.blit_text(s, sym, hx + 70 * u, lay.header.centery + 2 * u, "midleft")
        word = ", ".join(cur.words[:2]) if cur.words else ""
        if word:
            D.blit_text(s, F.text(f"as in  {word}", int(26 * u), th.text), r.right + 18 * u,
                        lay.header.centery + 2 * u, "midleft")
        # second line: titles, then the drill's prompt and trial state (the part a coach watches);
        # where the line is too wide the titles go first, from the left, then the end is cut with "…"
        sep = TITLE_SEP
        titles = [p for p in self.title.split(sep) if p]
        label = getattr(self.controller, "label", "")
        parts = titles + [label] if label else titles
        room = lay.header.width - 2 * hx
        size16 = int(16 * u)
        while len(parts) > 1 and F.text(sep.join(parts), size16, th.muted_text).get_width() > room:
            parts = parts[1:]
        if parts:
            line = sep.join(parts)
            text = F.text(line, size16, th.muted_text)
            while text.get_width() > room and len(line) > 1:
                line = line[:-2].rstrip() + "…"
                text = F.text(line, size16, th.muted_text)
            D.blit_text(s, text, hx, lay.header.bottom - 4 * u, "bottomleft")
        pygame.draw.rect(s, th.strip, lay.strip)
        self._static = s

    def draw(self, surface: pygame.Surface, *, now_s: float) -> None:
        """Paint the whole screen onto ``surface`` (any size)."""
        th = self.theme
        size = surface.get_size()
        key = (size, self.theme_name, self.large_text, self.units, self.controller.version,
               self.controller.current.id, self.fonts.has_ipa, getattr(self.controller, "label", ""),
               self.task()[0])
        if self._static is None or key != self._static_key:
            self._build_static(size)
            self._static_key = key
        surface.blit(self._static, (0, 0))
        lay, plane, u = self._layout, self._plane, self._layout.u
        pr = lay.plot
        surface.set_clip(pr)
        # hit pulses: an expanding ring from the region centre
        keep = []
        for start, tid, psize in self._pulses:
            age = (now_s - start) / PULSE_S
            if 0 <= age < 1 and tid in self._by_id:
                cx, cy = plane.to_pixel(*self._centres[tid])
                pts = plane.outline_to_pixels(self.outline_at(self._by_id[tid], psize))
                D.outline(surface, pts, th.hit, max(3, int(5 * u * (1 - age)) + 1))
                D.ring(surface, cx, cy, (20 + 110 * age) * u, th.hit, max(2, int(6 * u * (1 - age))),
                       int(230 * (1 - age)))
                keep.append((start, tid, psize))
        self._pulses = keep
        # the dot
        visible = self.dot_visible(now_s)
        trail_pts = []
        if self.show_trail and self._trail and not self.paused and now_s - self._last_arrival <= 1.0:
            span = max(1e-3, self.options.trail_s)
            pts = np.array(list(self._trail)[:-1] if visible else list(self._trail), dtype=float).reshape(-1, 4)
            if len(pts):
                xs, ys = plane.to_pixel(pts[:, 1], pts[:, 2])
                ages = np.minimum(1.0, (self._newest_t - pts[:, 0]) / span)
                trail_pts = list(zip(xs.tolist(), ys.tolist(), ages.tolist(), pts[:, 3].tolist()))
        dx = dy = None
        if visible:
            x, y = plane.to_pixel(self._dot.f1_hz, self._dot.f2_hz)
            dx, dy = float(x), float(y)
        D.dot_with_trail(surface, trail_pts, dx, dy, confidence=self._dot.confidence if visible else 0.0,
                         color=th.dot, edge=th.plot, radius=17 * lay.u)
        if visible and self.counter.hold_progress > 0 and self.task()[1] > 0:
            col = th.hit if self.counter.hold_progress >= 1 else th.current
            D.arc(surface, dx, dy, 27 * u, self.counter.hold_progress, col, max(3, int(5 * u)))
        surface.set_clip(None)
        self._draw_counters(surface, now_s)
        self._draw_strip(surface, now_s)
        if self.show_help:
            self._draw_help(surface)
        if self.caution_text is not None:
            self._draw_caution(surface)

    def _draw_counters(self, surface, now_s: float) -> None:
        th, F, lay, u = self.theme, self.fonts, self._layout, self._layout.u
        hits, tries, streak, scope = self.counts()
        flash = now_s - self._hit_flash < HIT_FLASH_S
        x = lay.width - 26 * u
        cy = lay.header.centery
        r = D.blit_text(surface, F.text(f"{streak}", int(40 * u), th.hit if flash else th.text, bold=True),
                        x, cy + 4 * u, "midright")
        r = D.blit_text(surface, F.text("streak", int(17 * u), th.muted_text), r.left - 10 * u, cy + 4 * u,
                        "midright")
        r = D.blit_text(surface, F.text(f"of {tries}", int(24 * u), th.text), r.left - 34 * u, cy + 4 * u,
                        "midright")
        r = D.blit_text(surface, F.text(f"{hits}", int(40 * u), th.hit if flash else th.text, bold=True),
                        r.left - 10 * u, cy + 4 * u, "midright")
        r = D.blit_text(surface, F.text("hits", int(17 * u), th.muted_text), r.left - 10 * u, cy + 4 * u,
                        "midright")
        if scope:
            D.blit_text(surface, F.text(f"{scope} ·", int(17 * u), th.muted_text), r.left - 8 * u, cy + 4 * u,
                        "midright")

    def counts(self) -> tuple[int, int, int, str]:
        """``(hits, attempts, streak, scope)`` for the header: the controller's
        recorded tally where it keeps one (a drill: the block's trials), else
        the screen's own hold-based counts (scope "")."""
        t = getattr(self.controller, "tally", None)
        if t is not None:
            return int(t.hits), int(t.trials), int(t.streak), str(t.scope)
        c = self.counter
        return c.hits, c.attempts, c.streak, ""

    def _draw_strip(self, surface, now_s: float) -> None:
        """The status strip: input meter, SNR and F0-F3 from the left; state, latency and the
        help hint from the right. Items that do not fit (large text, a narrow window) are left
        out, least needed first: latency, the help hint's word (its H stays), the meter's label,
        the SNR's word; then the numbers close up, the meter narrows, the SNR goes, then F3 and
        the unit, then "TOO LOUD" gives way to the meter's own warning colour. The choice is made
        on the widest numbers the strip can show and kept while what decides it is unchanged."""
        th, F, lay, u = self.theme, self.fonts, self._layout, self._layout.u
        st = lay.strip
        size = int(19 * u)
        small = int(15 * u)
        cy = st.centery
        h = self.health
        level = getattr(h, "level_db", None)
        clip = bool(getattr(h, "clipping", False))
        snr = getattr(h, "snr_db", None)
        have_snr = snr is not None and math.isfinite(snr)
        fr = self._dot if self.dot_visible(now_s) else None
        last = self._last_frame

        def num(v):
            return f"{v:.0f}" if v is not None and math.isfinite(v) else "–"

        f0 = last.f0_hz if (last is not None and not self.paused and now_s - self._last_arrival <= 0.5) else None
        parts = [f"F0 {num(f0)}", f"F1 {num(fr.f1_hz if fr else None)}", f"F2 {num(fr.f2_hz if fr else None)}",
                 f"F3 {num(fr.f3_hz if fr else None)} Hz"]
        widest_parts = ["F0 000", "F1 0000", "F2 0000", "F3 0000 Hz"]   # F0 under 1000 Hz
        n_cuts = 10
        state = "paused" if self.paused else (getattr(h, "state", None) or "starting")
        lat = getattr(h, "latency_s", None)
        show_lat = self.show_latency and lat is not None and math.isfinite(lat)
        gap = 10 * u

        def plan(level_of_cut: int, *, widest: bool = False):
            """Surfaces for the left and right items at this level of cutting; ``widest``: with
            the widest numbers they can show, so that the choice does not flicker as they change
            (and renders only texts the font book has cached)."""
            nums = widest_parts if widest else parts
            if level_of_cut >= 8:                     # F3 and the unit go last but one
                nums = nums[:3]
            # (kind, surface, space before it)
            left = []
            if level_of_cut < 3:
                left.append(("label", F.text("input", small, th.muted_text), 0))
            left.append(("meter", int((130 if level_of_cut < 6 else 60) * u), 8 * u if left else 0))
            if clip and level_of_cut < 9:
                left.append(("loud", F.text("TOO LOUD", size, th.warn, bold=True), gap))
            if have_snr and level_of_cut < 7:
                col = th.text if snr >= 10 else th.warn
                word = "" if snr >= 20 or level_of_cut >= 4 else (" (some noise)" if snr >= 10 else " (noisy)")
                value = "000" if widest else str(int(round(snr)))      # -99..999 dB
                left.append(("snr", F.text(f"SNR {value} dB{word}", size, col), gap + 12 * u))
            tight = level_of_cut >= 5
            left.append(("nums", F.text((" " if tight else "   ").join(nums), size, th.text),
                         gap + (2 if tight else 16) * u))
            right = [("help", F.text("H  help" if level_of_cut < 2 else "H", small, th.muted_text), 0)]
            right.append(("state", F.text(state, size, th.warn if state in ("input lost", "stopped") else th.text,
                                          bold=True), 22 * u))
            if show_lat and level_of_cut < 1:
                ms = "0000" if widest else f"{lat * 1000:.0f}"
                right.append(("lat", F.text(f"latency {ms} ms", size, th.text), 22 * u))
            return left, right

        def width(items):
            return sum((surf if k == "meter" else surf.get_width()) + pre for k, surf, pre in items)

        key = (lay.width, u, self.theme_name, self.large_text, clip, have_snr,
               None if not have_snr else (snr >= 20, snr >= 10), show_lat, state)
        if self._strip_cut is None or self._strip_cut[0] != key:
            room = lay.width - 40 * u - 16 * u
            for cut in range(n_cuts):
                left, right = plan(cut, widest=True)
                if width(left) + width(right) <= room:
                    break
            self._strip_cut = (key, cut)
        left, right = plan(self._strip_cut[1])
        x = 20 * u
        for k, surf, pre in left:
            x += pre
            if k == "meter":
                mrect = pygame.Rect(int(x), int(cy - 7 * u), surf, int(14 * u))
                D.level_meter(surface, mrect, level if level is not None else float("nan"), back=th.meter_back,
                              fill=th.meter_fill, warn=th.warn, clipping=clip)
                x = mrect.right
            else:
                x = D.blit_text(surface, surf, x, cy, "midleft").right
        rx = lay.width - 20 * u
        for k, surf, pre in right:
            rx = D.blit_text(surface, surf, rx - pre, cy, "midright").left
        #: (where the strip's left items end, where its right items start), px: they never cross
        self.strip_extent = (float(x), float(rx))
        note = getattr(h, "message", "") or ""
        msg, col = (note, th.warn) if note and state in ("input lost", "stopped", "starting") \
            else (self.message, th.muted_text)
        if msg:
            D.blit_text(surface, F.text(msg, small, col), lay.plot.left + 6 * u, lay.plot.bottom - 6 * u,
                        "bottomleft")

    def _overlay(self, surface, kind: str, build) -> None:
        """Blit a centred panel; ``build(width_limit, height_limit)`` returns its opaque surface.

        The panel is composed once per kind, window size, theme and text and
        cached, so an open help or caution costs one opaque blit per frame.
        """
        key = (kind, surface.get_size(), self.theme_name, self.large_text, self.caution_text)
        cache = self.__dict__.setdefault("_overlays", {})
        panel = cache.get(key)
        if panel is None:
            cache.clear()
            panel = build(surface.get_width() - 20, surface.get_height() - 20)
            cache[key] = panel
        r = panel.get_rect(center=surface.get_rect().center)
        surface.blit(panel, r)

    def _panel_surface(self, width: int, height: int) -> pygame.Surface:
        th = self.theme
        p = pygame.Surface((max(10, width), max(10, height)))
        p.fill(th.overlay[:3])
        pygame.draw.rect(p, th.current, p.get_rect(), max(2, int(3 * self._layout.u)))
        return p

    def _draw_help(self, surface) -> None:
        th, F, u = self.theme, self.fonts, self._layout.u

        def build(wmax: int, hmax: int) -> pygame.Surface:
            size = int(22 * u)
            line = int(size * 1.55)
            p = self._panel_surface(min(int(760 * u), wmax), min(int((len(KEY_HELP) + 3) * line), hmax))
            y = line
            D.blit_text(p, F.text("Keys", int(26 * u), th.text, bold=True), 30 * u, y, "midleft")
            for k, what in KEY_HELP:
                y += line
                D.blit_text(p, F.text(k, size, th.current, bold=True), 30 * u, y, "midleft")
                D.blit_text(p, F.text(what, size, th.text), 250 * u, y, "midleft")
            return p

        self._overlay(surface, "help", build)

    def _draw_caution(self, surface) -> None:
        th, F, u = self.theme, self.fonts, self._layout.u

        def build(wmax: int, hmax: int) -> pygame.Surface:
            size = int(24 * u)
            width = min(int(820 * u), wmax)
            lines = D.wrap_text(F, self.caution_text or "", size, width - int(60 * u))
            line = int(size * 1.5)
            p = self._panel_surface(width, min((len(lines) + 4) * line, hmax))
            y = line
            D.blit_text(p, F.text("Before you start", int(28 * u), th.text, bold=True), 30 * u, y, "midleft")
            for ln in lines:
                y += line
                D.blit_text(p, F.text(ln, size, th.text), 30 * u, y, "midleft")
            D.blit_text(p, F.text("Press any key to continue", int(20 * u), th.muted_text), 30 * u,
                        p.get_height() - line * 0.8, "midleft")
            return p

        self._overlay(surface, "caution", build)


def _fmt(v: float, units: str) -> str:
    if units == "hz":
        return f"{v:.0f}"
    return f"{v:.0f}" if abs(v - round(v)) < 1e-6 else f"{v:.1f}"
