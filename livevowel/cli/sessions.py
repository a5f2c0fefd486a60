"""``livevowel sessions``: list the recorded sessions, or show one."""

from __future__ import annotations

import argparse

NAME = "sessions"
SUMMARY = "list recorded sessions with speaker, drill and accuracy, or show one session"
DESCRIPTION = """\
List the sessions in the session record: number, start date and time (UTC),
speaker (pseudonymous id), drill or target set, attempts, trials, hits and
accuracy. With a session number, show that session's summary per block and
per target and its attempts. A session whose end time is missing was
stopped abruptly (everything up to its last committed attempt is kept).

A coach's judgement of an attempt (--attempt N --result ...) and a note
are stored beside the automatic judgement, which is never changed; the
result that counts is the coach's when there is one.

Use the numbers with 'livevowel export SESSION --csv FILE'."""
EPILOG = """\
examples:
  livevowel sessions
  livevowel sessions --speaker S07 --data ./clinic-data
  livevowel sessions 12
  livevowel sessions 12 --attempt 3 --result hit --note 'clear FLEECE to my ear'"""


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("session", metavar="SESSION", nargs="?", type=int, help="show this session in detail")
    parser.add_argument("--speaker", metavar="ID", help="only this speaker's sessions")
    parser.add_argument("--data", metavar="DIR",
                        help="data folder of the session record (default: $LIVEVOWEL_DATA or the user data folder)")
    g = parser.add_argument_group("coach's judgement (with SESSION)")
    g.add_argument("--attempt", metavar="N", type=int, help="the attempt to judge or annotate")
    g.add_argument("--result", choices=("hit", "miss", "auto", "exclude", "include"),
                   help="hit or miss (the coach's judgement), auto (back to the automatic one), "
                        "exclude / include (leave out of / take back into the counts)")
    g.add_argument("--note", metavar="TEXT", help="a note on the attempt")


def _pct(hits: int, trials: int) -> str:
    return f"{100.0 * hits / trials:.0f}%" if trials else "-"


def _when(utc: str | None) -> str:
    return utc[:16].replace("T", " ") if utc else "-"


def run(args: argparse.Namespace) -> int:
    import sqlite3

    from livevowel.session.store import Store, data_dir

    from livevowel.errors import UserError

    folder = data_dir(args.data)
    store = Store.open(folder, create=False)
    try:
        if args.attempt is not None or args.result or args.note:
            if args.session is None or args.attempt is None or not (args.result or args.note):
                raise UserError("to judge an attempt give SESSION, --attempt N and --result and/or --note")
            store.session(args.session)
            kw: dict = {}
            if args.result in ("hit", "miss"):
                kw["hit"] = args.result == "hit"
            elif args.result == "auto":
                kw["hit"] = None
            elif args.result in ("exclude", "include"):
                kw["counted"] = args.result == "include"
            try:
                store.set_override(args.session, args.attempt, note=args.note, **kw)
            except sqlite3.OperationalError as exc:
                raise UserError(f"{store.path}: cannot write the session record ({exc})") from None
            print(f"session {args.session} attempt {args.attempt}: "
                  + ", ".join(p for p in (args.result and f"result {args.result}", args.note and "note saved") if p))
            row = next(r for r in store.attempts(args.session) if r["number"] == args.attempt)
            if args.result and args.result != "auto" and row.get("trial") is None:
                print(f"  (attempt {args.attempt} was not a trial -- made outside a prompt -- so the judgement is "
                      "kept with it but the trial counts and accuracy do not change)")
            return 0
        if args.session is not None:
            return _show(store, args.session)
        rows = store.sessions(speaker_id=args.speaker)
        if not rows:
            who = f" for speaker {args.speaker}" if args.speaker else ""
            print(f"no sessions{who} in {folder}")
            return 0
        print(f"{'#':>4}  {'started (UTC)':<16}  {'speaker':<10} {'drill / set':<32} {'att':>4} {'trials':>6} "
              f"{'hits':>5} {'acc':>5}  end")
        for r in rows:
            what = r["drill"] or f"({r['target_set'] or 'free'})"
            end = ("cut off" if not r["ended_utc"]          # the process ended without closing it
                   else "unfinished" if r["drill"] and not r["drill_finished"]   # stopped, or the input ended
                   else "ok")
            print(f"{r['id']:>4}  {_when(r['started_utc']):<16}  {(r['speaker_id'] or '-'):<10} {what:<32} "
                  f"{r['attempts']:>4} {r['trials']:>6} {r['hits']:>5} {_pct(r['hits'], r['trials']):>5}  {end}")
    finally:
        store.close()
    return 0


def _show(store, session_id: int) -> int:
    import math

    s = store.session(session_id)
    print(f"session {s['id']}  speaker {s['speaker_id'] or '-'}  started {_when(s['started_utc'])} UTC  "
          f"ended {_when(s['ended_utc']) if s['ended_utc'] else '(cut off)'}")
    print(f"drill {s['drill'] or '-'}  set {s['target_set'] or '-'}  mode {s['mode']}  source {s['source'] or '-'}  "
          f"livevowel {s['app_version']}")
    if s["note"]:
        print(f"note: {s['note']}")
    print(store.summary(session_id).format())
    print()

    def num(v, fmt):
        return format(v, fmt) if v is not None and not (isinstance(v, float) and math.isnan(v)) else "-"

    for a in store.attempts(session_id):
        res = a["override_hit"] if a["override_hit"] is not None else a["auto_hit"]
        mark = "-" if res is None or a["trial"] is None or not a["counted"] else ("hit" if res else "miss")
        if a["override_hit"] is not None:
            mark += " (coach)"
        print(f"#{a['number']:<4} {num(a['start_s'], '7.2f')} s  {(a['prompt'] or '-'):<12} {(a['target_id'] or '-'):<8} "
              f"{mark:<12} F1 {num(a['f1_hz'], '4.0f')} F2 {num(a['f2_hz'], '4.0f')}  "
              f"score {num(a['closeness'], '3.0f')}  like {a['nearest_id'] or '-'}"
              + (f"  [{a['flags']}]" if a["flags"] else "")
              + (f"  note: {a['override_note']}" if a["override_note"] else ""))
    return 0
