"""``livevowel review``: find and judge the attempts in recorded homework."""

from __future__ import annotations

import argparse
import sys

NAME = "review"
SUMMARY = "find and judge the attempts in recordings; store each recording as a session"
DESCRIPTION = """\
Find the attempts in recordings with the same segmentation and judgement as
the live screen: each recording is analysed frame by frame exactly as the
live path would analyse it, cut into attempts, measured over each
attempt's steady part and judged against the target set. Each recording
becomes a session of its own in the session record (mode 'review', source
'file:PATH', with an audio clip per attempt), unless --no-store is given.

With --drill, the recording is taken to hold the drill's prompts said in
order: each judged attempt is the next trial (--pacing sequence, the
default). --pacing self_paced replays the drill's self-paced timing instead,
as 'livevowel drill --source file:PATH' would. With --target, every attempt
aims at that one target. With neither, attempts are measured and given
their nearest target but not judged.

RECORDING may be several files or folders (their audio files, one level
deep); the analysis is spread over the machine's cores and a progress bar
is shown on standard error.

Exit status: 0 when attempts were found in every recording; 1 when at
least one recording had no speech or could not be read (the others are
still reviewed and stored); 2 for bad options, an unknown target set or
drill, or a damaged session record (nothing reviewed).

Speakers appear in the record only under a pseudonymous id (--speaker);
name the recordings by pseudonym too, as reports show their file names
(never their folders). Local rules on health-data privacy apply to the data
folder. This is a practice and feedback tool, not a diagnostic or medical device."""
EPILOG = """\
examples:
  livevowel review homework/S07-week3.wav --targets gae-men --drill front-vowels-five-vowel-l1 --speaker S07
  livevowel review homework/ --targets gae-women --target fleece --speaker S07 --data ./clinic-data
  livevowel review take.wav --targets gae-men --no-store --csv take-attempts.csv"""


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.cli import add_config_option
    from livevowel.cli.targets import add_targets_option

    parser.add_argument("inputs", nargs="+", metavar="RECORDING", help="audio file or folder (WAV, FLAC, OGG)")
    add_targets_option(parser, required=True)
    g = parser.add_argument_group("task")
    g.add_argument("--drill", metavar="FILE", help="drill file (YAML) or shipped drill id: the prompts said")
    g.add_argument("--target", metavar="ID", help="every attempt aims at this target (id, IPA or lexical set)")
    g.add_argument("--pacing", choices=("sequence", "self_paced"), default="sequence",
                   help="with --drill: one trial per judged attempt (sequence, default), or the drill's "
                        "self-paced timing (self_paced)")
    g.add_argument("--profile", metavar="FILE",
                   help="speaker profile: judge in the speaker's own space (sets --speaker when not given)")
    g.add_argument("--seed", metavar="N", type=int, help="seed for shuffled blocks that have none (recorded)")
    g = parser.add_argument_group("record")
    g.add_argument("--speaker", metavar="ID", help="pseudonymous speaker id (e.g. S07; never a name)")
    g.add_argument("--data", metavar="DIR", help="data folder of the session record "
                   "(default: $LIVEVOWEL_DATA or the user data folder)")
    g.add_argument("--no-store", "--no-save", dest="no_store", action="store_true", help="do not store the sessions; print (and --csv) only")
    g.add_argument("--no-clips", action="store_true", help="do not save audio clips of the attempts")
    g.add_argument("--csv", metavar="FILE", help="also write every attempt found as CSV ('-' for standard output)")
    g.add_argument("--note", metavar="TEXT", help="a note stored with each session")
    parser.add_argument("--jobs", type=int, metavar="N", help="worker processes (default: the machine's cores)")
    parser.add_argument("-q", "--quiet", action="store_true", help="print only one summary line per recording")
    add_config_option(parser)


def _prepare(args):
    from livevowel import config
    from livevowel.errors import UserError
    from livevowel.review import single_target_drill
    from livevowel.session.drills import check_targets, load_drill
    from livevowel.session.store import check_speaker_id
    from livevowel.targets import load_target_set

    if args.drill and args.target:
        raise UserError("give --drill or --target, not both")
    if args.pacing != "sequence" and not args.drill:
        raise UserError("--pacing applies to a drill; add --drill FILE")
    if args.jobs is not None and args.jobs < 1:
        raise UserError(f"--jobs {args.jobs}: give 1 or more")
    settings = config.load(config_file=args.config)
    ts = load_target_set(args.targets)
    drill = None
    if args.drill:
        drill = load_drill(args.drill)
        check_targets(drill, ts)
    elif args.target:
        drill = single_target_drill(args.target, ts)
    speaker, profile = args.speaker, None
    if args.profile:
        from livevowel.profile import load_profile

        profile = load_profile(args.profile)
        if speaker is not None and speaker != profile.speaker_id:
            raise UserError(f"--speaker {speaker} does not match the profile's speaker {profile.speaker_id}")
        speaker = profile.speaker_id
    if speaker is not None:
        check_speaker_id(speaker)
    judged = profile.map_set(ts) if profile is not None else ts
    return settings, ts, judged, drill, speaker, profile


def run(args: argparse.Namespace) -> int:
    import os
    import secrets

    from livevowel.audiofile import find_audio_files
    from livevowel.cli.progress import Progress
    from livevowel.review import (REVIEW_MODE, analyse_file, file_time_utc, has_attempts, no_speech_message,
                                  read_as_live, review_analysed)
    from livevowel.session.attempts import AttemptSettings
    from livevowel.session.store import Store, SessionRecorder, data_dir

    settings, ts, judged, drill, speaker, profile = _prepare(args)
    files = find_audio_files(args.inputs)
    try:
        att = AttemptSettings.from_config(settings)
    except KeyError:
        att = AttemptSettings()
    sess_cfg = settings.values.get("session", {})
    clips = not args.no_clips and not args.no_store and sess_cfg.get("clips", True)
    pre = sess_cfg.get("clip_pre_ms", 250.0) / 1e3
    post = sess_cfg.get("clip_post_ms", 150.0) / 1e3
    seed = args.seed if args.seed is not None else secrets.randbelow(2**31 - 1)
    if not args.no_store:
        Store.open(data_dir(args.data)).close()   # fail early (damaged, newer, unwritable) before any work

    def warn(msg: str) -> None:
        print(f"livevowel {NAME}: warning: {msg}", file=sys.stderr, flush=True)

    analysis_values = settings.values.get("analysis")
    jobs = args.jobs or min(len(files), os.cpu_count() or 1)
    progress = Progress(len(files), "reviewing", quiet=args.quiet)
    csv_rows, problems = [], 0

    def handle(an) -> None:
        nonlocal problems
        if an.error is not None:
            problems += 1
            print(f"livevowel {NAME}: error: {an.error}", file=sys.stderr)
            return
        if not has_attempts(an.frames, settings=att):
            problems += 1
            print(f"livevowel {NAME}: {no_speech_message(an, ignored_below_s=att.ignore_below_s)}", file=sys.stderr)
            return
        samples, _, _ = read_as_live(an.path)
        rec = SessionRecorder(folder=args.data, clips=clips, memory_only=args.no_store, warn=warn)
        record_settings = {
            "analysis": analysis_values, "attempts": att.__dict__, "pacing": args.pacing if drill else None,
            "seed": seed, "clips": clips, "profile": args.profile,
            "recording": {"path": os.path.abspath(an.path), "modified_utc": file_time_utc(an.path),
                          "duration_s": round(an.duration_s, 3), "rate_hz": an.rate_hz, "channels": an.channels,
                          "voice": an.voice, "ceiling_hz": an.ceiling_hz},
        }
        rec.start(speaker_id=speaker, voice_group=profile.voice_group if profile is not None else None,
                  profile=profile.to_dict() if profile is not None else None, target_set=judged.id,
                  drill=drill.id if drill is not None else None,
                  drill_file=str(drill.path) if drill is not None and drill.path else None,
                  mode=REVIEW_MODE, source=f"file:{an.path}", settings=record_settings, note=args.note)
        res = review_analysed(an, samples, target_set=judged, recorder=rec, drill=drill, pacing=args.pacing,
                              attempt_settings=att, speaker_space=profile is not None, clip_pre_s=pre,
                              clip_post_s=post, seed=seed)
        for w in res.warnings:
            warn(f"{an.path}: {w}")
        _report(args, an, res, rec)
        if args.csv:
            from livevowel.cli.export import rows_for_csv

            for r in rows_for_csv(rec.store, res.session_id):
                r["recording"] = an.path
                csv_rows.append(r)
        rec.close()   # one connection at a time, however many recordings

    if jobs <= 1 or len(files) == 1:
        for f in files:
            handle(analyse_file(str(f), analysis_values))
            progress.step(f.name)
    else:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=jobs) as pool:
            futs = [pool.submit(analyse_file, str(f), analysis_values) for f in files]
            for f, fut in zip(files, futs):
                handle(fut.result())
                progress.step(f.name)

    if args.csv:
        _write_csv(args.csv, csv_rows)
    return 1 if problems else 0


def _report(args, an, res, rec) -> None:
    """The attempts found, on standard output (standard error when the CSV goes there)."""
    from livevowel.review import format_row

    out = sys.stderr if args.csv == "-" else sys.stdout

    s = res.summary
    where = "not stored" if args.no_store else f"session {res.session_id} in {rec.folder}"
    acc = f"{100 * s.accuracy:.0f}%" if s.trials else "-"
    head = (f"{an.path}: {s.attempts} attempts (flagged {s.flagged}), trials {s.trials}, hits {s.hits}, "
            f"accuracy {acc}; {where}")
    print(head, file=out, flush=True)
    if args.quiet:
        return
    for r in res.rows:
        print("  " + format_row(r), file=out)
    if s.per_block or s.per_target:
        print("  " + s.format().replace("\n", "\n  "), file=out)
    if res.drill_done is False:
        print("  the recording ended before the drill was finished", file=out)
    if res.after_drill:
        print(f"  {res.after_drill} attempt(s) after the drill's end (stored, not trials)", file=out)
    print(file=out, flush=True)


def _write_csv(target: str, rows) -> None:
    from livevowel.cli.export import CSV_COLUMNS, write_attempts_csv

    write_attempts_csv(target, rows, ["recording"] + list(CSV_COLUMNS))
