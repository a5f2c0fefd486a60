"""The session record as one JSON document: a session, or a speaker's whole history.

Layout (``format`` = ``"livevowel-history"``, ``version`` = 1)::

    {"format", "version", "app_version", "exported_utc", "caution", "privacy",
     "speaker": {"id", "voice_group", "created_utc", "profile"} | null,
     "sessions": [{<sessions columns>, "settings": {...},
                   "summary": {"attempts", "flagged", "trials", "hits", "accuracy",
                               "per_target": [{"key", "attempts", "trials", "hits", "accuracy"}],
                               "per_block": [...]},
                   "events": [{<events columns>, "detail": {...}}],
                   "attempts": [{<attempts columns>, "result": "hit"|"miss"|null,
                                 "track": {...} (with track=True)}]}]}

Numbers are in the units of the record (Hz, seconds, dBFS); ``null`` means
not measured or not judged; accuracy is hits / trials (0..1) or ``null``.
"""

from __future__ import annotations

import json
import math
from typing import Any

from livevowel import CAUTION, __version__
from livevowel.report.data import is_trial, per_block, per_target, result_of
from livevowel.report.html import PRIVACY

FORMAT = "livevowel-history"
VERSION = 1


def _clean(v: Any) -> Any:
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _loads(text: str | None) -> Any:
    if not text:
        return None
    try:
        return json.loads(text)
    except ValueError:
        return text


def _tally(rows) -> list[dict]:
    return [{"key": t.key, "attempts": t.attempts, "trials": t.trials, "hits": t.hits,
             "accuracy": _clean(t.accuracy)} for t in rows]


def session_json(store, session_id: int, *, track: bool = False) -> dict:
    """One session with its summary, events and attempts (see the module docstring)."""
    s = dict(store.session(session_id))
    s["settings"] = _loads(s.pop("settings_json", None))
    rows = store.attempts(session_id)
    attempts = []
    for a in rows:
        a = {k: _clean(v) for k, v in a.items()}
        tj = a.pop("track_json", None)
        res = result_of(a)
        a["result"] = ("hit" if res else "miss") if is_trial(a) else None
        if track:
            a["track"] = _loads(tj)
        attempts.append(a)
    events = []
    for e in store.events(session_id):
        e = dict(e)
        e["detail"] = _loads(e.pop("detail_json", None))
        events.append(e)
    trials = [a for a in rows if is_trial(a)]
    hits = sum(result_of(a) for a in trials)
    s["summary"] = {"attempts": len(rows), "flagged": sum(1 for a in rows if a.get("flags")),
                    "trials": len(trials), "hits": hits, "accuracy": hits / len(trials) if trials else None,
                    "per_target": _tally(per_target(rows)), "per_block": _tally(per_block(rows))}
    s["events"] = events
    s["attempts"] = attempts
    return s


def history_json(store, *, session_id: int | None = None, speaker_id: str | None = None,
                 track: bool = False) -> dict:
    """A session (``session_id``) or every session of a speaker (``speaker_id``) as one document."""
    from livevowel.errors import UserError
    from livevowel.session.store import check_speaker_id, utc_now

    if (session_id is None) == (speaker_id is None):
        raise UserError("name a session or a speaker (--speaker ID), not both")
    if speaker_id is not None:
        check_speaker_id(speaker_id)
        if store.speaker(speaker_id) is None:
            raise UserError(f"no speaker {speaker_id} in {store.folder or 'memory'}; "
                            "see 'livevowel sessions' for the speakers recorded")
        ids = [int(r["id"]) for r in store.sessions(speaker_id=speaker_id)]
    else:
        ids = [session_id]
        speaker_id = store.session(session_id).get("speaker_id")
    spk = store.speaker(speaker_id) if speaker_id else None
    speaker = None
    if spk is not None:
        speaker = {"id": spk["id"], "voice_group": spk.get("voice_group"), "created_utc": spk.get("created_utc"),
                   "profile": _loads(spk.get("profile_json"))}
    return {"format": FORMAT, "version": VERSION, "app_version": __version__, "exported_utc": utc_now(),
            "caution": CAUTION, "privacy": PRIVACY, "speaker": speaker,
            "sessions": [session_json(store, i, track=track) for i in ids]}


def dumps(doc: dict) -> str:
    """The document as JSON text (NaN never appears: it is ``null``)."""
    return json.dumps(doc, indent=1, ensure_ascii=False, allow_nan=False, default=str) + "\n"
