"""``livevowel report``: an HTML report of a session, or of a speaker's progress."""

from __future__ import annotations

import argparse
import sys

NAME = "report"
SUMMARY = "write an HTML report (with PNG figures) of a session or of a speaker's progress"
DESCRIPTION = """\
Write a report into the folder --out: report.html and its figures as PNG
files.

With --session N: the vowel plane with every attempt over the target
regions (plane.png), trials, hits and accuracy per target and per block,
and every attempt with its measures, result and an audio player for its
clip. With --speaker ID: the accuracy of each target across the speaker's
sessions (trend.png), a table per session, the plane of every attempt of
the period (plane.png) and each session's attempts; --since DATE
(YYYY-MM-DD, UTC) leaves out older sessions.

report.html is one self-contained file: figures are embedded, and clips are
embedded while they total at most 4 MB (a typical session), else copied to
OUT/clips/ and linked (a history over weeks; keep the folder together).
--clips chooses explicitly. It prints on A4 and US Letter.

The report names the speaker only by pseudonym and carries the livevowel
version, the settings and the target set. Local rules on health-data
privacy apply to it. livevowel is not a diagnostic or medical device."""
EPILOG = """\
examples:
  livevowel report --session 12 --out report-s12
  livevowel report --speaker S07 --since 2026-01-01 --data ./clinic-data --out S07-january"""


def configure(parser: argparse.ArgumentParser) -> None:
    which = parser.add_mutually_exclusive_group(required=True)
    which.add_argument("--session", metavar="N", type=int, help="report on session N (see 'livevowel sessions')")
    which.add_argument("--speaker", metavar="ID", help="progress report of speaker ID over their sessions")
    parser.add_argument("--since", metavar="DATE", help="with --speaker: only sessions started on or after "
                        "DATE (YYYY-MM-DD, UTC)")
    parser.add_argument("--data", metavar="DIR",
                        help="data folder of the session record (default: $LIVEVOWEL_DATA or the user data folder)")
    parser.add_argument("--out", metavar="DIR",
                        help="folder to write the report into (default: report-session-N or report-ID here)")
    parser.add_argument("--clips", choices=("auto", "inline", "link", "none"), default="auto",
                        help="audio clips: embedded, linked beside the report, or left out (default: auto, by size)")


def run(args: argparse.Namespace) -> int:
    from livevowel.errors import UserError
    from livevowel.report import build_session_report, build_speaker_report
    from livevowel.session.store import Store, data_dir

    if args.since and args.session is not None:
        raise UserError("--since applies to --speaker; a session report covers one session")
    store = Store.open(data_dir(args.data), create=False)
    try:
        if args.session is not None:
            out = args.out or f"report-session-{args.session}"
            res = build_session_report(store, args.session, out, clips=args.clips)
        else:
            out = args.out or f"report-{args.speaker}"
            res = build_speaker_report(store, args.speaker, out, since=args.since, clips=args.clips)
    finally:
        store.close()
    for w in res.warnings:
        print(f"livevowel {NAME}: warning: {w}", file=sys.stderr)
    if res.clips_missing:
        print(f"livevowel {NAME}: warning: {res.clips_missing} clip file(s) named in the record were not found",
              file=sys.stderr)
    clips = {"inline": f"{res.clips} clips embedded", "link": f"{res.clips} clips linked in {res.html.parent}/clips",
             "none": "no clips"}[res.clip_mode]
    figs = ", ".join(p.name for p in res.figures.values())
    print(f"wrote {res.html} ({clips}; figures {figs})")
    return 0
