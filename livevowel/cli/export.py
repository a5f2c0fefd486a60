"""``livevowel export``: write a session's attempts as a CSV table."""

from __future__ import annotations

import argparse

NAME = "export"
SUMMARY = "write the attempts of a recorded session as CSV"
DESCRIPTION = """\
Write every attempt of session SESSION (see 'livevowel sessions') as one
CSV row: times (seconds of stream time), block, trial, prompt, target, the
task (hit size, hold), the measures (median F1, F2, F3, F0 over the steady
part, level), flags, the automatic judgement, the coach's override and
note beside it, the result that counts, closeness, the nearest target and
the clip file. Empty cells mean "not measured" or "not judged". The file is
written atomically. --track adds each attempt's whole frame track as JSON
in a last column.

The export carries the speaker's pseudonymous id only; local rules on
health-data privacy apply to what you do with it."""
EPILOG = """\
example:
  livevowel export 12 --csv session12.csv --data ./clinic-data"""

#: CSV columns, in order (all from the attempts table except those marked).
CSV_COLUMNS = (
    "session", "speaker", "number", "wall_utc", "start_s", "end_s", "duration_s", "block", "block_id", "trial",
    "prompt", "target_id", "hit_size_sd", "hold_s", "f1_hz", "f2_hz", "f3_hz", "f0_hz", "level_db",
    "peak_level_db", "steady_start_s", "steady_end_s", "measured_fraction", "flags", "auto_hit", "override_hit",
    "override_note", "result", "counted", "closeness", "nearest_id", "nearest_distance", "time_in_target_s",
    "speaker_space", "clip",
)


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("session", metavar="SESSION", type=int, help="session number (see 'livevowel sessions')")
    parser.add_argument("--csv", metavar="FILE", required=True, help="write the CSV here ('-' for standard output)")
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
            "session": session_id, "speaker": s["speaker_id"],
            "block": None if a["block_index"] is None else a["block_index"] + 1,
            "result": ("hit" if res else "miss") if counts else "",
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
    import csv
    import sys

    from livevowel.fileio import atomic_writer
    from livevowel.session.store import Store, data_dir

    store = Store.open(data_dir(args.data), create=False)
    try:
        rows = rows_for_csv(store, args.session, track=args.track)
    finally:
        store.close()
    cols = list(CSV_COLUMNS) + (["track_json"] if args.track else [])

    def write(fh) -> None:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(cols)
        for r in rows:
            w.writerow([_cell(r.get(c)) for c in cols])

    if args.csv == "-":
        write(sys.stdout)
    else:
        with atomic_writer(args.csv, newline="") as fh:
            write(fh)
        print(f"{len(rows)} attempts of session {args.session} written to {args.csv}", file=sys.stderr)
    return 0
