"""Suite "display": render time of the practice screen and result-to-dot latency.

1. **Render time per frame** at 1280x800 (SDL dummy video driver, so the
   figure is the drawing work itself, not a GPU's presentation): the screen
   with the ``gae-men`` set, a dot gliding between vowels with its trail,
   one or two new frames per tick as live input gives at 100 frames/s.
   Goal: p95 < 8 ms (half of a 60 fps tick).
2. **Result-to-dot latency**: a producer thread stands in for the analyser
   and puts a frame every 10 ms into the same bounded queue the live
   pipeline uses, stamped as it leaves; the display loop at 60 fps drains,
   feeds, draws and flips. Each frame's delay is from its stamp to the end
   of the flip of the tick that drew it. Goal: p95 < 25 ms (one 60 fps
   tick, 16.7 ms, plus the render budget).
"""

from __future__ import annotations

import math
import os
import threading
import time
from typing import Callable

import numpy as np

from livevowel.benchmarks import percentiles_ms, verdict

RENDER_GOAL_P95_MS = 8.0
LATENCY_GOAL_P95_MS = 25.0
SIZE = (1280, 800)


def _trajectory(ts, n: int, hop_s: float = 0.01):
    """Frames gliding between the set's target centres (smooth, with pauses)."""
    from livevowel.dsp.types import Frame

    centres = np.array([(t.f1_hz, t.f2_hz) for t in ts.targets])
    out = []
    for i in range(n):
        t = i * hop_s
        k = (i // 80) % len(centres)
        a, b = centres[k], centres[(k + 3) % len(centres)]
        w = 0.5 - 0.5 * math.cos(math.pi * ((i % 80) / 80))
        f1, f2 = (1 - w) * a + w * b
        voiced = (i % 80) < 70
        out.append(Frame(t, voiced, 120.0 if voiced else math.nan, f1 if voiced else math.nan,
                         f2 if voiced else math.nan, 2500.0, 80.0, 100.0, 150.0, -20.0, 0.8 if voiced else 0.0))
    return out


def _health():
    from livevowel.audio.health import InputHealth

    return InputHealth(state="listening", level_db=-22.0, clipping=False, snr_db=35.0, latency_s=0.045)


def _screen(ts, **opts):
    from livevowel.ui.screen import PracticeScreen, ScreenOptions

    s = PracticeScreen(ts, options=ScreenOptions(**opts))
    s.set_health(_health())
    return s


def render_times(*, ticks: int, theme: str = "light", units: str = "hz", large_text: bool = False,
                 help_overlay: bool = False, cpu: "list[float] | None" = None) -> list[float]:
    """Wall-clock seconds per ``draw`` of the screen at 1280x800 over ``ticks`` ticks.

    When ``cpu`` is a list, the thread CPU seconds of each draw are appended
    to it (the work itself, without time lost to other processes on a busy machine).
    """
    import pygame

    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    surface = pygame.display.set_mode(SIZE)
    s = _screen(ts, theme=theme, units=units, large_text=large_text)
    s.show_help = help_overlay
    frames = _trajectory(ts, int(ticks * 100 / 60) + 4)
    out = []
    j = 0
    for i in range(ticks):
        now = i / 60.0
        upto = int((i + 1) * 100 / 60)
        s.feed(frames[j:upto], now_s=now)
        j = upto
        c0 = time.thread_time()
        t0 = time.perf_counter()
        s.draw(surface, now_s=now)
        out.append(time.perf_counter() - t0)
        if cpu is not None:
            cpu.append(time.thread_time() - c0)
    return out


def result_to_dot(*, seconds: float, fps: int = 60) -> list[float]:
    """Delays (s) from a frame leaving the stand-in analyser to the end of the flip that drew it."""
    import pygame

    from livevowel.audio.rqueue import DropOldestQueue
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    surface = pygame.display.set_mode(SIZE)
    s = _screen(ts)
    q: DropOldestQueue = DropOldestQueue(1000)
    frames = _trajectory(ts, int(seconds * 100) + 10)
    stop = threading.Event()

    def produce():
        t_next = time.perf_counter()
        for fr in frames:
            t_next += 0.010
            d = t_next - time.perf_counter()
            if d > 0:
                time.sleep(d)
            if stop.is_set():
                return
            q.put((time.perf_counter(), fr))

    th = threading.Thread(target=produce, daemon=True)
    clock = pygame.time.Clock()
    delays: list[float] = []
    th.start()
    t_end = time.perf_counter() + seconds
    while time.perf_counter() < t_end:
        items = q.get_all()
        now = time.monotonic()
        s.feed([fr for _, fr in items], now_s=now)
        s.draw(surface, now_s=now)
        pygame.display.flip()
        done = time.perf_counter()
        delays += [done - stamp for stamp, _ in items]
        clock.tick(fps)
    stop.set()
    th.join(timeout=2)
    return delays


def run(*, quick: bool, out: Callable[[str], None]) -> dict:
    os.environ.setdefault("SDL_VIDEODRIVER", "dummy")
    import pygame

    pygame.display.init()
    pygame.font.init()
    try:
        ticks = 120 if quick else 1200
        results: dict = {}
        out(f"render time per frame at {SIZE[0]}x{SIZE[1]} ({ticks} frames, SDL video driver "
            f"{pygame.display.get_driver()}); goal p95 < {RENDER_GOAL_P95_MS:.0f} ms")
        out(f"  {'case':<30}{'median':>9}{'p95':>9}{'p99':>9}{'max':>9}{'cpu med':>9}{'cpu p95':>9}  verdict (wall p95)")
        out(f"  (ms; cpu = the drawing thread's CPU time; 1-min load average {os.getloadavg()[0]:.1f} "
            f"on {os.cpu_count()} CPUs)")
        cases = (("light", "hz", False, False), ("dark", "bark", False, False), ("contrast", "hz", True, False),
                 ("light", "hz", False, True))
        for theme, units, large, overlay in cases:
            kw = dict(theme=theme, units=units, large_text=large, help_overlay=overlay)
            render_times(ticks=10, **kw)  # warm the caches
            cpu: list[float] = []
            p = percentiles_ms(render_times(ticks=ticks, cpu=cpu, **kw))
            pc = percentiles_ms(cpu)
            p["cpu_median_ms"], p["cpu_p95_ms"] = pc["median_ms"], pc["p95_ms"]
            name = f"{theme}/{units}" + ("/large text" if large else "") + ("/help shown" if overlay else "")
            results["render_" + name.replace("/", "_").replace(" ", "_")] = p
            out(f"  {name:<30}{p['median_ms']:>8.2f} {p['p95_ms']:>8.2f} {p['p99_ms']:>8.2f} {p['max_ms']:>8.2f}"
                f" {pc['median_ms']:>8.2f} {pc['p95_ms']:>8.2f}  {verdict(p['p95_ms'] < RENDER_GOAL_P95_MS)}")
        secs = 2.0 if quick else 10.0
        d = result_to_dot(seconds=secs)
        p = percentiles_ms(d)
        results["result_to_dot"] = dict(p, frames=len(d))
        out(f"result-to-dot latency over {secs:.0f} s ({len(d)} frames at 100/s, display at 60 fps); "
            f"goal p95 < {LATENCY_GOAL_P95_MS:.0f} ms")
        out(f"  median {p['median_ms']:.1f} ms  p95 {p['p95_ms']:.1f} ms  p99 {p['p99_ms']:.1f} ms  "
            f"max {p['max_ms']:.1f} ms  {verdict(p['p95_ms'] < LATENCY_GOAL_P95_MS)}")
        return results
    finally:
        pygame.display.quit()
