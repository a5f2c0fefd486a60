"""``livevowel demo``: the practice screen fed by the built-in generated voice."""

from __future__ import annotations

import argparse

NAME = "demo"
SUMMARY = "watch the practice screen follow a generated voice (no microphone needed)"
DESCRIPTION = """\
Open the practice screen fed by livevowel's own formant synthesiser: a
generated learner works through four vowels of the General American set
(KIT, GOOSE, LOT, TRAP), gliding into each one, with some near misses and
some hits. Everything you see -- the dot, the trail, the hold arc, the hit
pulse, the counters and the status strip -- is measured live from the
generated sound by the same engine that listens to a microphone.

With --headless nothing is shown on screen and the voice is analysed as
fast as the machine allows; add --screenshot to keep the last picture (this
is how the README picture is made). On a machine with no screen the demo
runs that way by itself and saves its last picture as livevowel-demo.png."""
EPILOG = """\
examples:
  livevowel demo
  livevowel demo --theme dark --large-text
  livevowel demo --headless --seconds 17.9 --pace 0 --screenshot assets/demo.png"""


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.cli import add_config_option
    from livevowel.cli._screen_options import add_screen_options

    add_config_option(parser)
    add_screen_options(parser, pace=True)
    parser.add_argument("--seed", type=int, default=0, help="seed of the voice's jitter and shimmer (default 0)")


def run(args: argparse.Namespace) -> int:
    from livevowel.cli._screen_options import parse_size, settings_and_options
    from livevowel.errors import UserError
    from livevowel.ui.app import run_demo

    from livevowel.ui.loop import screen_available

    settings, options = settings_and_options(args)
    if not args.headless and not screen_available():
        from livevowel.demo import demo_scenario

        args.headless = True
        args.screenshot = args.screenshot or "livevowel-demo.png"
        if args.seconds is None:
            args.seconds = demo_scenario().picture_time_s()
        print("demo: no screen here (DISPLAY is not set), so the demo runs without a window "
              f"and saves its last picture to {args.screenshot}")
    if args.pace is None:
        args.pace = 0.0 if args.headless else 1.0
    if args.pace < 0 or args.pace != args.pace:
        raise UserError(f"--pace must be 0 (as fast as possible) or a positive factor, got {args.pace}")
    r = run_demo(settings=settings, options=options, headless=args.headless, seconds=args.seconds,
                 screenshot=args.screenshot, pace=args.pace, size=parse_size(args.size),
                 fullscreen=args.fullscreen, seed=args.seed)
    c = r.screen.counter
    print(f"demo: {r.loop.input_s:.1f} s of voice, {c.hits} hits in {c.attempts} attempts "
          f"(planned {r.scenario.planned_hits()} hits in {len(r.scenario.attempts)})")
    if r.loop.screenshot is not None:
        print(f"screenshot: {r.loop.screenshot}")
    return 0
