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

With --record (or --speaker ID) free practice is kept in the session
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
  livevowel practice --targets gae-women --speaker S07      # free practice, recorded
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
    parser.add_argument("--record", action="store_true",
                        help="free practice: keep it in the session record (implied by --speaker; "
                             "--data, --no-clips, --no-save and --note apply)")


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
    if args.record or args.speaker:
        return run_recorded_practice(args, settings=settings, options=options, source=source, size=size)
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


def run_recorded_practice(args: argparse.Namespace, *, settings, options, source, size) -> int:
    """Free practice kept in the session record (``--record`` or ``--speaker``)."""
    import sys

    from livevowel.audio.pipeline import LiveSettings
    from livevowel.cli.drill import stored_profile
    from livevowel.dsp.engine import AnalysisSettings
    from livevowel.errors import UserError
    from livevowel.session.attempts import AttemptSettings
    from livevowel.session.free import FreeController, FreeSession
    from livevowel.session.live import DrillFeed
    from livevowel.session.runner import tapped_pipeline
    from livevowel.session.store import SessionRecorder, check_speaker_id
    from livevowel.targets import load_target_set
    from livevowel.ui import loop
    from livevowel.ui.app import make_tone
    from livevowel.ui.screen import PracticeScreen

    def warn(msg: str) -> None:
        print(f"livevowel practice: warning: {msg}", file=sys.stderr, flush=True)

    ts = load_target_set(args.targets)
    speaker, profile, profile_ref = args.speaker, None, None
    if args.speaker_profile:
        from livevowel.profile import load_profile

        profile, profile_ref = load_profile(args.speaker_profile), args.speaker_profile
        if speaker is not None and speaker != profile.speaker_id:
            raise UserError(f"--speaker {speaker} does not match the profile's speaker {profile.speaker_id}")
        speaker = profile.speaker_id
    if speaker is not None:
        check_speaker_id(speaker)
    att = AttemptSettings.from_config(settings)
    sess_cfg = settings.values.get("session", {})
    clips = not args.no_clips and sess_cfg.get("clips", True)
    rec = SessionRecorder(folder=args.data, clips=clips, memory_only=args.no_save, warn=warn)
    if profile is None and speaker is not None and not args.no_profile:
        profile = stored_profile(rec.store, speaker)
        if profile is not None:
            profile_ref = "(stored with the speaker)"
            print(f"speaker {speaker}: regions mapped with the profile stored in the record "
                  f"(updated {profile.updated}; --no-profile to practise without it)", file=sys.stderr)
    judged = profile.map_set(ts) if profile is not None else ts
    if args.target is not None and judged.find(args.target) is None:
        raise UserError(f"target set {judged.id} has no target {args.target!r}; known: {', '.join(judged.ids)}")
    controller = FreeController(judged.targets, judged.find(args.target).id if args.target else None,
                                locked=args.target is not None)
    sid = rec.start(speaker_id=speaker, voice_group=args.voice_group or (profile.voice_group if profile else None),
                    profile=profile.to_dict() if profile is not None else None, target_set=judged.id, mode="free",
                    source=getattr(args, "source", None), note=args.note,
                    settings={"analysis": settings.values.get("analysis"), "attempts": att.__dict__,
                              "hold_s": options.hold_s, "clips": clips, "profile": profile_ref,
                              "pace": getattr(args, "pace", None)})
    session = FreeSession(judged, rec, lambda: controller.current.id, hold_s=options.hold_s, attempt_settings=att,
                          speaker_space=profile is not None, clip_pre_s=sess_cfg.get("clip_pre_ms", 250.0) / 1e3,
                          clip_post_s=sess_cfg.get("clip_post_ms", 150.0) / 1e3)
    if not args.quiet:
        session.on_outcome = lambda oc: print(oc.line(), flush=True)
    controller.attach(session)
    live = LiveSettings.from_config(settings)
    pipe = tapped_pipeline(source, analysis=AnalysisSettings.from_config(settings), live=live)
    loop.init_display(headless=args.headless)
    tone = make_tone(options, headless=args.headless)
    title = judged.title + ("  \u00b7  speaker profile" if profile is not None else "") + "  \u00b7  recorded"
    screen = PracticeScreen(judged, controller, options=options, on_hit=lambda e: tone.play(), title=title)
    interrupted = False
    try:
        res = loop.run(screen, DrillFeed(session, pipe), headless=args.headless, seconds=args.seconds,
                       screenshot=args.screenshot, size=size, fullscreen=args.fullscreen,
                       pace=getattr(args, "pace", 1.0) or 0.0, keep_open=False)
    except KeyboardInterrupt:
        interrupted, res = True, None
    summary = session.finish()
    print(f"\nsession {sid} {'stopped' if interrupted else 'ended'} (free practice, set {judged.id})")
    print(summary.format())
    if res is not None and res.screenshot is not None:
        print(f"screenshot: {res.screenshot}")
    if rec.in_memory:
        print(f"NOT SAVED: {rec.warning}", file=sys.stderr)
    else:
        print(f"saved in {rec.folder} (session {sid}; 'livevowel sessions --data {rec.folder}' lists it)")
    rec.close()
    return 130 if interrupted else 0
