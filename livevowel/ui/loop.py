"""The window and the display loop around a :class:`~livevowel.ui.screen.PracticeScreen`.

The loop runs at the screen's frame rate (60 fps by default) on the main
thread. Each tick it takes whatever frames the live pipeline has queued
(``drain()`` never blocks; analysis runs on the pipeline's own threads),
feeds them to the screen, paints, and handles keys and mouse. Nothing in
the loop waits for audio, so a slow frame never holds up the audio path.

Headless runs (``headless=True``) use SDL's dummy video driver: no window,
same drawing, and an optional PNG screenshot at the end.

On the first start per user the screen shows :data:`livevowel.CAUTION`
until a key is pressed; a marker file in the user data folder
(``$LIVEVOWEL_DATA``, else ``platformdirs.user_data_dir("livevowel")``)
remembers that it was read.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from livevowel.errors import UserError

CAUTION_MARKER = "caution-read.txt"

#: Audio waiting for analysis beyond this (seconds) halves the frame rate, so
#: the display gives way to the analysis on a busy machine.
BEHIND_S = 0.1


def _data_dir() -> Path:
    from livevowel.session.store import data_dir

    return data_dir()


def caution_needed() -> bool:
    """True until the user has once dismissed the caution on this machine."""
    return not (_data_dir() / CAUTION_MARKER).exists()


def remember_caution() -> None:
    """Record that the caution was shown and dismissed (best effort)."""
    from livevowel import CAUTION
    from livevowel.fileio import write_text_atomic

    folder = _data_dir()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        write_text_atomic(folder / CAUTION_MARKER,
                          f"shown and dismissed {time.strftime('%Y-%m-%d %H:%M:%S')}\n{CAUTION}\n")
    except (OSError, UserError):
        pass  # not remembering only means it is shown again next time


def save_screenshot(surface, path: "str | os.PathLike") -> Path:
    """Write ``surface`` as a PNG, atomically (temporary file, then rename)."""
    import pygame

    path = Path(path)
    if path.suffix.lower() != ".png":
        raise UserError(f"{path}: screenshots are PNG files; give a name ending in .png")
    if not path.parent.is_dir():
        raise UserError(f"{path}: folder {path.parent} does not exist; create it first")
    tmp = path.with_name(f".{path.stem}.part.png")
    try:
        pygame.image.save(surface, str(tmp))
        os.replace(tmp, path)
    except (OSError, pygame.error) as exc:
        try:
            tmp.unlink()
        except OSError:
            pass
        raise UserError(f"{path}: cannot write the screenshot ({exc}); choose another place") from None
    return path


@dataclass
class LoopResult:
    """What a run of the loop did."""

    ticks: int = 0
    frames: int = 0
    wall_s: float = 0.0
    input_s: float = 0.0
    draw_s: list = field(default_factory=list)
    screenshot: Path | None = None
    quit_by_user: bool = False
    #: The input ended by itself (a recording played to its end), rather than being stopped.
    input_ended: bool = False


#: A live input's run with ``seconds`` ends this long after that much wall time at the latest
#: (frames stop coming while a device is lost; the frames' own clock then never gets there).
LIVE_LIMIT_GRACE_S = 1.0


def _live_input(pipeline: Any) -> bool:
    """Whether ``pipeline`` reads a live device (its ``source.live``)."""
    return bool(getattr(getattr(pipeline, "source", None), "live", False))


class Stopped(KeyboardInterrupt):
    """Ctrl-C during :func:`run`; ``result`` is the :class:`LoopResult` so far (its
    screenshot, if one was asked for, saved)."""

    def __init__(self, result: LoopResult) -> None:
        super().__init__()
        self.result = result


#: SDL video drivers that draw into memory only (no window anyone can see or type into).
INVISIBLE_DRIVERS = ("dummy", "offscreen")
_noted_invisible: list = []     # non-empty once the note on such a driver has been printed


def screen_available() -> bool:
    """Whether a window can be opened here.

    On Linux and other X11/Wayland systems that means DISPLAY or
    WAYLAND_DISPLAY is set (or SDL_VIDEODRIVER names a driver explicitly);
    macOS and Windows always have a screen in a desktop session.
    """
    import sys

    if os.environ.get("SDL_VIDEODRIVER"):
        return True  # a driver chosen on purpose (tests pick 'dummy'): trust it
    if sys.platform.startswith(("win", "darwin")):
        return True
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def init_display(*, headless: bool) -> None:
    """Start pygame's display (dummy driver when headless). Call before making fonts."""
    if headless:
        os.environ["SDL_VIDEODRIVER"] = "dummy"
    elif not screen_available():
        raise UserError("no screen to open a window on (DISPLAY is not set); run from a desktop "
                        "session, or add --headless --screenshot FILE.png")
    elif os.environ.get("SDL_VIDEODRIVER", "").lower() in INVISIBLE_DRIVERS and not _noted_invisible:
        import sys

        _noted_invisible.append(True)       # once per process: the display is started more than once

        # the window exists but nobody can see it or press its keys: the caution, Space and Esc
        # wait for ever unless the run has its own end
        print(f"livevowel: note: SDL_VIDEODRIVER={os.environ['SDL_VIDEODRIVER']} opens no visible window, "
              "so its keys (the caution, quit) cannot be pressed; add --headless (with --seconds N or "
              "--screenshot FILE.png) for a run without a window, or unset SDL_VIDEODRIVER",
              file=sys.stderr, flush=True)
    import pygame

    pygame.display.init()
    pygame.font.init()


def run(screen: Any, pipeline: Any, *, headless: bool = False, seconds: float | None = None,
        screenshot: "str | os.PathLike | None" = None, size: tuple[int, int] = (1280, 800),
        fullscreen: bool = False, fps: int | None = None, show_caution: bool = True,
        pace: float = 1.0, keep_open: bool = True) -> LoopResult:
    """Show ``screen`` fed by ``pipeline`` until the user quits or the input ends.

    Parameters
    ----------
    screen : PracticeScreen
    pipeline : LivePipeline
        Anything with ``start()``, ``stop()``, ``drain() -> list[Frame]``,
        ``health()`` and ``done``; ``pause()``/``resume()`` are used when present.
    headless : bool, keyword-only
        No window (SDL dummy driver); stops when the input ends or after ``seconds``.
    seconds : float, optional
        Stop after this much input (seconds of input time; a live device's
        run also stops once this much wall time and ``LIVE_LIMIT_GRACE_S``
        have passed, input or not); None: until the input ends (headless)
        or the user quits.
    screenshot : path, optional
        Save the last painted picture here (PNG).
    size : (int, int)
        Window size in pixels (resizable).
    fps : int, optional
        Frame rate (default the screen's option, 60), headless too.
    show_caution : bool
        Show the first-start caution when it has not been read yet (never
        headless); the input starts only once it has been dismissed.
    pace : float
        Input pace (1 real time, 0 as fast as possible); sets the wall-clock
        safety limit of headless runs.
    keep_open : bool
        With a window, stay open showing the final state after a finite input ends.
    """
    import pygame

    init_display(headless=headless)
    fps = int(fps or getattr(screen.options, "fps", 60))
    flags = pygame.RESIZABLE
    windowed = tuple(size)
    surface = pygame.display.set_mode((0, 0), pygame.FULLSCREEN) if (fullscreen and not headless) \
        else pygame.display.set_mode(windowed, flags)
    pygame.display.set_caption("livevowel")
    if show_caution and not headless and caution_needed():
        from livevowel import CAUTION

        screen.caution_text = CAUTION
    # latency is only meaningful for input that arrives in real time
    screen.show_latency = pace == 1.0
    res = LoopResult()
    clock = pygame.time.Clock()
    t0 = time.monotonic()
    limit_wall = None
    if headless:
        span = seconds if seconds is not None else 3600.0
        limit_wall = span / pace + 30.0 if pace > 0 else span * 4 + 60.0
    started = False  # the input starts once the caution (if shown) has been read
    t_started = last_now = t0
    live = _live_input(pipeline)
    is_full = bool(fullscreen and not headless)
    try:
        try:
            while True:
                for ev in pygame.event.get():
                    act = screen.handle_event(ev)
                    if act == "quit":
                        res.quit_by_user = True
                    elif act == "fullscreen" and not headless:
                        is_full = not is_full
                        surface = pygame.display.set_mode((0, 0), pygame.FULLSCREEN) if is_full \
                            else pygame.display.set_mode(windowed, flags)
                    elif act == "pause":
                        fn = getattr(pipeline, "pause" if screen.paused else "resume", None)
                        if fn is not None:
                            fn()
                    elif act == "caution-closed":
                        remember_caution()
                    elif ev.type == pygame.VIDEORESIZE and not is_full:
                        windowed = (max(480, ev.w), max(320, ev.h))
                if res.quit_by_user:
                    break
                surface = pygame.display.get_surface()
                if not started and screen.caution_text is None:
                    pipeline.start()
                    started = True
                    t_started = time.monotonic()
                frames = pipeline.drain() if started else []
                now = time.monotonic()
                if screen.paused:
                    t_started += now - last_now       # paused time does not count towards seconds
                last_now = now
                screen.feed(frames, now_s=now)
                screen.set_health(pipeline.health() if started else None)
                res.frames += len(frames)
                if frames:
                    res.input_s = float(frames[-1].time_s)
                d0 = time.perf_counter()
                screen.draw(surface, now_s=now)
                pygame.display.flip()
                res.draw_s.append(time.perf_counter() - d0)
                res.ticks += 1
                if seconds is not None and res.input_s >= seconds:
                    break
                # a live input that stops delivering (device lost) still ends on the clock, as listen does
                if (seconds is not None and started and live
                        and now - t_started >= seconds + LIVE_LIMIT_GRACE_S):
                    break
                if started and pipeline.done and not frames:
                    res.input_ended = True
                    if headless or not keep_open:
                        break
                    screen.message = "the input has ended  ·  Esc to quit"
                if limit_wall is not None and now - t0 > limit_wall:
                    break
                # Sleep to the frame rate (also headless: it leaves the CPU to the analysis threads).
                # When the analysis falls behind (audio waiting), paint at half the rate.
                health = screen.health
                behind = health is not None and getattr(health, "backlog_s", 0.0) > BEHIND_S
                clock.tick(max(10, fps // 2) if behind else fps)
        except KeyboardInterrupt:
            if screenshot is not None:          # a stopped run keeps its last picture too
                res.screenshot = save_screenshot(pygame.display.get_surface(), screenshot)
            raise Stopped(res) from None
        if screenshot is not None:
            res.screenshot = save_screenshot(surface, screenshot)
    finally:
        if started:
            pipeline.stop()
        res.wall_s = time.monotonic() - t0
        pygame.display.quit()
    return res
