"""The session record: schema, migration, durability, failures."""

import json
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from livevowel.errors import UserError
from livevowel.session import store as st


def row(number, **kw):
    r = {"number": number, "start_s": 1.0 * number, "end_s": 1.0 * number + 0.3, "duration_s": 0.3,
         "block_index": 0, "block_id": "b1", "trial": number, "prompt": "beat", "target_id": "FLEECE",
         "f1_hz": 300.0, "f2_hz": 2300.0, "f3_hz": float("nan"), "f0_hz": 120.0, "level_db": -20.0,
         "flags": "", "auto_hit": 1, "closeness": 88.0, "nearest_id": "FLEECE"}
    r.update(kw)
    return r


def test_new_database_is_wal_and_current_version(tmp_path):
    s = st.Store.open(tmp_path / "d")
    assert (tmp_path / "d" / st.DB_NAME).exists()
    assert s.conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert s.conn.execute("PRAGMA user_version").fetchone()[0] == st.SCHEMA_VERSION
    s.close()


def test_data_dir_precedence(tmp_path, monkeypatch):
    monkeypatch.setenv("LIVEVOWEL_DATA", str(tmp_path / "env"))
    assert st.data_dir() == tmp_path / "env"
    assert st.data_dir(tmp_path / "opt") == tmp_path / "opt"
    monkeypatch.delenv("LIVEVOWEL_DATA")
    assert st.data_dir().name == "livevowel"


def test_round_trip_override_beside_auto_and_summary(tmp_path):
    s = st.Store.open(tmp_path)
    s.ensure_speaker("S07", voice_group="adult_female")
    sid = s.start_session(speaker_id="S07", target_set="set", drill="d", mode="coach", settings={"a": 1})
    s.add_attempt(sid, row(1, auto_hit=1))
    s.add_attempt(sid, row(2, auto_hit=0, target_id="KIT"))
    s.add_attempt(sid, row(3, auto_hit=None, trial=None, flags="too_short"))
    s.set_override(sid, 2, hit=True, note="fine by ear")
    rows = s.attempts(sid)
    assert rows[1]["auto_hit"] == 0 and rows[1]["override_hit"] == 1 and rows[1]["override_note"] == "fine by ear"
    assert rows[0]["f3_hz"] is None  # NaN stored as NULL
    summ = s.summary(sid)
    assert (summ.trials, summ.hits, summ.flagged, summ.attempts) == (2, 2, 1, 3)
    assert {t.key: (t.hits, t.trials) for t in summ.per_target} == {"FLEECE": (1, 1), "KIT": (1, 1)}
    s.set_override(sid, 2, hit=None)  # back to the automatic result
    assert s.summary(sid).hits == 1
    with pytest.raises(UserError, match="no attempt 9"):
        s.set_override(sid, 9, hit=True)
    listed = s.sessions()
    assert listed[0]["trials"] == 2 and listed[0]["hits"] == 1 and listed[0]["speaker_id"] == "S07"


def test_track_json_round_trip():
    from livevowel.dsp.types import FrameTrack

    t = FrameTrack(time_s=[0.005, 0.015], voiced=[True, False], f0_hz=[120, np.nan], f1_hz=[300, np.nan],
                   f2_hz=[2300, np.nan], f3_hz=[np.nan, np.nan], b1_hz=[50, 60], b2_hz=[70, 80], b3_hz=[1, 2],
                   level_db=[-20, -70], confidence=[0.9, 0])
    back = st.track_from_json(st.track_to_json(t))
    np.testing.assert_array_equal(back.voiced, t.voiced)
    np.testing.assert_allclose(back.f1_hz, t.f1_hz, equal_nan=True)


def test_migration_from_v1_keeps_rows(tmp_path):
    path = tmp_path / st.DB_NAME
    conn = sqlite3.connect(path)
    conn.executescript(st.MIGRATIONS[0])
    conn.execute("PRAGMA user_version = 1")
    conn.execute("INSERT INTO sessions (started_utc, app_version, drill) VALUES ('2025-01-01T00:00:00Z', '0.0.1', 'old')")
    conn.execute("INSERT INTO attempts (session_id, number, wall_utc, start_s, end_s, duration_s, auto_hit, trial, "
                 "target_id) VALUES (1, 1, 'x', 0, 1, 1, 1, 1, 'FLEECE')")
    conn.commit()
    conn.close()
    s = st.Store.open(tmp_path)
    assert s.conn.execute("PRAGMA user_version").fetchone()[0] == st.SCHEMA_VERSION
    rows = s.attempts(1)
    assert rows[0]["counted"] == 1 and rows[0]["override_utc"] is None and rows[0]["target_id"] == "FLEECE"
    s.add_event(1, "note", detail={"text": "after migration"})
    assert s.events(1)[0]["kind"] == "note"
    assert s.summary(1).hits == 1


def test_newer_schema_is_refused(tmp_path):
    conn = sqlite3.connect(tmp_path / st.DB_NAME)
    conn.execute("PRAGMA user_version = 99")
    conn.close()
    with pytest.raises(UserError, match="newer livevowel"):
        st.Store.open(tmp_path)


def test_corrupt_database_is_reported_and_left_alone(tmp_path):
    path = tmp_path / st.DB_NAME
    junk = b"this is not a database at all " * 200
    path.write_bytes(junk)
    with pytest.raises(UserError, match="damaged"):
        st.Store.open(tmp_path)
    with pytest.raises(UserError, match="damaged"):
        st.SessionRecorder(folder=tmp_path)
    assert path.read_bytes() == junk


def test_foreign_sqlite_file_is_not_taken_over(tmp_path):
    conn = sqlite3.connect(tmp_path / st.DB_NAME)
    conn.execute("CREATE TABLE other (x)")
    conn.commit()
    conn.close()
    with pytest.raises(UserError, match="not a livevowel"):
        st.Store.open(tmp_path)


def test_recorder_writes_clips_atomically_and_rows(tmp_path):
    rec = st.SessionRecorder(folder=tmp_path)
    sid = rec.start(speaker_id="S01", target_set="set", mode="self_paced")
    x = 0.3 * np.sin(2 * np.pi * 200 * np.arange(1600) / 16000)
    stored = rec.attempt(row(1), samples=x, rate_hz=16000)
    assert stored["clip"] == st.clip_path(sid, 1)
    data, rate = sf.read(tmp_path / stored["clip"])
    assert rate == 16000 and len(data) == 1600 and np.max(np.abs(data - x)) < 1e-4
    assert not list((tmp_path / "clips").rglob("*.part"))
    rec.finish()
    s = st.Store.open(tmp_path)
    assert s.session(sid)["ended_utc"] is not None
    assert s.attempts(sid)[0]["clip"] == stored["clip"]


def test_new_data_folder_and_clips_are_private_to_their_owner(tmp_path):
    import stat

    folder = tmp_path / "record"
    rec = st.SessionRecorder(folder=folder)
    rec.start(speaker_id="S01", target_set="set", mode="self_paced")
    stored = rec.attempt(row(1), samples=np.zeros(1600), rate_hz=16000)
    rec.finish()
    assert stat.S_IMODE(folder.stat().st_mode) == 0o700
    assert stat.S_IMODE((folder / stored["clip"]).stat().st_mode) == 0o600
    # the database and every folder on the way to a clip, too (they were 644 and 755)
    assert stat.S_IMODE((folder / st.DB_NAME).stat().st_mode) == 0o600
    clip_dirs = list((folder / stored["clip"]).relative_to(folder).parents)[:-1]
    assert clip_dirs and all(stat.S_IMODE((folder / d).stat().st_mode) == 0o700 for d in clip_dirs)


def test_clips_can_be_turned_off(tmp_path):
    rec = st.SessionRecorder(folder=tmp_path, clips=False)
    rec.start()
    stored = rec.attempt(row(1), samples=np.zeros(100), rate_hz=16000)
    assert "clip" not in stored and not (tmp_path / "clips").exists()


def test_disk_full_mid_session_continues_in_memory(tmp_path):
    warnings = []
    rec = st.SessionRecorder(folder=tmp_path, warn=warnings.append)
    sid = rec.start(speaker_id="S02", target_set="set")
    rec.attempt(row(1))
    rec.attempt(row(2))
    # the database may not grow any more: SQLite reports SQLITE_FULL ("database or disk is full")
    pages = rec.store.conn.execute("PRAGMA page_count").fetchone()[0]
    rec.store.conn.execute(f"PRAGMA max_page_count = {pages}")
    rec.attempt(row(3, track_json=json.dumps(list(range(20000)))))
    assert rec.in_memory
    assert warnings and "continues in memory" in warnings[0] and "full" in warnings[0]
    rec.attempt(row(4))
    rec.override(1, hit=False, note="heard as KIT")
    with pytest.raises(UserError, match="no attempt 9"):
        rec.override(9, hit=True)
    summ = rec.finish()
    assert summ.attempts == 4 and summ.trials == 4 and summ.hits == 3
    r1 = rec.store.attempts(sid)[0]
    assert (r1["auto_hit"], r1["override_hit"], r1["override_note"]) == (1, 0, "heard as KIT")
    # what was committed before the failure is still on disk
    disk = st.Store.open(tmp_path)
    assert [r["number"] for r in disk.attempts(sid)] == [1, 2]


def test_unwritable_data_folder_continues_in_memory(tmp_path):
    # /sys is a read-only filesystem even for root
    target = Path("/sys/livevowel-test-data")
    if os.access("/sys", os.W_OK) and not target.exists():
        try:
            target.mkdir()
            target.rmdir()
            pytest.skip("/sys is writable here")
        except OSError:
            pass
    warnings = []
    rec = st.SessionRecorder(folder=target, warn=warnings.append)
    assert rec.in_memory and "continues in memory" in rec.warning
    rec.start(speaker_id="S03")
    rec.attempt(row(1), samples=np.zeros(100), rate_hz=16000)
    assert rec.finish().trials == 1
    assert warnings


def test_bad_speaker_id():
    with pytest.raises(UserError, match="pseudonym"):
        st.check_speaker_id("Jane Doe")


KILL_SCRIPT = textwrap.dedent("""
    import sys, time
    import numpy as np
    from livevowel.session.store import SessionRecorder
    rec = SessionRecorder(folder=sys.argv[1])
    rec.start(speaker_id="S09", target_set="set")
    n = 0
    while True:
        n += 1
        rec.attempt({"number": n, "start_s": n, "end_s": n + 0.3, "duration_s": 0.3, "trial": n,
                     "auto_hit": n % 2, "target_id": "FLEECE"}, samples=np.zeros(800) + 0.1, rate_hz=16000)
        print(n, flush=True)
        time.sleep(0.01)
""")


def test_sigkill_loses_at_most_the_attempt_in_progress(tmp_path):
    proc = subprocess.Popen([sys.executable, "-c", KILL_SCRIPT, str(tmp_path)], stdout=subprocess.PIPE,
                            text=True)
    seen = 0
    try:
        for line in proc.stdout:
            seen = int(line)
            if seen >= 8:
                break
    finally:
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
    assert proc.returncode == -signal.SIGKILL
    s = st.Store.open(tmp_path)
    rows = s.attempts(1)
    numbers = [r["number"] for r in rows]
    assert numbers == list(range(1, len(numbers) + 1))
    assert len(numbers) >= seen  # everything reported as committed is there
    for r in rows:
        assert (tmp_path / r["clip"]).exists()
        assert len(sf.read(tmp_path / r["clip"])[0]) == 800
    assert s.session(1)["ended_utc"] is None


def test_damage_inside_the_file_is_found_and_left_alone(tmp_path):
    s = st.Store.open(tmp_path)
    sid = s.start_session()
    for i in range(1, 200):
        s.add_attempt(sid, row(i, track_json="x" * 2000))
    s.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    s.close()
    path = tmp_path / st.DB_NAME
    data = bytearray(path.read_bytes())
    page = 4096
    assert len(data) > 20 * page
    data[10 * page:10 * page + 600] = b"\xff" * 600   # a page in the middle of the attempts table
    path.write_bytes(bytes(data))
    with pytest.raises(UserError, match="damaged"):
        st.Store.open(tmp_path)
    assert path.read_bytes() == bytes(data)


def test_clip_that_cannot_be_written_turns_clips_off_and_keeps_the_rows(tmp_path):
    warnings = []
    rec = st.SessionRecorder(folder=tmp_path, warn=warnings.append)
    sid = rec.start()
    (tmp_path / "clips").write_text("in the way")      # the clips folder cannot be made
    stored = rec.attempt(row(1), samples=np.zeros(800), rate_hz=16000)
    rec.attempt(row(2), samples=np.zeros(800), rate_hz=16000)
    assert "clip" not in stored and not rec.clips and len(warnings) == 1 and "clips are off" in warnings[0]
    assert not rec.in_memory
    s = st.Store.open(tmp_path)
    assert [r["number"] for r in s.attempts(sid)] == [1, 2]
    assert [e["kind"] for e in s.events(sid)] == ["warning"]
