"""What a report shows, read from the session record: sessions, attempts, tables, trends.

Counting follows the record's rule (:data:`livevowel.session.store.RESULT_SQL`):
the judgement that counts is the coach's override when there is one, else
the automatic one; an attempt is a *trial* when it has a trial number, is
counted (``counted = 1``) and has a judgement. Accuracy is hits / trials.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

from livevowel.errors import UserError


def result_of(row: Mapping) -> int | None:
    """The judgement that counts for an attempt row: 1 hit, 0 miss, ``None`` not judged."""
    r = row.get("override_hit")
    if r is None:
        r = row.get("auto_hit")
    return None if r is None else int(bool(r))


def is_trial(row: Mapping) -> bool:
    """True when the attempt counts toward accuracy."""
    return row.get("trial") is not None and bool(row.get("counted", 1)) and result_of(row) is not None


@dataclass(frozen=True)
class TallyRow:
    """One line of a per-target or per-block table.

    ``attempts`` counts every attempt aimed at the target (or made in the
    block), flagged ones included; ``trials`` and ``hits`` only the counted
    ones. ``hit_sizes_sd`` and ``holds_s`` are the task values met in the
    trials (smallest, largest), ``None`` when none was recorded.
    """

    key: str
    label: str
    attempts: int
    trials: int
    hits: int
    hit_sizes_sd: tuple[float, float] | None = None
    holds_s: tuple[float, float] | None = None

    @property
    def accuracy(self) -> float:
        """Hits / trials, 0..1 (``nan`` without trials)."""
        return self.hits / self.trials if self.trials else float("nan")


def _span(values: Sequence[float]) -> tuple[float, float] | None:
    v = [float(x) for x in values if x is not None and math.isfinite(float(x))]
    return (min(v), max(v)) if v else None


def per_target(rows: Sequence[Mapping], target_set=None) -> list[TallyRow]:
    """Trials, hits and accuracy per target, in the set's order (then first appearance)."""
    groups: dict[str, list[Mapping]] = {}
    for r in rows:
        if r.get("target_id") is None:
            continue
        groups.setdefault(str(r["target_id"]), []).append(r)
    order = list(groups)
    if target_set is not None:
        ids = [t.id for t in target_set.targets]
        first = {k: i for i, k in enumerate(order)}
        order.sort(key=lambda k: (ids.index(k) if k in ids else len(ids), first[k]))
    out = []
    for key in order:
        g = groups[key]
        tr = [r for r in g if is_trial(r)]
        label = key
        if target_set is not None:
            t = target_set.find(key)
            if t is not None:
                label = f"{t.ipa}  {t.lexical_set or t.id}".strip() if t.ipa else key
        out.append(TallyRow(key, label, len(g), len(tr), sum(result_of(r) for r in tr),
                            _span([r.get("hit_size_sd") for r in tr]), _span([r.get("hold_s") for r in tr])))
    return out


def per_block(rows: Sequence[Mapping]) -> list[TallyRow]:
    """Trials, hits and accuracy per block, in block order (key ``"N:id"``, N from 1)."""
    groups: dict[tuple[int, str], list[Mapping]] = {}
    for r in rows:
        if r.get("block_index") is None:
            continue
        groups.setdefault((int(r["block_index"]), str(r.get("block_id"))), []).append(r)
    out = []
    for (bi, bid), g in sorted(groups.items()):
        tr = [r for r in g if is_trial(r)]
        out.append(TallyRow(f"{bi + 1}:{bid}", f"{bi + 1}  {bid}", len(g), len(tr), sum(result_of(r) for r in tr),
                            _span([r.get("hit_size_sd") for r in tr]), _span([r.get("hold_s") for r in tr])))
    return out


def resolve_target_set(session: Mapping, speaker: Mapping | None = None):
    """The target set a session was judged against, and a note when it could not be had exactly.

    Ids of the form ``SET@SPEAKER`` (a set mapped into a speaker's space by
    a profile) are rebuilt from the shipped or given set and the factors of
    the profile stored with the speaker. Returns ``(TargetSet or None, note)``.
    """
    from livevowel.targets import load_target_set

    ref = session.get("target_set")
    if not ref:
        return None, "the session names no target set"
    base, _, who = str(ref).partition("@")
    try:
        ts = load_target_set(base)
    except UserError as exc:
        return None, f"target set {ref} could not be loaded ({exc}); regions are not drawn"
    if not who:
        return ts, ""
    prof = None
    if speaker is not None and speaker.get("profile_json"):
        try:
            prof = json.loads(speaker["profile_json"])
        except ValueError:
            prof = None
    try:
        fac = prof["transform"]["factors"]
        factors = (float(fac["f1"]), float(fac["f2"]), float(fac["f3"]))
    except (KeyError, TypeError, ValueError):
        return ts, (f"the profile that mapped {base} to speaker {who} is not in the record; "
                    "regions are drawn unmapped")
    return ts.mapped(factors, id=str(ref), title=f"{ts.title} (mapped to speaker {who})"), ""


@dataclass
class SessionData:
    """One session with everything a report needs."""

    session: dict
    attempts: list[dict]
    events: list[dict]
    speaker: dict | None
    target_set: Any = None
    target_set_note: str = ""
    settings: dict = field(default_factory=dict)

    @property
    def id(self) -> int:
        return int(self.session["id"])

    @property
    def trials(self) -> int:
        return sum(1 for r in self.attempts if is_trial(r))

    @property
    def hits(self) -> int:
        return sum(result_of(r) for r in self.attempts if is_trial(r))

    @property
    def flagged(self) -> int:
        return sum(1 for r in self.attempts if r.get("flags"))

    @property
    def accuracy(self) -> float:
        return self.hits / self.trials if self.trials else float("nan")

    def per_target(self) -> list[TallyRow]:
        return per_target(self.attempts, self.target_set)

    def per_block(self) -> list[TallyRow]:
        return per_block(self.attempts)


def load_session(store, session_id: int) -> SessionData:
    """Read one session (UserError when there is none)."""
    s = store.session(session_id)
    speaker = store.speaker(s["speaker_id"]) if s.get("speaker_id") else None
    ts, note = resolve_target_set(s, speaker)
    try:
        settings = json.loads(s["settings_json"]) if s.get("settings_json") else {}
    except ValueError:
        settings = {}
    return SessionData(session=s, attempts=store.attempts(session_id), events=store.events(session_id),
                       speaker=speaker, target_set=ts, target_set_note=note,
                       settings=settings if isinstance(settings, dict) else {})


def parse_since(text: str | None) -> str | None:
    """``--since DATE`` (``YYYY-MM-DD``, UTC) as the ISO prefix to compare with; ``None`` passes."""
    if text is None:
        return None
    try:
        d = _dt.date.fromisoformat(text)
    except ValueError:
        raise UserError(f"--since {text!r}: give a date as YYYY-MM-DD (e.g. 2026-01-31)") from None
    return d.isoformat()


def load_speaker(store, speaker_id: str, *, since: str | None = None) -> list[SessionData]:
    """Every session of a speaker (started on or after ``since``, a ``YYYY-MM-DD`` date), oldest first."""
    from livevowel.session.store import check_speaker_id

    check_speaker_id(speaker_id)
    if store.speaker(speaker_id) is None:
        raise UserError(f"no speaker {speaker_id} in {store.folder or 'memory'}; "
                        "see 'livevowel sessions' for the speakers recorded")
    since = parse_since(since)
    rows = store.sessions(speaker_id=speaker_id)
    if since is not None:
        rows = [r for r in rows if (r.get("started_utc") or "") >= since]
    if not rows:
        raise UserError(f"speaker {speaker_id} has no sessions" + (f" since {since}" if since else ""))
    return [load_session(store, int(r["id"])) for r in rows]


@dataclass(frozen=True)
class TrendPoint:
    """Accuracy of one target in one session."""

    session_id: int
    started_utc: str
    trials: int
    hits: int

    @property
    def accuracy(self) -> float:
        return self.hits / self.trials if self.trials else float("nan")


def trend(sessions: Sequence[SessionData], *, by_set: bool = False) -> dict[tuple[str, str], list[TrendPoint]]:
    """Per target, its accuracy in each session that had trials of it (sessions in the given order).

    Keys are ``(target id, target set name)``; the set name is ``""`` unless
    ``by_set``, which keeps a target of one set apart from the same target
    id in another (their regions differ, so their accuracies do not join).
    """
    out: dict[tuple[str, str], list[TrendPoint]] = {}
    for sd in sessions:
        name = str(sd.session.get("target_set") or "") if by_set else ""
        for t in per_target(sd.attempts):
            if t.trials:
                out.setdefault((t.key, name), []).append(
                    TrendPoint(sd.id, sd.session.get("started_utc") or "", t.trials, t.hits))
    return out
