"""``livevowel practice``: the practice screen on live (or recorded) input."""

from __future__ import annotations

import argparse
import sys

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

With --save (or --speaker ID) free practice is kept in the session
record like a drill: each attempt is judged when it ends against the target
current while it lasted (at the target's hit size and the hold time) and
saved with a clip of its audio, and the header then counts the recorded
trials. Speakers appear in the record only under a pseudonymous id; local
rules on health-data privacy apply to the data folder.

Keys: Space pause, arrows next/previous target, U Hz/Bark, T trail,
C colours, L large text, M tone, F full screen, H help, Esc quit.

livevowel is a practice and feedback tool, not a diagnostic or medical
device. Stop if speaking hurts or your voice turns hoarse."""
EPILOG = """\
examples:
  livevowel practice --targets gae-women
  livevowel practice --targets ssbe-men --target trap --theme contrast
  livevowel practice --targets gae-men --source file:take1.wav
  livevowel practice --targets gae-women --speaker S07      # free practice, saved
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
    parser.add_argument("--save", action="store_true",
                        help="free practice: keep it in the session record (implied by --speaker, --data, "
                             "--note, --no-clips and --no-save)")


def run(args: argparse.Namespace) -> int:
    from livevowel.audio import source_from_args
    from livevowel.audio.pipeline import LiveSettings
    from livevowel.cli import caution_if_live
    from livevowel.cli._screen_options import parse_size, settings_and_options
    from livevowel.ui.app import run_practice

    if getattr(args, "drill", None):
        from livevowel.cli.drill import run_practice_drill

        return run_practice_drill(args)
    if not args.targets:
        from livevowel.errors import UserError

        raise UserError("give a target set with --targets SET (or a drill with --drill FILE)")
    saved = _free_practice_saved(args)
    settings, options = settings_and_options(args)
    size = parse_size(args.size)
    caution_if_live(args)
    if saved:
        return run_recorded_practice(args, settings=settings, options=options, size=size)
    source = source_from_args(args, live=LiveSettings.from_config(settings))
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


def _free_practice_saved(args: argparse.Namespace) -> bool:
    """Whether free practice goes to the session record; options that only a drill takes are refused."""
    from livevowel.errors import UserError

    for flag, value in (("--coach", args.coach), ("--pause", args.pause), ("--seed", args.seed)):
        if value not in (None, False):
            raise UserError(f"{flag} belongs to drills; add --drill FILE, or leave out {flag}")
    return bool(args.save or args.speaker or args.data or args.note or args.no_clips or args.no_save)


def run_recorded_practice(args: argparse.Namespace, *, settings, options, size) -> int:
    """Free practice kept in the session record (``--save``, ``--speaker`` ...)."""
    from livevowel.cli.drill import open_record, open_screen_input, print_where_saved, run_screen_session
    from livevowel.errors import UserError
    from livevowel.session.free import FreeController, FreeSession
    from livevowel.targets import load_target_set

    def warn(msg: str) -> None:
        print(f"livevowel practice: warning: {msg}", file=sys.stderr, flush=True)

    ts = load_target_set(args.targets)
    if args.target is not None and ts.find(args.target) is None:
        raise UserError(f"target set {ts.id} has no target {args.target!r}; known: {', '.join(ts.ids)}")
    live, source = open_screen_input(args, settings)
    r = open_record(args, settings, ts, warn=warn, use="regions mapped")
    judged = r.target_set
    controller = FreeController(judged.targets, judged.find(args.target).id if args.target else None,
                                locked=args.target is not None)
    sid = r.recorder.start(speaker_id=r.speaker, voice_group=r.voice_group,
                           profile=r.profile.to_dict() if r.profile is not None else None, target_set=judged.id,
                           mode="free", source=getattr(args, "source", None), note=args.note,
                           settings={"analysis": settings.values.get("analysis"), "attempts": r.attempts.__dict__,
                                     "hold_s": options.hold_s, "clips": r.clips, "profile": r.profile_ref,
                                     "pace": getattr(args, "pace", None)})
    session = FreeSession(judged, r.recorder, lambda: controller.current.id, hold_s=options.hold_s,
                          attempt_settings=r.attempts, speaker_space=r.profile is not None,
                          clip_pre_s=r.clip_pre_s, clip_post_s=r.clip_post_s)
    controller.attach(session)
    from livevowel.ui.screen import TITLE_SEP

    title = TITLE_SEP.join([judged.title] + (["speaker profile"] if r.profile is not None else []) + ["saved"])
    interrupted, res, summary = run_screen_session(args, session, controller, settings=settings, options=options,
                                                   live=live, source=source, title=title, size=size)
    print(f"\nsession {sid} {'stopped' if interrupted else 'ended'} (free practice, set {judged.id})")
    print(summary.format())
    if res is not None and res.screenshot is not None:
        print(f"screenshot: {res.screenshot}")
    print_where_saved(r.recorder, sid)
    r.recorder.close()
    return 130 if interrupted else 0
