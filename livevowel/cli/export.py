"""``livevowel export``: write a session's (or a speaker's) attempts as CSV or JSON."""

from __future__ import annotations

import argparse

NAME = "export"
SUMMARY = "write the attempts of a recorded session, or a speaker's history, as CSV or JSON"
DESCRIPTION = """\
Write every attempt of session SESSION (see 'livevowel sessions') as one
CSV row: times (seconds of stream time), block, trial, prompt, target, the
task (hit size, hold), the measures (median F1, F2, F3, F0 over the steady
part, level), flags, the automatic judgement, the coach's override and
note beside it, the result that counts (hit, miss, or "excluded" where the
coach took the attempt out), closeness, the nearest target and the clip
file. Empty cells mean "not measured" or "not judged". The file is
written atomically. --track adds each attempt's whole frame track as JSON
in a last column.

--speaker ID exports every session of that speaker (the whole history).
--format json writes one document instead: the speaker, each session with
its settings, summary per target and per block, events and attempts (with
--track, each attempt's frame track).

The export carries the speaker's pseudonymous id only; local rules on
health-data privacy apply to what you do with it."""
EPILOG = """\
examples:
  livevowel export 12 --csv session12.csv --data ./clinic-data
  livevowel export --speaker S07 --format json --out S07-history.json"""

#: CSV columns, in order (from the attempts table; session, speaker, mode -- self_paced, coach or
#: free practice -- and drill from the session's row; block and result derived).
CSV_COLUMNS = (
    "session", "speaker", "mode", "drill", "number", "wall_utc", "start_s", "end_s", "duration_s", "block",
    "block_id", "trial", "prompt", "target_id", "hit_size_sd", "hold_s", "f1_hz", "f2_hz", "f3_hz", "f0_hz", "level_db",
    "peak_level_db", "steady_start_s", "steady_end_s", "measured_fraction", "flags", "auto_hit", "override_hit",
    "override_note", "result", "counted", "closeness", "nearest_id", "nearest_distance", "time_in_target_s",
    "speaker_space", "clip",
)


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("session", metavar="SESSION", type=int, nargs="?",
                        help="session number (see 'livevowel sessions')")
    parser.add_argument("--speaker", metavar="ID", help="export every session of this speaker instead")
    parser.add_argument("--csv", metavar="FILE", help="write the CSV here ('-' for standard output)")
    parser.add_argument("--format", choices=("csv", "json"), default=None,
                        help="csv (default; one row per attempt) or json (sessions, summaries, events, attempts)")
    parser.add_argument("--out", metavar="FILE", help="write the export here (default: standard output)")
    parser.add_argument("--track", action="store_true", help="add the frame track of each attempt (JSON column)")
    parser.add_argument("--data", metavar="DIR",
                        help="data folder of the session record (default: $LIVEVOWEL_DATA or the user data folder)")


def rows_for_csv(store, session_id: int, *, track: bool = False) -> list[dict]:
    """The export rows of a session (dicts keyed by :data:`CSV_COLUMNS`)."""
    s = store.session(session_id)
    out = []
    for a in store.attempts(session_id):
        res = a["override_hit"] if a["override_hit"] is not None else a["auto_hit"]
        counts = a["trial"] is not None and a["counted"] and res is not None
        r = {k: a.get(k) for k in CSV_COLUMNS if k in a}
        r.update({
            "session": session_id, "speaker": s["speaker_id"], "mode": s["mode"], "drill": s["drill"],
            "block": None if a["block_index"] is None else a["block_index"] + 1,
            # what counts: hit or miss; "excluded" where the coach took it out; empty otherwise
            "result": ("hit" if res else "miss") if counts else ("excluded" if not a["counted"] else ""),
        })
        if track:
            r["track_json"] = a["track_json"]
        out.append(r)
    return out


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return f"{v:.6g}"
    return str(v)


def run(args: argparse.Namespace) -> int:
    import sys

    from livevowel.errors import UserError
    from livevowel.session.store import Store, data_dir

    if (args.session is None) == (args.speaker is None):
        raise UserError("name a SESSION number or --speaker ID (one of them)")
    if args.out and args.csv:
        raise UserError("give the output file once: --out FILE or --csv FILE, not both")
    out = args.out or args.csv or "-"  # standard output by default, like most Unix tools
    fmt = args.format or "csv"
    if args.csv and fmt != "csv":
        raise UserError("--csv writes CSV; use --out FILE with --format json")
    store = Store.open(data_dir(args.data), create=False)
    try:
        if fmt == "json":
            from livevowel.report.export_json import dumps, history_json

            text = dumps(history_json(store, session_id=args.session, speaker_id=args.speaker, track=args.track))
        elif args.speaker is not None:
            ids = [int(r["id"]) for r in store.sessions(speaker_id=args.speaker)]
            if not ids:
                raise UserError(f"speaker {args.speaker} has no sessions in {store.folder}")
            rows = [r for i in ids for r in rows_for_csv(store, i, track=args.track)]
        else:
            rows = rows_for_csv(store, args.session, track=args.track)
    finally:
        store.close()
    what = f"session {args.session}" if args.speaker is None else f"speaker {args.speaker}"
    if fmt == "json":
        if out == "-":
            sys.stdout.write(text)
        else:
            from livevowel.fileio import PRIVATE_FILE_MODE, write_text_atomic

            write_text_atomic(out, text, permissions=PRIVATE_FILE_MODE)
            print(f"{what} written to {out} (JSON)", file=sys.stderr)
        return 0
    cols = list(CSV_COLUMNS) + (["track_json"] if args.track else [])
    write_attempts_csv(out, rows, cols, what=f"attempts of {what}")
    return 0


def write_attempts_csv(target: str, rows: list, cols: list, *, what: str = "attempts") -> None:
    """Write attempt rows as CSV to ``target`` ('-' for standard output), atomically.

    Empty cells for ``None``; floats to 6 significant digits.
    """
    import csv
    import sys

    from livevowel.fileio import PRIVATE_FILE_MODE, atomic_writer

    def write(fh) -> None:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(cols)
        for r in rows:
            w.writerow([_cell(r.get(c)) for c in cols])

    if target == "-":
        write(sys.stdout)
    else:
        with atomic_writer(target, newline="", permissions=PRIVATE_FILE_MODE) as fh:
            write(fh)
        print(f"{len(rows)} {what} written to {target}", file=sys.stderr)
