"""The practice screen drawn under SDL's dummy driver: pixels where the maths says."""

import math
import os

import numpy as np
import pytest

os.environ.setdefault("SDL_VIDEODRIVER", "dummy")
pygame = pytest.importorskip("pygame")

from livevowel.dsp.types import Frame  # noqa: E402
from livevowel.targets import load_target_set  # noqa: E402
from livevowel.ui.fonts import FontBook, renders_glyphs  # noqa: E402
from livevowel.ui.screen import PracticeScreen, ScreenOptions  # noqa: E402
from livevowel.ui.theme import get_theme  # noqa: E402

SIZE = (1280, 800)


def traunmuller_bark(f):
    """Traunmüller (1990) critical-band rate, written out independently."""
    z = 26.81 * f / (1960.0 + f) - 0.53
    if z < 2:
        z = z + 0.15 * (2 - z)
    elif z > 20.1:
        z = z + 0.22 * (z - 20.1)
    return z


@pytest.fixture(scope="module")
def display():
    pygame.display.init()
    pygame.font.init()
    surf = pygame.display.set_mode(SIZE)
    yield surf
    pygame.display.quit()


@pytest.fixture(scope="module")
def fonts(display):
    return FontBook()


@pytest.fixture(scope="module")
def tset():
    return load_target_set("gae-men")


def frame(t, f1, f2, *, voiced=True, conf=1.0):
    return Frame(time_s=t, voiced=voiced, f0_hz=120.0 if voiced else math.nan, f1_hz=f1, f2_hz=f2,
                 f3_hz=2500.0 if voiced else math.nan, b1_hz=80, b2_hz=100, b3_hz=150, level_db=-20.0,
                 confidence=conf)


def make(tset, fonts, **opt):
    opt.setdefault("trail", False)
    return PracticeScreen(tset, options=ScreenOptions(**opt), fonts=fonts)


def rgb(surface, x, y):
    return tuple(surface.get_at((int(round(x)), int(round(y)))))[:3]


def blend(under, over, alpha):
    return tuple(round(u + (o - u) * alpha / 255) for u, o in zip(under, over))


def close(c1, c2, tol=4):
    return all(abs(a - b) <= tol for a, b in zip(c1, c2))


@pytest.mark.parametrize("units", ["hz", "bark"])
def test_dot_lands_at_the_expected_pixel(display, fonts, tset, units):
    s = make(tset, fonts, units=units)
    s.draw(display, now_s=0.0)  # lays out the plane
    f1, f2 = 560.0, 1650.0
    s.feed([frame(0.0, f1, f2)], now_s=0.0)
    s.draw(display, now_s=0.01)
    rect, rng = s._plane.rect, s._plane.range
    if units == "hz":
        fx = lambda f: f  # noqa: E731
    else:
        fx = traunmuller_bark
    x = rect.x + rect.w * (fx(rng.f2_hz[1]) - fx(f2)) / (fx(rng.f2_hz[1]) - fx(rng.f2_hz[0]))
    y = rect.y + rect.h * (fx(f1) - fx(rng.f1_hz[0])) / (fx(rng.f1_hz[1]) - fx(rng.f1_hz[0]))
    assert s.dot_position(0.01) == pytest.approx((x, y), abs=1e-6)
    dot = get_theme("light").dot
    assert rgb(display, x, y) == dot
    # and the dot is small: 40 px away the plane is not dot-coloured
    assert rgb(display, x + 40, y) != dot


def test_regions_appear_where_the_set_puts_them(display, fonts, tset):
    s = make(tset, fonts)
    s.controller.select("fleece")
    s.draw(display, now_s=0.0)
    th = get_theme("light")
    fleece = tset.get("fleece")
    sd1, sd2 = fleece.sd_hz
    p = s._plane
    # inside the current (fleece) region, half-way to its edge along F1: the target tint
    x, y = p.to_pixel(fleece.f1_hz + 0.5 * fleece.hit_size_sd * sd1, fleece.f2_hz)
    assert close(rgb(display, x, y), blend(th.plot, th.current, th.current_fill_alpha))
    # just outside its edge on the front side (higher F2, to the left): bare plane
    x, y = p.to_pixel(fleece.f1_hz, fleece.f2_hz + 1.25 * fleece.hit_size_sd * sd2)
    assert close(rgb(display, x, y), th.plot)
    # a point on its boundary is drawn in the target colour (outline)
    o = fleece.outline_hz(64)
    x, y = p.to_pixel(o[16, 0], o[16, 1])
    assert close(rgb(display, x, y), th.current, tol=40)
    # another region (LOT, open and back) has the quiet tint at its centre's side
    lot = tset.get("lot")
    x, y = p.to_pixel(lot.f1_hz + 0.8 * lot.hit_size_sd * lot.sd_hz[0], lot.f2_hz)
    assert close(rgb(display, x, y), blend(th.plot, th.region_line, th.region_fill_alpha))
    # and it sits below-right of fleece on screen (open: lower; back: to the right)
    xf, yf = p.to_pixel(fleece.f1_hz, fleece.f2_hz)
    xl, yl = p.to_pixel(lot.f1_hz, lot.f2_hz)
    assert xl > xf and yl > yf


def _plot_pixels(surface, screen):
    r = screen._layout.plot
    return pygame.surfarray.array3d(surface)[r.left:r.right, r.top:r.bottom].copy()


def test_no_dot_for_unvoiced_or_unreliable_input(display, fonts, tset):
    s = make(tset, fonts, trail=True)
    s.draw(display, now_s=0.0)
    empty = _plot_pixels(display, s)
    frames = [frame(i * 0.01, math.nan, math.nan, voiced=False, conf=0.0) for i in range(30)]
    frames += [frame(0.3 + i * 0.01, 560.0, 1650.0, voiced=True, conf=0.1) for i in range(30)]  # low confidence
    frames += [frame(0.6 + i * 0.01, math.nan, 1650.0, voiced=True, conf=0.9) for i in range(5)]  # F1 not measured
    s.feed(frames, now_s=0.1)
    s.draw(display, now_s=0.11)
    assert s.dot_position(0.11) is None
    assert np.array_equal(_plot_pixels(display, s), empty)
    # a reliable frame does change the picture (the comparison can fail)
    s.feed([frame(0.7, 560.0, 1650.0)], now_s=0.12)
    s.draw(display, now_s=0.12)
    assert not np.array_equal(_plot_pixels(display, s), empty)


def test_dot_disappears_when_frames_stop(display, fonts, tset):
    s = make(tset, fonts)
    s.feed([frame(0.0, 560.0, 1650.0)], now_s=10.0)
    s.draw(display, now_s=10.05)
    assert s.dot_position(10.05) is not None
    s.draw(display, now_s=11.0)
    assert s.dot_position(11.0) is None


def test_hit_counted_after_hold_time_not_before(display, fonts, tset):
    s = make(tset, fonts, hold_s=0.25)
    kit = tset.get("kit")
    s.controller.select("kit")
    t = 0.0
    while t < 0.24:
        s.feed([frame(t, kit.f1_hz, kit.f2_hz)], now_s=t)
        t = round(t + 0.01, 10)
    s.draw(display, now_s=t)
    assert s.counter.hits == 0
    s.feed([frame(0.25, kit.f1_hz, kit.f2_hz)], now_s=0.25)
    assert s.counter.hits == 1
    # the hit pulse is drawn in the hit colour on the region's outline
    s.draw(display, now_s=0.26)
    o = kit.outline_hz(64)
    x, y = s._plane.to_pixel(o[0, 0], o[0, 1])
    assert close(rgb(display, x, y), get_theme("light").hit, tol=40)


def test_frames_outside_the_target_never_hit(display, fonts, tset):
    s = make(tset, fonts)
    s.controller.select("kit")
    fleece = tset.get("fleece")
    assert not tset.get("kit").contains(fleece.f1_hz, fleece.f2_hz)
    s.feed([frame(i * 0.01, fleece.f1_hz, fleece.f2_hz) for i in range(100)], now_s=0.0)
    assert s.counter.hits == 0 and s.counter.attempts == 1


def test_click_selects_a_region_and_keys_toggle(display, fonts, tset):
    s = make(tset, fonts)
    s.draw(display, now_s=0.0)
    lot = tset.get("lot")
    x, y = s._plane.to_pixel(lot.f1_hz, lot.f2_hz)
    s.handle_event(pygame.event.Event(pygame.MOUSEBUTTONDOWN, button=1, pos=(int(x), int(y))))
    assert s.controller.current.id == "lot"
    s.handle_event(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_u, unicode="u", mod=0))
    assert s.units == "bark"
    before = s.controller.current.id
    s.handle_event(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_RIGHT, unicode="", mod=0))
    assert s.controller.current.id != before
    assert s.handle_event(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_q, unicode="q", mod=0)) == "quit"
    for theme in ("dark", "contrast"):
        s.theme_name = theme
        s.large_text = True
        s.show_help = True
        s.draw(display, now_s=0.0)  # every theme and overlay draws at this size
        s.draw(pygame.Surface((800, 500)), now_s=0.0)


def test_ipa_glyphs_need_the_chosen_font(display, fonts):
    # pygame's bundled freesansbold has no glyphs for these IPA vowels (checked
    # on pygame 2.6); the font finder must find one that has them.
    assert not renders_glyphs(pygame.font.Font(None, 24), "ɑɛɪʊʌɔɝ")
    assert fonts.regular_path is not None, "no DejaVu Sans found (apt fonts-dejavu-core or pip matplotlib)"
    assert fonts.has_ipa


def test_one_target_mode_and_controller_label(display, fonts, tset):
    from livevowel.feedback import TargetController

    c = TargetController(tset.targets, "trap", locked=True)
    s = PracticeScreen(tset, c, options=ScreenOptions(trail=False), fonts=fonts)
    s.handle_event(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_RIGHT, unicode="", mod=0))
    assert c.current.id == "trap" and "fixed" in s.message
    s.draw(display, now_s=0.0)
    header = pygame.surfarray.array3d(display)[:, :s._layout.header.bottom].copy()
    c.label = "say \u201cbat\u201d  \u00b7  block 1/2 trial 3"  # a drill controller rewrites its label
    s.draw(display, now_s=0.0)
    assert not np.array_equal(pygame.surfarray.array3d(display)[:, :s._layout.header.bottom], header)


def test_trail_joins_a_glide_but_never_bridges_a_gap_in_the_voice(display, fonts, tset):
    a, b = (400.0, 2200.0), (700.0, 1300.0)

    def picture(frames):
        s = make(tset, fonts, trail=True, trail_s=0.3)
        s.feed(frames, now_s=0.0)
        s.draw(display, now_s=0.0)
        mx, my = s._plane.to_pixel((a[0] + b[0]) / 2, (a[1] + b[1]) / 2)
        return rgb(display, mx, my)

    only_b = picture([frame(0.20 + i * 0.01, *b) for i in range(5)])
    # a glide from a to b within 100 ms: the trail passes the midpoint
    glide = [frame(0.10 + i * 0.01, a[0] + (b[0] - a[0]) * i / 10, a[1] + (b[1] - a[1]) * i / 10)
             for i in range(11)]
    assert picture(glide + [frame(0.21 + i * 0.01, *b) for i in range(4)]) != only_b
    # a, then 50 ms without voice, then b: nothing is drawn between them
    gap = [frame(0.10 + i * 0.01, *a) for i in range(5)]
    gap += [frame(0.15 + i * 0.01, math.nan, math.nan, voiced=False, conf=0.0) for i in range(5)]
    gap += [frame(0.20 + i * 0.01, *b) for i in range(5)]
    assert picture(gap) == only_b


@pytest.mark.parametrize("size", [(1280, 800), (800, 600)])
def test_a_long_header_line_keeps_the_trial_state_and_stays_on_the_screen(fonts, tset, size, monkeypatch):
    from livevowel.feedback import TargetController
    from livevowel.ui import screen as screen_mod

    c = TargetController(tset.targets, "trap", locked=True)
    c.label = "say \u201cbat\u201d  \u00b7  block 1/2 trial 3  (2.0 SD, hold 0.20 s, last: miss)"
    s = PracticeScreen(tset, c, options=ScreenOptions(trail=False), fonts=fonts,
                       title="Corner vowels with an adaptive hit size and hold (coach-led)  \u00b7  " + tset.title)
    blits, texts = [], {}
    real_blit, real_text = screen_mod.D.blit_text, FontBook.text

    def text(self, string, *a, **kw):
        surf = real_text(self, string, *a, **kw)
        texts[id(surf)] = string
        return surf

    def blit(surface, text_surface, *a, **kw):
        r = real_blit(surface, text_surface, *a, **kw)
        blits.append((texts.get(id(text_surface), ""), r))
        return r

    monkeypatch.setattr(FontBook, "text", text)
    monkeypatch.setattr(screen_mod.D, "blit_text", blit)
    surf = pygame.Surface(size)
    s.draw(surf, now_s=0.0)
    line = [(t, r) for t, r in blits if "block 1/2 trial 3" in t]
    assert len(line) == 1, [t for t, _ in blits]
    t, r = line[0]
    assert r.right <= size[0], (t, r)               # nothing cut off at the edge
    assert "(coach-led)" not in t                      # the titles gave way first
    if size[0] >= 1280:
        assert t.endswith("last: miss)")               # the whole trial state fits at the default size


def test_the_current_targets_label_is_drawn_once_when_it_moves_below_its_region(fonts, monkeypatch):
    from livevowel.feedback import TargetController
    from livevowel.ui import screen as screen_mod

    # with large text FLEECE's label has no room above its region, at the top of the plane
    women = load_target_set("gae-women")
    c = TargetController(women.targets, "fleece", locked=True)
    s = PracticeScreen(women, c, options=ScreenOptions(trail=False, large_text=True), fonts=fonts)
    label = s._region_label(women.get("fleece"))
    drawn = []
    real_blit = screen_mod.D.blit_text

    def blit(surface, text_surface, x, y, anchor="topleft"):
        r = real_blit(surface, text_surface, x, y, anchor)
        drawn.append((text_surface.get_size(), anchor, r))
        return r

    monkeypatch.setattr(screen_mod.D, "blit_text", blit)
    s.draw(pygame.Surface(SIZE), now_s=0.0)
    region_size = fonts.text(label, int(40 * s._layout.u), s.theme.current, bold=True).get_size()
    at_region = [(a, r) for size, a, r in drawn if size == region_size and a in ("midbottom", "midtop")]
    assert len(at_region) == 1, at_region
    assert at_region[0][0] == "midtop"            # below the region, as there is no room above


@pytest.mark.parametrize("size,large", [((1280, 800), False), ((1280, 800), True), ((800, 600), True),
                                        ((640, 480), True), ((480, 320), True), ((480, 320), False)])
def test_the_status_strip_items_never_overlap(fonts, tset, size, large, tmp_path):
    # large text with every item up (clipping, a noisy SNR, the latency, input lost) used to draw
    # "F3 – Hz" over "latency 55 ms" at 1280 x 800
    from types import SimpleNamespace as NS

    s = make(tset, fonts, large_text=large)
    s.set_health(NS(state="input lost", level_db=-3.0, clipping=True, snr_db=-0.4, latency_s=0.055,
                    message="", backlog_s=0.0))
    s.feed([frame(0.01 * i, 730.0, 1090.0) for i in range(12)], now_s=0.0)
    surf = pygame.Surface(size)
    s.draw(surf, now_s=0.0)
    left_end, right_start = s.strip_extent
    assert left_end <= right_start, (size, large, s.strip_extent)
    pygame.image.save(surf, str(tmp_path / f"strip-{size[0]}-{int(large)}.png"))
    if not large and size[0] >= 1280:        # room enough: nothing is left out at the default size
        s2 = make(tset, fonts)
        s2.set_health(NS(state="listening", level_db=-20.0, clipping=False, snr_db=35.0, latency_s=0.05,
                         message="", backlog_s=0.0))
        s2.draw(surf, now_s=0.0)
        assert s2.strip_extent[0] < s2.strip_extent[1] and s2._strip_cut[1] == 0     # latency and all shown
    # the widest readings the strip can show still fit the choice made for them
    s.set_health(NS(state="input lost", level_db=-3.0, clipping=True, snr_db=-0.4, latency_s=9.999,
                    message="", backlog_s=0.0))
    s.feed([frame(1.0 + 0.01 * i, 1999.0, 2999.0) for i in range(12)], now_s=0.2)
    s.draw(surf, now_s=0.2)
    assert s.strip_extent[0] <= s.strip_extent[1], (size, large, s.strip_extent)


def test_region_labels_of_crowded_regions_do_not_overlap(fonts, tset, tmp_path):
    # regions a speaker's profile has moved close together: GOOSE's centre 25 Hz from FOOT's;
    # their labels (symbol and word) are moved apart rather than drawn over each other
    s = make(tset, fonts)
    f1, f2 = s._centres["foot"]
    s._centres["goose"] = (f1 + 25.0, f2 - 25.0)
    surf = pygame.Surface((1280, 800))
    s.draw(surf, now_s=0.0)
    rects = s.label_rects
    assert len(rects) >= 2 * len(tset.targets) - 1
    crossing = [(a, b) for i, a in enumerate(rects) for b in rects[i + 1:] if a.colliderect(b)]
    assert not crossing, crossing
    pygame.image.save(surf, str(tmp_path / "crowded.png"))
    assert s.label_moves["goose"] != 0 or s.label_moves["foot"] != 0
    # uncrowded, every label stays on its region's centre
    s2 = make(tset, fonts)
    s2.draw(surf, now_s=0.0)
    assert set(s2.label_moves) == {t.id for t in tset.targets} - {s2.controller.current.id}
    assert all(dy == 0 for dy in s2.label_moves.values()), s2.label_moves
