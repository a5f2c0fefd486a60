"""The session record: a local SQLite database plus a WAV clip per attempt.

Where
-----
The data folder is ``--data DIR`` when given, else the environment variable
``LIVEVOWEL_DATA``, else ``platformdirs.user_data_dir("livevowel")``
(:func:`data_dir`). It holds ``sessions.sqlite3`` (WAL mode) and
``clips/SSSSS/NNNN.wav`` (session number, attempt number). Speakers appear
only under a pseudonymous id of the user's choosing; local rules on
health-data privacy apply to this folder.

Durability
----------
Each attempt is written and committed as it happens (``synchronous=FULL``),
so a session killed mid-way loses at most the attempt in progress. Clips are
written atomically (temporary file, then rename) before the attempt row that
names them. A folder that cannot be written (read-only, disk full) does not
stop a session: :class:`SessionRecorder` carries on in an in-memory database
and says so (:attr:`SessionRecorder.warning`). A damaged database file is
never overwritten: opening it raises a :class:`~livevowel.errors.UserError`.

Schema (``PRAGMA user_version`` = :data:`SCHEMA_VERSION` = 2)
-------------------------------------------------------------
Times ``*_utc`` are ISO 8601 UTC text (``2026-01-31T14:05:09.123Z``);
``*_s`` are seconds of stream time (from the start of the input).

``speakers``
    ``id`` TEXT PRIMARY KEY -- pseudonymous id (e.g. ``S07``);
    ``voice_group`` TEXT -- adult_male, adult_female, child or NULL;
    ``profile_json`` TEXT -- the speaker profile used, as JSON, or NULL;
    ``created_utc`` TEXT.

``sessions``
    ``id`` INTEGER PRIMARY KEY -- the session number users see;
    ``speaker_id`` TEXT -> speakers.id (NULL: anonymous);
    ``started_utc``, ``ended_utc`` TEXT (``ended_utc`` NULL while running or
    when the session was killed); ``target_set`` TEXT (set id);
    ``drill`` TEXT (drill id, NULL for free practice); ``drill_file`` TEXT;
    ``mode`` TEXT (``self_paced``, ``coach`` or ``free``); ``source`` TEXT
    (input, e.g. ``file:take1.wav``); ``settings_json`` TEXT (effective
    settings and the drill's seeds, JSON); ``app_version`` TEXT; ``note`` TEXT.

``attempts`` (one row per attempt, flagged ones included)
    ``id`` INTEGER PRIMARY KEY; ``session_id`` -> sessions.id;
    ``number`` INTEGER (1, 2, ... within the session; unique per session);
    ``wall_utc`` TEXT; ``start_s``, ``end_s``, ``duration_s`` REAL;
    ``block_index`` INTEGER (0-based), ``block_id`` TEXT, ``trial`` INTEGER
    (1-based within the block; NULL when the attempt was not a trial, e.g.
    made between prompts or flagged); ``prompt`` TEXT; ``target_id`` TEXT;
    ``hit_size_sd`` REAL, ``hold_s`` REAL (the task at that trial);
    ``f1_hz``, ``f2_hz``, ``f3_hz``, ``f0_hz`` REAL (medians over the steady
    part; NULL = not measured); ``level_db``, ``peak_level_db`` REAL (dBFS);
    ``steady_start_s``, ``steady_end_s`` REAL, ``steady_method`` TEXT
    (``stable`` or ``middle``); ``measured_fraction`` REAL (0..1);
    ``flags`` TEXT (comma-separated, empty when none: too_short, too_quiet,
    clipped, unmeasured, cut);
    ``auto_hit`` INTEGER (1 hit, 0 miss, NULL not judged);
    ``closeness`` REAL (0..100); ``nearest_id`` TEXT (nearest target in the
    set: what it sounded like); ``nearest_distance`` REAL (Mahalanobis);
    ``time_in_target_s`` REAL; ``speaker_space`` INTEGER (1 when judged
    against the speaker's profile);
    ``override_hit`` INTEGER (the coach's 1/0, NULL when not overridden --
    stored beside ``auto_hit``, never over it); ``override_note`` TEXT;
    ``override_utc`` TEXT;
    ``counted`` INTEGER (1 counts toward accuracy; 0 excluded by the coach);
    ``track_json`` TEXT (the whole frame track: ``{"time_s": [...],
    "voiced": [...], "f0_hz": [...], ...}`` with null for NaN);
    ``clip`` TEXT (WAV path relative to the data folder, NULL when off).

    The judgement that counts is ``COALESCE(override_hit, auto_hit)``;
    accuracy is its mean over rows with ``trial IS NOT NULL AND counted = 1``
    and a judgement (:data:`RESULT_SQL`).

``events`` (what happened besides attempts)
    ``id`` INTEGER PRIMARY KEY; ``session_id`` -> sessions.id; ``wall_utc``;
    ``stream_s`` REAL; ``kind`` TEXT; ``block_index`` INTEGER;
    ``detail_json`` TEXT, by kind:
    ``block_start`` {block_id, order, seed (shuffled blocks, else null),
    hit_size_sd, hold_s, advance (the rule in words), length};
    ``block_end`` {block_id, trials, hits, criterion_met, skipped,
    hit_size_sd, hold_s (the task at the end)};
    ``adapt`` {direction (harder, easier or same), lever (hit_size, hold,
    item or null at the limits), from, to, accuracy (0..1)};
    ``drill_end`` {}; ``warning`` {message}; ``note`` {text}.

Version history: 1 -- speakers, sessions, attempts (no ``peak_level_db``,
``speaker_space``, ``override_utc``, ``counted``); 2 -- those columns and
the ``events`` table. :func:`migrate` brings any older file forward in one
transaction.
"""

from __future__ import annotations

import datetime as _dt
import io
import json
import math
import os
import sqlite3
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from livevowel import __version__
from livevowel.errors import UserError
from livevowel.fileio import PRIVATE_FILE_MODE, private_mkdir

SCHEMA_VERSION = 2
DB_NAME = "sessions.sqlite3"
CLIP_DIR = "clips"

#: SQL expression of the judgement that counts for an attempt row.
RESULT_SQL = "COALESCE(override_hit, auto_hit)"

_V1 = """
CREATE TABLE speakers (
    id TEXT PRIMARY KEY,
    voice_group TEXT,
    profile_json TEXT,
    created_utc TEXT NOT NULL
);
CREATE TABLE sessions (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    speaker_id TEXT REFERENCES speakers(id),
    started_utc TEXT NOT NULL,
    ended_utc TEXT,
    target_set TEXT,
    drill TEXT,
    drill_file TEXT,
    mode TEXT,
    source TEXT,
    settings_json TEXT,
    app_version TEXT NOT NULL,
    note TEXT
);
CREATE TABLE attempts (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    session_id INTEGER NOT NULL REFERENCES sessions(id),
    number INTEGER NOT NULL,
    wall_utc TEXT NOT NULL,
    start_s REAL NOT NULL,
    end_s REAL NOT NULL,
    duration_s REAL NOT NULL,
    block_index INTEGER,
    block_id TEXT,
    trial INTEGER,
    prompt TEXT,
    target_id TEXT,
    hit_size_sd REAL,
    hold_s REAL,
    f1_hz REAL,
    f2_hz REAL,
    f3_hz REAL,
    f0_hz REAL,
    level_db REAL,
    steady_start_s REAL,
    steady_end_s REAL,
    steady_method TEXT,
    measured_fraction REAL,
    flags TEXT NOT NULL DEFAULT '',
    auto_hit INTEGER,
    closeness REAL,
    nearest_id TEXT,
    nearest_distance REAL,
    time_in_target_s REAL,
    override_hit INTEGER,
    override_note TEXT,
    track_json TEXT,
    clip TEXT,
    UNIQUE (session_id, number)
);
CREATE INDEX attempts_session ON attempts(session_id);
"""

_V1_TO_V2 = """
ALTER TABLE attempts ADD COLUMN peak_level_db REAL;
ALTER TABLE attempts ADD COLUMN speaker_space INTEGER;
ALTER TABLE attempts ADD COLUMN override_utc TEXT;
ALTER TABLE attempts ADD COLUMN counted INTEGER NOT NULL DEFAULT 1;
CREATE TABLE events (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    session_id INTEGER NOT NULL REFERENCES sessions(id),
    wall_utc TEXT NOT NULL,
    stream_s REAL,
    kind TEXT NOT NULL,
    block_index INTEGER,
    detail_json TEXT
);
CREATE INDEX events_session ON events(session_id);
"""

#: Scripts that take the schema from version ``i`` to ``i + 1`` (index i).
MIGRATIONS: tuple[str, ...] = (_V1, _V1_TO_V2)
assert len(MIGRATIONS) == SCHEMA_VERSION

#: Columns of ``attempts`` a writer fills, in CSV/export order.
ATTEMPT_COLUMNS: tuple[str, ...] = (
    "number", "wall_utc", "start_s", "end_s", "duration_s",
    "block_index", "block_id", "trial", "prompt", "target_id", "hit_size_sd", "hold_s",
    "f1_hz", "f2_hz", "f3_hz", "f0_hz", "level_db", "peak_level_db",
    "steady_start_s", "steady_end_s", "steady_method", "measured_fraction", "flags",
    "auto_hit", "closeness", "nearest_id", "nearest_distance", "time_in_target_s", "speaker_space",
    "override_hit", "override_note", "override_utc", "counted", "clip", "track_json",
)


def utc_now() -> str:
    """The current time as ISO 8601 UTC text with milliseconds."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def data_dir(override: "str | os.PathLike | None" = None) -> Path:
    """The data folder: ``override``, else ``$LIVEVOWEL_DATA``, else the user data dir."""
    if override:
        return Path(override)
    env = os.environ.get("LIVEVOWEL_DATA")
    if env:
        return Path(env)
    from platformdirs import user_data_dir

    return Path(user_data_dir("livevowel"))


def _finite_or_none(x: Any) -> Any:
    if isinstance(x, (float, np.floating)):
        return float(x) if math.isfinite(x) else None
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, (np.bool_,)):
        return bool(x)
    return x


def track_to_json(track) -> str:
    """A :class:`~livevowel.dsp.types.FrameTrack` as compact JSON (null for NaN)."""
    out = {}
    for f in fields(track):
        arr = getattr(track, f.name)
        if f.name == "voiced":
            out[f.name] = [bool(v) for v in arr]
        else:
            out[f.name] = [None if not math.isfinite(v) else round(float(v), 4) for v in arr]
    return json.dumps(out, separators=(",", ":"))


def track_from_json(text: str):
    """Inverse of :func:`track_to_json`."""
    from livevowel.dsp.types import FrameTrack

    data = json.loads(text)
    cols = {}
    for f in fields(FrameTrack):
        vals = data.get(f.name, [])
        if f.name == "voiced":
            cols[f.name] = np.array(vals, dtype=bool)
        else:
            cols[f.name] = np.array([np.nan if v is None else v for v in vals], dtype=np.float64)
    return FrameTrack(**cols)


_WRITE_FAILURES = ("full", "readonly", "read-only", "unable to open", "disk i/o", "locked", "no space")


def _is_write_failure(exc: BaseException) -> bool:
    """True for errors of the disk or folder (full, read-only, gone), not of the data."""
    if isinstance(exc, OSError):
        return True
    return isinstance(exc, sqlite3.DatabaseError) and any(w in str(exc).lower() for w in _WRITE_FAILURES)


class Store:
    """One open session database (use :meth:`open`, or :meth:`memory`)."""

    def __init__(self, conn: sqlite3.Connection, path: Path | None, folder: Path | None) -> None:
        self.conn = conn
        self.path = path
        self.folder = folder

    # -- opening -----------------------------------------------------------------
    @classmethod
    def open(cls, folder: "str | os.PathLike | None" = None, *, create: bool = True) -> "Store":
        """Open (and create or migrate) the database in the data folder.

        Raises :class:`UserError` when the folder cannot be made or the file is
        damaged or from a newer livevowel; the file is never overwritten.
        With ``create=False`` a missing database raises UserError too.
        """
        folder = data_dir(folder)
        path = folder / DB_NAME
        if not path.exists():
            if not create:
                raise UserError(f"{folder}: no session record here yet; run a drill or practice first "
                                "(or pass --data DIR)")
            try:
                private_mkdir(folder)  # voices are personal data
                # the record itself readable by its owner only (sqlite gives its journal the same mode)
                os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, PRIVATE_FILE_MODE))
            except FileExistsError:
                pass
            except OSError as exc:
                raise UserError(f"{folder}: cannot create the data folder ({exc.strerror}); "
                                "pass --data DIR with a folder you can write") from None
        elif path.is_dir():
            raise UserError(f"{path}: is a folder, not a session database; move it aside")
        try:
            conn = sqlite3.connect(str(path), timeout=10.0, isolation_level=None)
        except sqlite3.Error as exc:
            raise UserError(f"{path}: cannot open the session database ({exc}); check the folder") from None
        store = cls(conn, path, folder)
        try:
            store._setup()
        except sqlite3.DatabaseError as exc:
            conn.close()
            msg = str(exc)
            if _is_write_failure(exc) and "not a database" not in msg and "malformed" not in msg:
                raise UserError(f"{path}: cannot write the session database ({msg}); "
                                "pass --data DIR with a folder you can write") from None
            raise UserError(f"{path}: is damaged or not a livevowel session database ({msg}); "
                            "it was left as it is: move it aside (or pass --data DIR) to start a new record") from None
        return store

    @classmethod
    def memory(cls) -> "Store":
        """A database that lives only in memory (lost at exit)."""
        conn = sqlite3.connect(":memory:", isolation_level=None)
        store = cls(conn, None, None)
        store._setup()
        return store

    def _setup(self) -> None:
        c = self.conn
        c.row_factory = sqlite3.Row
        version = c.execute("PRAGMA user_version").fetchone()[0]
        if version > SCHEMA_VERSION:
            raise UserError(f"{self.path}: written by a newer livevowel (schema {version}, this one knows "
                            f"{SCHEMA_VERSION}); upgrade livevowel to read it")
        if version == 0:
            # a new file must be empty; anything else is not ours
            n = c.execute("SELECT count(*) FROM sqlite_master").fetchone()[0]
            if n:
                raise sqlite3.DatabaseError("holds tables but no livevowel schema version")
        if self.path is not None:
            mode = c.execute("PRAGMA journal_mode=WAL").fetchone()[0]
            if str(mode).lower() != "wal":  # pragma: no cover - filesystems without shared memory
                pass
            c.execute("PRAGMA synchronous=FULL")
        c.execute("PRAGMA foreign_keys=ON")
        if version < SCHEMA_VERSION:
            migrate(c)
        else:
            res = c.execute("PRAGMA quick_check").fetchone()[0]
            if res != "ok":
                raise sqlite3.DatabaseError(f"database disk image is malformed ({res})")

    def close(self) -> None:
        """Close the connection (committed data is already on disk)."""
        self.conn.close()

    # -- writing -----------------------------------------------------------------
    def ensure_speaker(self, speaker_id: str, *, voice_group: str | None = None,
                       profile: Mapping | None = None) -> None:
        """Add the speaker if new; update voice group/profile when given."""
        check_speaker_id(speaker_id)
        c = self.conn
        row = c.execute("SELECT id FROM speakers WHERE id = ?", (speaker_id,)).fetchone()
        pj = json.dumps(profile, sort_keys=True) if profile is not None else None
        if row is None:
            c.execute("INSERT INTO speakers (id, voice_group, profile_json, created_utc) VALUES (?, ?, ?, ?)",
                      (speaker_id, voice_group, pj, utc_now()))
        else:
            if voice_group is not None:
                c.execute("UPDATE speakers SET voice_group = ? WHERE id = ?", (voice_group, speaker_id))
            if pj is not None:
                c.execute("UPDATE speakers SET profile_json = ? WHERE id = ?", (pj, speaker_id))

    def start_session(self, *, speaker_id: str | None = None, target_set: str | None = None,
                      drill: str | None = None, drill_file: str | None = None, mode: str = "free",
                      source: str | None = None, settings: Mapping | None = None,
                      note: str | None = None, started_utc: str | None = None,
                      session_id: int | None = None) -> int:
        """Create a session row; returns its number."""
        cur = self.conn.execute(
            "INSERT INTO sessions (id, speaker_id, started_utc, target_set, drill, drill_file, mode, source, "
            "settings_json, app_version, note) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (session_id, speaker_id, started_utc or utc_now(), target_set, drill, drill_file, mode, source,
             json.dumps(settings, sort_keys=True, default=str) if settings is not None else None,
             __version__, note))
        return int(cur.lastrowid)

    def end_session(self, session_id: int, *, ended_utc: str | None = None) -> None:
        """Stamp the end time of a session."""
        self.conn.execute("UPDATE sessions SET ended_utc = ? WHERE id = ?", (ended_utc or utc_now(), session_id))

    def add_attempt(self, session_id: int, row: Mapping[str, Any]) -> int:
        """Insert one attempt row (keys from :data:`ATTEMPT_COLUMNS`); returns its id."""
        unknown = set(row) - set(ATTEMPT_COLUMNS)
        if unknown:
            raise ValueError(f"unknown attempt columns: {sorted(unknown)}")
        row = {"wall_utc": utc_now(), **row}
        cols = ["session_id"] + [k for k in ATTEMPT_COLUMNS if k in row]
        vals = [session_id] + [_finite_or_none(row[k]) for k in cols[1:]]
        cur = self.conn.execute(
            f"INSERT INTO attempts ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})", vals)
        return int(cur.lastrowid)

    def set_override(self, session_id: int, number: int, *, hit: "bool | None | object" = ...,
                     note: str | None = None, counted: bool | None = None) -> None:
        """Store a coach's judgement beside the automatic one.

        ``hit`` True/False sets the override, ``None`` clears it (the automatic
        result counts again), left out keeps it; ``note`` replaces the note
        when given; ``counted=False`` excludes the attempt from the counts
        (``True`` takes it back in).
        """
        sets, vals = ["override_utc = ?"], [utc_now()]
        if hit is not ...:
            sets.append("override_hit = ?")
            vals.append(None if hit is None else int(bool(hit)))
        if note is not None:
            sets.append("override_note = ?")
            vals.append(note)
        if counted is not None:
            sets.append("counted = ?")
            vals.append(int(bool(counted)))
        cur = self.conn.execute(f"UPDATE attempts SET {', '.join(sets)} WHERE session_id = ? AND number = ?",
                                (*vals, session_id, number))
        if cur.rowcount != 1:
            raise UserError(f"session {session_id} has no attempt {number}")

    def add_event(self, session_id: int, kind: str, *, stream_s: float | None = None,
                  block_index: int | None = None, detail: Mapping | None = None,
                  wall_utc: str | None = None) -> None:
        """Record a block start/end, an adaptive change, a warning or a note."""
        self.conn.execute(
            "INSERT INTO events (session_id, wall_utc, stream_s, kind, block_index, detail_json) "
            "VALUES (?, ?, ?, ?, ?, ?)",
            (session_id, wall_utc or utc_now(), _finite_or_none(stream_s), kind, block_index,
             json.dumps(detail, sort_keys=True, default=str) if detail is not None else None))

    # -- reading -----------------------------------------------------------------
    def sessions(self, *, speaker_id: str | None = None) -> list[dict]:
        """Sessions with counts: list of dicts (session columns + trials, hits, attempts, and
        drill_finished: 1 where the drill ran to its end)."""
        q = (f"SELECT s.*, (SELECT count(*) FROM attempts a WHERE a.session_id = s.id) AS attempts, "
             f"(SELECT count(*) FROM attempts a WHERE a.session_id = s.id AND a.trial IS NOT NULL "
             f"AND a.counted = 1 AND {RESULT_SQL} IS NOT NULL) AS trials, "
             f"(SELECT count(*) FROM attempts a WHERE a.session_id = s.id AND a.trial IS NOT NULL "
             f"AND a.counted = 1 AND {RESULT_SQL} = 1) AS hits, "
             f"EXISTS (SELECT 1 FROM events e WHERE e.session_id = s.id AND e.kind = 'drill_end') AS drill_finished "
             f"FROM sessions s")
        args: tuple = ()
        if speaker_id is not None:
            q += " WHERE s.speaker_id = ?"
            args = (speaker_id,)
        return [dict(r) for r in self.conn.execute(q + " ORDER BY s.id", args)]

    def session(self, session_id: int) -> dict:
        """One session row as a dict; UserError when there is none."""
        row = self.conn.execute("SELECT * FROM sessions WHERE id = ?", (session_id,)).fetchone()
        if row is None:
            raise UserError(f"no session {session_id} in {self.folder or 'memory'}; "
                            "see 'livevowel sessions' for the numbers")
        return dict(row)

    def attempts(self, session_id: int) -> list[dict]:
        """Attempt rows of a session in order, as dicts."""
        return [dict(r) for r in self.conn.execute(
            "SELECT * FROM attempts WHERE session_id = ? ORDER BY number", (session_id,))]

    def events(self, session_id: int) -> list[dict]:
        """Event rows of a session in order, as dicts."""
        return [dict(r) for r in self.conn.execute(
            "SELECT * FROM events WHERE session_id = ? ORDER BY id", (session_id,))]

    def speaker(self, speaker_id: str) -> dict | None:
        row = self.conn.execute("SELECT * FROM speakers WHERE id = ?", (speaker_id,)).fetchone()
        return dict(row) if row is not None else None

    def summary(self, session_id: int) -> "SessionSummary":
        """Trials, hits and accuracy per target and per block."""
        return SessionSummary.from_rows(self.attempts(session_id))


def migrate(conn: sqlite3.Connection) -> int:
    """Bring a database forward to :data:`SCHEMA_VERSION` in one transaction; returns the old version."""
    old = conn.execute("PRAGMA user_version").fetchone()[0]
    if old >= SCHEMA_VERSION:
        return old
    conn.execute("BEGIN IMMEDIATE")
    try:
        for v in range(old, SCHEMA_VERSION):
            for stmt in MIGRATIONS[v].split(";"):
                if stmt.strip():
                    conn.execute(stmt)
        conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
        conn.execute("COMMIT")
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    return old


def check_speaker_id(speaker_id: str) -> str:
    """Validate a pseudonymous speaker id (letters, digits, ``-_.``, 1-40 chars, as profiles)."""
    import re

    if not isinstance(speaker_id, str) or not re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,39}", speaker_id):
        raise UserError(f"speaker id {speaker_id!r}: use 1-40 letters, digits, '-', '_' or '.' "
                        "(a pseudonym such as S07, never a name)")
    return speaker_id


# ---------------------------------------------------------------------------
# Summaries
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Tally:
    """Trials and hits of one group (target or block)."""

    key: str
    trials: int
    hits: int

    @property
    def accuracy(self) -> float:
        """Hits / trials (0..1), ``nan`` with no trials."""
        return self.hits / self.trials if self.trials else float("nan")


@dataclass(frozen=True)
class SessionSummary:
    """What a session amounted to."""

    attempts: int
    flagged: int
    trials: int
    hits: int
    per_target: tuple[Tally, ...]
    per_block: tuple[Tally, ...]

    @property
    def accuracy(self) -> float:
        return self.hits / self.trials if self.trials else float("nan")

    @classmethod
    def from_rows(cls, rows: Sequence[Mapping]) -> "SessionSummary":
        per_t: dict[str, list[int]] = {}
        per_b: dict[str, list[int]] = {}
        trials = hits = flagged = 0
        for r in rows:
            if r.get("flags"):
                flagged += 1
            res = r.get("override_hit")
            if res is None:
                res = r.get("auto_hit")
            if r.get("trial") is None or not r.get("counted", 1) or res is None:
                continue
            trials += 1
            hits += int(bool(res))
            t = per_t.setdefault(str(r.get("target_id")), [0, 0])
            t[0] += 1
            t[1] += int(bool(res))
            if r.get("block_id") is None:      # free practice: no blocks
                continue
            bkey = f"{(r.get('block_index') or 0) + 1}:{r.get('block_id')}"
            b = per_b.setdefault(bkey, [0, 0])
            b[0] += 1
            b[1] += int(bool(res))
        return cls(len(rows), flagged, trials, hits,
                   tuple(Tally(k, v[0], v[1]) for k, v in per_t.items()),
                   tuple(Tally(k, v[0], v[1]) for k, v in per_b.items()))

    def format(self) -> str:
        """A short plain-text table."""
        def pct(t: Tally) -> str:
            return "   -" if not t.trials else f"{100 * t.accuracy:3.0f}%"

        lines = [f"attempts {self.attempts} (flagged {self.flagged}), trials {self.trials}, hits {self.hits}, "
                 f"accuracy {'-' if not self.trials else f'{100 * self.accuracy:.0f}%'}"]
        if self.per_block:
            lines.append("per block:")
            lines += [f"  {t.key:<24} {t.hits:>3}/{t.trials:<3} {pct(t)}" for t in self.per_block]
        if self.per_target:
            lines.append("per target:")
            lines += [f"  {t.key:<24} {t.hits:>3}/{t.trials:<3} {pct(t)}" for t in self.per_target]
        return "\n".join(lines)


# ---------------------------------------------------------------------------
# The recorder: store + clips, carrying on in memory when the disk fails
# ---------------------------------------------------------------------------

def clip_path(session_id: int, number: int) -> str:
    """Clip location relative to the data folder."""
    return f"{CLIP_DIR}/{session_id:05d}/{number:04d}.wav"


def write_clip(path: Path, samples: np.ndarray, rate_hz: float) -> None:
    """Write a 16-bit PCM WAV clip atomically, readable by its owner only (a voice is personal data)."""
    import soundfile as sf

    from livevowel.fileio import write_bytes_atomic

    buf = io.BytesIO()
    sf.write(buf, np.asarray(samples, dtype=np.float32), int(round(rate_hz)), format="WAV", subtype="PCM_16")
    write_bytes_atomic(path, buf.getvalue(), permissions=PRIVATE_FILE_MODE)


class SessionRecorder:
    """Writes one session as it happens; falls back to memory if the disk fails.

    Parameters
    ----------
    folder : path or None, keyword-only
        Data folder (see :func:`data_dir`); ``None`` uses the default.
    clips : bool, keyword-only
        Save a WAV clip of each attempt.
    memory_only : bool, keyword-only
        Never touch the disk (an in-memory record).
    warn : callable, keyword-only
        Called with a one-line message when the record falls back to memory.

    After construction call :meth:`start`; then :meth:`attempt` per attempt,
    :meth:`event` for block changes, and :meth:`finish` at the end.
    """

    def __init__(self, *, folder: "str | os.PathLike | None" = None, clips: bool = True,
                 memory_only: bool = False, warn=None) -> None:
        self.clips = clips
        self.warning: str | None = None
        self._warn = warn
        self._log: list[tuple[str, tuple, dict]] = []   # replayed into memory on failure
        self.session_id: int | None = None
        if memory_only:
            self.store = Store.memory()
            self.warning = "session record kept in memory only (nothing is saved)"
        else:
            try:
                self.store = Store.open(folder)
            except UserError as exc:
                if "damaged" in str(exc) or "newer livevowel" in str(exc) or "is a folder" in str(exc):
                    raise
                self.store = Store.memory()
                self._fail(str(exc))

    @property
    def in_memory(self) -> bool:
        """True when nothing more is being saved to disk."""
        return self.store.path is None

    @property
    def folder(self) -> Path | None:
        return self.store.folder

    def _fail(self, reason: str) -> None:
        self.warning = (f"cannot save the session record: {reason}; "
                        "the session continues in memory and will be lost at exit")
        if self._warn is not None:
            self._warn(self.warning)

    def _do(self, name: str, *args, **kw):
        entry = (name, args, kw)
        self._log.append(entry)
        try:
            return getattr(self.store, name)(*args, **kw)
        except (sqlite3.Error, OSError) as exc:
            if self.in_memory or not _is_write_failure(exc):
                self._log.pop()
                raise
            self._fall_back(f"{self.store.path}: {exc}")   # replays the log, this call included
            return None
        except BaseException:
            self._log.pop()
            raise

    def _fall_back(self, reason: str) -> None:
        try:
            self.store.close()
        except sqlite3.Error:  # pragma: no cover
            pass
        self.store = Store.memory()
        self._fail(reason)
        for name, args, kw in self._log:
            getattr(self.store, name)(*args, **kw)

    def start(self, *, speaker_id: str | None = None, voice_group: str | None = None,
              profile: Mapping | None = None, **session: Any) -> int:
        """Record the speaker (if any) and open the session; returns its number."""
        if speaker_id is not None:
            check_speaker_id(speaker_id)
            self._do("ensure_speaker", speaker_id, voice_group=voice_group, profile=profile)
        session.setdefault("started_utc", utc_now())
        sid = self._do("start_session", speaker_id=speaker_id, **session)
        if sid is None:  # fell back to memory while inserting; the replay made it
            sid = int(self.store.conn.execute("SELECT max(id) FROM sessions").fetchone()[0])
        self.session_id = sid
        # pin the number so a replay into memory keeps it
        self._log[-1][2]["session_id"] = sid
        return sid

    def attempt(self, row: Mapping[str, Any], *, samples: np.ndarray | None = None,
                rate_hz: float | None = None) -> dict:
        """Save one attempt (and its clip); returns the row as stored."""
        if self.session_id is None:
            raise RuntimeError("SessionRecorder.start() first")
        row = dict(row)
        row.setdefault("wall_utc", utc_now())
        if self.clips and samples is not None and rate_hz and not self.in_memory:
            rel = clip_path(self.session_id, int(row["number"]))
            try:
                p = self.store.folder / rel
                private_mkdir(p.parent)
                write_clip(p, samples, rate_hz)
                row["clip"] = rel
            except (OSError, UserError) as exc:
                self.clips = False
                msg = f"cannot save audio clips in {self.store.folder} ({exc}); clips are off for this session"
                if self._warn is not None:
                    self._warn(msg)
                self._do("add_event", self.session_id, "warning", detail={"message": msg})
        self._do("add_attempt", self.session_id, row)
        return row

    def override(self, number: int, *, hit: "bool | None | object" = ..., note: str | None = None,
                 counted: bool | None = None) -> None:
        """A coach's judgement for attempt ``number`` (see :meth:`Store.set_override`)."""
        self._do("set_override", self.session_id, number, hit=hit, note=note, counted=counted)

    def event(self, kind: str, **kw: Any) -> None:
        """Record a session event (see :meth:`Store.add_event`)."""
        kw.setdefault("wall_utc", utc_now())
        self._do("add_event", self.session_id, kind, **kw)

    def finish(self) -> SessionSummary:
        """Stamp the end of the session and return its summary."""
        self._do("end_session", self.session_id, ended_utc=utc_now())
        return self.store.summary(self.session_id)

    def close(self) -> None:
        self.store.close()


def iter_attempt_rows(store: Store, session_id: int) -> Iterable[dict]:
    """Attempt rows of a session (for export)."""
    return store.attempts(session_id)
