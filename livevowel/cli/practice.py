"""``livevowel practice``: the practice screen on live (or recorded) input."""

from __future__ import annotations

import argparse

NAME = "practice"
SUMMARY = "practise vowels against target regions, live from the microphone"
DESCRIPTION = """\
Open the practice screen: a vowel plane (F2 grows to the left, F1
downwards) with the target regions of a set, and a dot that follows your
voice. Hold the dot inside the current target for the hold time (250 ms by
default) to score a hit; the header counts hits, attempts and the streak.

Without --target, every target of the set can be practised (arrow keys or
a click choose the current one); with --target only that one. A speaker
profile (from calibration) maps the regions to your own voice.

Keys: Space pause, arrows next/previous target, U Hz/Bark, T trail,
C colours, L large text, M tone, F full screen, H help, Esc quit.

livevowel is a practice and feedback tool, not a diagnostic or medical
device. Stop if speaking hurts or your voice turns hoarse."""
EPILOG = """\
examples:
  livevowel practice --targets gae-women
  livevowel practice --targets ssbe-men --target trap --theme contrast
  livevowel practice --targets gae-men --source file:take1.wav
  livevowel practice --drill front-vowels-five-vowel-l1 --speaker S07
  livevowel practice --drill my-drill.yaml --headless --source file:take1.wav --pace 0"""


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.audio import add_source_options
    from livevowel.cli import add_config_option
    from livevowel.cli._screen_options import add_screen_options

    parser.add_argument("--targets", metavar="SET",
                        help="target set: a shipped name (see `livevowel targets`) or a YAML file "
                             "(with --drill: instead of the drill's own set)")
    parser.add_argument("--target", metavar="ID", help="practise only this target (id, IPA symbol or keyword)")
    parser.add_argument("--profile", "--speaker-profile", dest="speaker_profile", metavar="FILE", help="map the regions through this speaker profile")
    add_config_option(parser)
    add_screen_options(parser)
    add_source_options(parser)
    from livevowel.cli.drill import add_drill_options

    add_drill_options(parser, file_positional=False, practice=True)


def run(args: argparse.Namespace) -> int:
    import sys

    from livevowel import CAUTION
    from livevowel.audio import source_from_args
    from livevowel.audio.pipeline import LiveSettings
    from livevowel.cli._screen_options import parse_size, settings_and_options
    from livevowel.ui.app import run_practice

    if getattr(args, "drill", None):
        from livevowel.cli.drill import run_practice_drill

        return run_practice_drill(args)
    if not args.targets:
        from livevowel.errors import UserError

        raise UserError("give a target set with --targets SET (or a drill with --drill FILE)")
    settings, options = settings_and_options(args)
    size = parse_size(args.size)
    source = source_from_args(args, live=LiveSettings.from_config(settings))
    if args.headless is False:
        print(CAUTION, file=sys.stderr)
    screen, res = run_practice(settings=settings, options=options, targets=args.targets, target_id=args.target,
                       profile_path=args.speaker_profile, source=source, headless=args.headless,
                       seconds=args.seconds, screenshot=args.screenshot, pace=getattr(args, "pace", 1.0) or 0.0,
                       size=size, fullscreen=args.fullscreen)
    c = screen.counter
    print(f"practice: {res.input_s:.1f} s of input, {c.hits} hits in {c.attempts} attempts, "
          f"best streak {c.best_streak}")
    if res.screenshot is not None:
        print(f"screenshot: {res.screenshot}")
    return 0
