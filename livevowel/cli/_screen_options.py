"""Options shared by the commands that open the practice screen."""

from __future__ import annotations

import argparse

from livevowel.errors import UserError


def add_screen_options(parser: argparse.ArgumentParser, *, pace: bool = False) -> None:
    """Display and run options of ``practice`` and ``demo``."""
    g = parser.add_argument_group("screen")
    g.add_argument("--units", choices=("hz", "bark"), help="grid of the vowel plane (default from settings: hz)")
    g.add_argument("--theme", choices=("light", "dark", "contrast"), help="colours (default from settings: light)")
    g.add_argument("--large-text", action="store_true", default=None, help="larger text, for reading from a distance")
    g.add_argument("--hold-ms", type=float, metavar="MS",
                   help="time the dot must stay inside the target for a hit (default 250)")
    g.add_argument("--no-tone", action="store_true", help="no tone on hits")
    g.add_argument("--size", metavar="WxH", default="1280x800", help="window size in pixels (default 1280x800)")
    g.add_argument("--fullscreen", action="store_true", help="start in full screen (F toggles)")
    g.add_argument("--headless", action="store_true",
                   help="no window (SDL dummy video driver); for scripts, CI and screenshots")
    g.add_argument("--seconds", type=float, metavar="N", help="stop after N seconds of input")
    g.add_argument("--screenshot", metavar="FILE.png", help="save the last picture as a PNG")
    if pace:
        g.add_argument("--pace", type=float, metavar="F",
                       help="speed of the demo voice: 1 real time (default with a screen), 2 twice as fast, "
                            "0 as fast as possible (default with --headless)")


def parse_size(text: str) -> tuple[int, int]:
    try:
        w, h = (int(v) for v in text.lower().split("x"))
    except ValueError:
        raise UserError(f"--size {text!r}: give width x height in pixels, e.g. 1280x800") from None
    if w < 480 or h < 320 or w > 10000 or h > 10000:
        raise UserError(f"--size {text!r}: use at least 480x320")
    return w, h


def settings_and_options(args: argparse.Namespace):
    """Effective settings (config file + options) and the screen options."""
    from livevowel import config
    from livevowel.ui.screen import ScreenOptions

    practice = {"units": args.units, "theme": args.theme, "large_text": args.large_text,
                "hold_ms": args.hold_ms}
    if args.no_tone:
        practice["tone"] = False
    settings = config.load(config_file=getattr(args, "config", None), overrides={"practice": practice})
    if args.seconds is not None and args.seconds <= 0:
        raise UserError("--seconds must be positive")
    if args.screenshot is not None and not args.screenshot.lower().endswith(".png"):
        raise UserError(f"--screenshot {args.screenshot}: give a file name ending in .png")
    return settings, ScreenOptions.from_settings(settings)
