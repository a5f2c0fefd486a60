"""``livevowel drill``: run a drill without a screen, from any source.

The options and the run are also offered as functions
(:func:`add_drill_options`, :func:`run_drill`) so that ``livevowel practice
--drill FILE --headless`` can share them.
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import dataclass
from typing import Any

NAME = "drill"
SUMMARY = "run a drill without a screen: prompts, attempts, judgements, the session record"
DESCRIPTION = """\
Run a drill (a YAML file, or the id of a shipped drill) with no screen and
no keys: self-paced, each attempt judged against the prompt's target as it
closes and saved to the session record with a clip of its audio. The input
is the microphone, a recording (--source file:PATH, --pace 0 for as fast as
possible) or the demo voice. At the end a summary of trials, hits and
accuracy per block and per target is printed.

Speakers appear in the record only under a pseudonymous id (--speaker).
Local rules on health-data privacy apply to the data folder.

livevowel is a practice and feedback tool, not a diagnostic or medical
device. Stop if speaking hurts or your voice turns hoarse. Decisions about
treatment belong to a licensed clinician."""
EPILOG = """\
examples:
  livevowel drill front-vowels-five-vowel-l1 --speaker S07 --source file:take1.wav --pace 0
  livevowel drill my-drill.yaml --speaker S07 --data ./clinic-data --no-clips
  livevowel drill --list"""


def add_drill_options(parser: argparse.ArgumentParser, *, file_positional: bool = True,
                      practice: bool = False) -> None:
    """Options shared by ``drill`` and ``practice --drill`` (not the input options).

    With ``practice=True`` the options ``practice`` already has (``--config``,
    ``--speaker-profile``, ``--targets``) are not added again; :func:`prepare`
    reads them under their practice names.
    """
    from livevowel.cli import add_config_option

    if file_positional:
        parser.add_argument("drill", metavar="FILE", nargs="?",
                            help="drill file (YAML) or the id of a shipped drill (see --list)")
        parser.add_argument("--list", action="store_true", help="list the shipped drills and exit")
    g = parser.add_argument_group("drill session" if practice else "session")
    if practice:
        g.add_argument("--drill", metavar="FILE",
                       help="run a drill (YAML file or shipped drill id; see 'livevowel drill --list'); "
                            "with --headless: no screen, self-paced")
    g.add_argument("--speaker", metavar="ID", help="pseudonymous speaker id (e.g. S07; never a name)")
    if not practice:
        g.add_argument("--profile", metavar="FILE",
                       help="speaker profile: judge in the speaker's own space (sets --speaker when not given; "
                            "it is stored with the speaker and used again with --speaker ID)")
    g.add_argument("--no-profile", action="store_true",
                   help="judge in the set's own space even when a profile is stored with the speaker")
    g.add_argument("--voice-group", metavar="G", choices=("adult_male", "adult_female", "child"),
                   help="voice group to record for a new speaker")
    if not practice:
        g.add_argument("--targets", "--set", dest="target_set", metavar="SET",
                       help="target set to use instead of the one the drill names")
    if practice:
        g.add_argument("--coach", action="store_true",
                       help="coach-led: the coach moves on with the right arrow or N and asks for the same "
                            "item again with the left arrow or P (default: self-paced)")
    g.add_argument("--data", metavar="DIR", help="data folder of the session record "
                   "(default: $LIVEVOWEL_DATA or the user data folder)")
    g.add_argument("--no-clips", action="store_true", help="do not save audio clips of the attempts")
    g.add_argument("--no-save", "--no-store", dest="no_save", action="store_true", help="keep the session in memory only (nothing is written)")
    g.add_argument("--pause", metavar="S", type=float,
                   help="seconds the result shows before the next prompt (default: the drill's pause_s)")
    g.add_argument("--seed", metavar="N", type=int, help="seed for shuffled blocks that have none (recorded)")
    g.add_argument("--note", metavar="TEXT", help="a note stored with the session")
    g.add_argument("--quiet", action="store_true", help="print only the summary")
    if not practice:
        add_config_option(parser)


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.audio.options import add_source_options

    add_drill_options(parser)
    add_source_options(parser)


def _print_shipped() -> int:
    from livevowel.session.drills import load_drill, shipped_drills

    for name in shipped_drills():
        d = load_drill(name)
        print(f"{name:<32} {d.title}  [{d.target_set}, {len(d.blocks)} blocks]")
    return 0


def drill_and_set(args: argparse.Namespace):
    """The drill and its target set from the options, checked against each other."""
    from livevowel.errors import UserError
    from livevowel.session.drills import check_targets, load_drill, resolve_target_set_ref
    from livevowel.targets import load_target_set

    if not args.drill:
        raise UserError("name a drill file or shipped drill (see --list)")
    if args.pause is not None and not (0 <= args.pause <= 30):
        raise UserError(f"--pause {args.pause}: give 0 to 30 seconds")
    drill = load_drill(args.drill)
    set_ref = getattr(args, "target_set", None) or getattr(args, "targets", None)
    ts = load_target_set(set_ref or resolve_target_set_ref(drill))
    check_targets(drill, ts)
    return drill, ts


@dataclass
class RecordSetup:
    """The speaker, profile and open session record of a run (before ``recorder.start``)."""

    recorder: Any
    speaker: str | None
    profile: Any
    profile_ref: str | None
    target_set: Any           # the set as judged: mapped through the profile when there is one
    voice_group: str | None
    attempts: Any             # AttemptSettings
    clips: bool
    clip_pre_s: float
    clip_post_s: float


def open_record(args: argparse.Namespace, settings, ts, *, warn=None, use: str = "judging") -> RecordSetup:
    """Speaker, profile (given, or stored with the speaker) and the session record for a run over ``ts``.

    Reads ``--speaker``, ``--profile``/``--speaker-profile``, ``--no-profile``,
    ``--voice-group``, ``--data``, ``--no-clips`` and ``--no-save``. A profile
    stored with the speaker is found in the data folder even with ``--no-save``.
    """
    from livevowel.errors import UserError
    from livevowel.session.attempts import AttemptSettings
    from livevowel.session.store import SessionRecorder, Store, check_speaker_id

    speaker = args.speaker
    profile = None
    profile_ref = getattr(args, "profile", None) or getattr(args, "speaker_profile", None)
    if profile_ref:
        from livevowel.profile import load_profile

        profile = load_profile(profile_ref)
        if speaker is not None and speaker != profile.speaker_id:
            raise UserError(f"--speaker {speaker} does not match the profile's speaker {profile.speaker_id}")
        speaker = profile.speaker_id
    if speaker is not None:
        check_speaker_id(speaker)
    try:
        att = AttemptSettings.from_config(settings)
    except KeyError:  # no attempts section in this build's settings
        att = AttemptSettings()
    sess_cfg = settings.values.get("session", {})
    clips = not args.no_clips and sess_cfg.get("clips", True)
    rec = SessionRecorder(folder=args.data, clips=clips, memory_only=args.no_save, warn=warn)
    if profile is None and speaker is not None and not getattr(args, "no_profile", False):
        store = rec.store
        if rec.in_memory:   # --no-save: look in the data folder all the same (read only)
            try:
                store = Store.open(args.data, create=False)
            except UserError:
                store = None
        if store is not None:
            profile = stored_profile(store, speaker)
            if store is not rec.store:
                store.close()
        if profile is not None:
            profile_ref = "(stored with the speaker)"
            print(f"speaker {speaker}: {use} with the profile stored in the record "
                  f"(updated {profile.updated}; --no-profile to do without it)", file=sys.stderr)
    judged = profile.map_set(ts) if profile is not None else ts
    voice_group = args.voice_group or (profile.voice_group if profile is not None else None)
    return RecordSetup(rec, speaker, profile, profile_ref, judged, voice_group, att, clips,
                       sess_cfg.get("clip_pre_ms", 250.0) / 1e3, sess_cfg.get("clip_post_ms", 150.0) / 1e3)


def prepare(args: argparse.Namespace, *, mode: str = "self_paced", warn=None):
    """Load drill, set, profile and settings; open the record. Returns (session, recorder, extras)."""
    from livevowel import config
    from livevowel.session.runner import DrillSession

    settings = getattr(args, "_settings", None) or config.load(config_file=getattr(args, "config", None))
    drill, ts = getattr(args, "_drill_and_set", None) or drill_and_set(args)
    r = open_record(args, settings, ts, warn=warn)
    seed = args.seed
    if seed is None:
        import secrets

        seed = secrets.randbelow(2**31 - 1)
    record_settings = {"analysis": settings.values.get("analysis"), "attempts": r.attempts.__dict__,
                       "seed": seed, "pause_s": args.pause, "clips": r.clips,
                       "profile": r.profile_ref, "pace": getattr(args, "pace", None)}
    sid = r.recorder.start(speaker_id=r.speaker, voice_group=r.voice_group,
                           profile=r.profile.to_dict() if r.profile is not None else None,
                           target_set=r.target_set.id, drill=drill.id,
                           drill_file=str(drill.path) if drill.path else None,
                           mode=mode, source=getattr(args, "source", None), settings=record_settings, note=args.note)
    session = DrillSession(drill, r.target_set, r.recorder, mode=mode, attempt_settings=r.attempts,
                           pause_s=args.pause, seed=seed, speaker_space=r.profile is not None,
                           clip_pre_s=r.clip_pre_s, clip_post_s=r.clip_post_s)
    # the seeds actually used by shuffled blocks, for the record
    return session, r.recorder, {"settings": settings, "session_id": sid, "drill": drill,
                                 "target_set": r.target_set}


def stored_profile(store, speaker_id: str):
    """The speaker profile saved with ``speaker_id`` in the record, or ``None``."""
    import tempfile
    from pathlib import Path

    from livevowel.profile import load_profile

    row = store.speaker(speaker_id)
    if row is None or not row.get("profile_json"):
        return None
    with tempfile.TemporaryDirectory() as tmp:
        p = Path(tmp) / "profile.yaml"
        p.write_text(row["profile_json"], encoding="utf-8")   # JSON is YAML
        return load_profile(p)


def run_drill(args: argparse.Namespace) -> int:
    """The headless run behind ``livevowel drill`` and ``practice --drill --headless``."""
    from livevowel.audio.options import source_from_args
    from livevowel.audio.pipeline import LiveSettings
    from livevowel.dsp.engine import AnalysisSettings
    from livevowel.session.runner import run_headless

    def warn(msg: str) -> None:
        print(f"livevowel {NAME}: warning: {msg}", file=sys.stderr, flush=True)

    if getattr(args, "coach", False):
        from livevowel.errors import UserError

        raise UserError("coach-led drills need the screen (someone presses the keys); "
                        "run 'livevowel practice --drill FILE --coach' or leave out --coach")
    from livevowel import config

    # Check the drill and open the input before a session is created, so a bad drill
    # or input file leaves no empty session behind.
    args._drill_and_set = drill_and_set(args)
    settings = getattr(args, "_settings", None) or config.load(config_file=getattr(args, "config", None))
    args._settings = settings
    try:
        live = LiveSettings.from_config(settings) if "live" in settings.values else LiveSettings()
    except KeyError:
        live = LiveSettings()
    source = source_from_args(args, live=live)
    from livevowel.cli import caution_if_live

    caution_if_live(args)
    session, rec, extra = prepare(args, warn=warn)
    quiet = getattr(args, "quiet", False)
    if not quiet:
        def show(oc) -> None:
            print(oc.line(), flush=True)

        session.on_outcome = show

        def ask(p) -> None:          # the speaker hears of the prompt before answering it
            print(f"say {p.item.prompt!r}   (block {p.block_index + 1} {p.block_id}, trial {p.trial})", flush=True)

        session.on_prompt = ask
        d = extra["drill"]
        where = "memory only" if rec.in_memory else str(rec.folder)
        print(f"session {extra['session_id']}: drill {d.id} ({d.title}), set {extra['target_set'].id}, "
              f"record: {where}", flush=True)
    interrupted = False
    try:
        summary = run_headless(session, source, analysis=AnalysisSettings.from_config(settings), live=live,
                               warn=warn, input_limit_s=getattr(args, "seconds", None))
    except KeyboardInterrupt:
        interrupted = True
        summary = session.finish(stopped=True)
    return end_session(summary, session=session, recorder=rec, session_id=extra["session_id"],
                       interrupted=interrupted)


def end_session(summary, *, session, recorder, session_id: int, interrupted: bool) -> int:
    """Print the summary, close the record; the exit status (130 after Ctrl-C)."""
    print_summary(summary, session=session, recorder=recorder, session_id=session_id, interrupted=interrupted)
    recorder.close()
    return 130 if interrupted else 0


def print_summary(summary, *, session, recorder, session_id: int, interrupted: bool = False) -> None:
    """The end-of-session summary (stdout) and any record warning (stderr)."""
    run = session.run
    state = "stopped" if interrupted else ("finished" if run.done else "input ended before the drill finished")
    print(f"\nsession {session_id} {state}")
    print(summary.format())
    for st in run.block_states:
        crit = "met" if st.criterion_met else "not met"
        adv = st.block.advance.describe()
        size = f"{st.hit_size_sd:.2f} SD" if st.hit_size_sd is not None else "target's own"
        print(f"block {st.index + 1} {st.block.id}: advance rule ({adv}) {crit}; hit size {size}, "
              f"hold {st.hold_s:.2f} s" + (f", seed {st.seed}" if st.seed is not None else ""))
    print_where_saved(recorder, session_id)


def print_where_saved(recorder, session_id: int) -> None:
    """Where the session went (stdout), or that it was not saved and why (stderr)."""
    if recorder.in_memory:
        print(f"NOT SAVED: {recorder.warning}", file=sys.stderr)
    else:
        print(f"saved in {recorder.folder} (session {session_id}; "
              f"'livevowel sessions --data {recorder.folder}' lists it)")


def open_screen_input(args: argparse.Namespace, settings):
    """The display and the input, opened before any record so that a failure leaves no empty session.

    Returns ``(live_settings, source)``."""
    from livevowel.audio.options import source_from_args
    from livevowel.audio.pipeline import LiveSettings
    from livevowel.ui import loop

    loop.init_display(headless=bool(getattr(args, "headless", False)))
    live = LiveSettings.from_config(settings)
    return live, source_from_args(args, live=live)


def run_screen_session(args: argparse.Namespace, session, controller, *, settings, options, live, source,
                       title: str, size=(1280, 800)):
    """The practice screen with a recording ``session`` riding along the live pipeline.

    Returns ``(interrupted, loop_result, summary)`` (the loop's result also after
    Ctrl-C, None only if the loop never ran); the session is
    finished, an attempt still open when the input was stopped (quit, time
    limit, Ctrl-C) flagged ``stopped``.
    """
    from livevowel.dsp.engine import AnalysisSettings
    from livevowel.session.live import DrillFeed
    from livevowel.session.runner import tapped_pipeline
    from livevowel.ui import loop
    from livevowel.ui.app import make_tone
    from livevowel.ui.screen import PracticeScreen

    if not getattr(args, "quiet", False):
        session.on_outcome = lambda oc: print(oc.line(), flush=True)
    pipe = tapped_pipeline(source, analysis=AnalysisSettings.from_config(settings), live=live)
    headless = bool(getattr(args, "headless", False))
    tone = make_tone(options, headless=headless)
    screen = PracticeScreen(session.target_set, controller, options=options, on_hit=lambda e: tone.play(),
                            title=title)
    res, interrupted = None, False
    try:
        res = loop.run(screen, DrillFeed(session, pipe), headless=headless, seconds=getattr(args, "seconds", None),
                       screenshot=getattr(args, "screenshot", None), size=size,
                       fullscreen=getattr(args, "fullscreen", False), pace=getattr(args, "pace", 1.0) or 0.0,
                       keep_open=False)
    except KeyboardInterrupt as exc:
        interrupted, res = True, getattr(exc, "result", None)      # loop.Stopped: what ran, its screenshot
    summary = session.finish(stopped=interrupted or res is None or not res.input_ended)
    return interrupted, res, summary


def run_drill_screen(args: argparse.Namespace, *, settings, options, size=(1280, 800)) -> int:
    """``practice --drill FILE``: the drill on the practice screen (self-paced, or coach-led with --coach).

    The screen is the display engineer's :class:`~livevowel.ui.screen.PracticeScreen`;
    the drill drives its current target through a
    :class:`~livevowel.session.live.DrillController` and rides along the
    loop's pipeline as a :class:`~livevowel.session.live.DrillFeed`.
    """
    from livevowel.session.live import DrillController

    def warn(msg: str) -> None:
        print(f"livevowel practice: warning: {msg}", file=sys.stderr, flush=True)

    args._settings = settings
    args._drill_and_set = drill_and_set(args)
    live, source = open_screen_input(args, settings)
    mode = "coach" if getattr(args, "coach", False) else "self_paced"
    session, rec, extra = prepare(args, mode=mode, warn=warn)
    ts = extra["target_set"]
    from livevowel.ui.screen import TITLE_SEP

    interrupted, res, summary = run_screen_session(
        args, session, DrillController(session, ts.targets), settings=settings, options=options, live=live,
        source=source, title=f"{extra['drill'].title}{TITLE_SEP}{ts.title}", size=size)
    if res is not None and res.screenshot is not None:
        print(f"screenshot: {res.screenshot}")
    return end_session(summary, session=session, recorder=rec, session_id=extra["session_id"],
                       interrupted=interrupted)


def run_practice_drill(args: argparse.Namespace) -> int:
    """Entry for ``practice --drill``: headless without a screenshot runs with no screen at all."""
    if getattr(args, "headless", False) and not getattr(args, "screenshot", None):
        if getattr(args, "coach", False):
            from livevowel.errors import UserError

            raise UserError("--coach needs the screen (someone presses the keys); leave out --headless or --coach")
        return run_drill(args)
    from livevowel.cli._screen_options import parse_size, settings_and_options

    from livevowel.cli import caution_if_live

    settings, options = settings_and_options(args)
    caution_if_live(args)
    return run_drill_screen(args, settings=settings, options=options, size=parse_size(args.size))


def run(args: argparse.Namespace) -> int:
    if args.list:
        return _print_shipped()
    return run_drill(args)
