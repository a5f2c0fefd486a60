"""A whole drill run end to end, on synthesised speech with known vowels.

The recording is rendered with the Klatt (1980)-style synthesiser from a
schedule of steady vowels at the centres of the ``gae-men`` set (Hillenbrand
et al. 1995 men's means, as shipped), separated by silence, so the right
answer is known for every attempt: where it is, which vowel it is, and
therefore whether it hits the prompt's target. It is played through the
paced-recording source (pace 0) and the live pipeline, as a user's
recording would be.
"""

import contextlib
import io
import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
import yaml

from livevowel.cli import main
from livevowel.session.store import DB_NAME, Store

RATE = 16000
LEAD_S = 1.2        # silence first: the live path measures the room's noise floor here
VOWEL_S = 0.35
GAP_S = 0.9

# (what is said, vowel duration): a prompt list and what the synthetic speaker says.
SAID = [("fleece", VOWEL_S), ("kit", VOWEL_S), ("kit", VOWEL_S), ("fleece", 0.07), ("kit", VOWEL_S),
        ("dress", VOWEL_S), ("lot", VOWEL_S)]

DRILL = {
    "drill": "test-front",
    "title": "test drill",
    "target_set": "gae-men",
    "pause_s": 0.3,
    "blocks": [
        {"id": "fk", "order": "contrast", "repetitions": 2, "hit_size_sd": 2.0,
         "items": [{"prompt": "beat", "target": "fleece"}, {"prompt": "bit", "target": "kit"}]},
        {"id": "dr", "repetitions": 2, "hit_size_sd": 2.0, "items": [{"prompt": "bet", "target": "dress"}]},
    ],
}
# Prompts in order: beat(fleece) bit(kit) beat(fleece) bit(kit) | bet(dress) bet(dress).
# Said: fleece -> hit; kit -> hit; kit for fleece -> miss (sounds like kit); a 70 ms fleece -> flagged
# too_short, not a trial (the prompt stays); kit -> hit; dress -> hit; lot for dress -> miss.
EXPECTED = [  # (target, auto_hit, trial, nearest, flags)
    ("fleece", 1, 1, "fleece", ""),
    ("kit", 1, 2, "kit", ""),
    ("fleece", 0, 3, "kit", ""),
    ("kit", None, None, None, "too_short"),
    ("kit", 1, 4, "kit", ""),
    ("dress", 1, 1, "dress", ""),
    ("dress", 0, 2, "lot", ""),
]


def render_recording(path: Path):
    from livevowel.dsp.synth import Schedule, Segment, render
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    segs = [Segment(duration_s=LEAD_S, kind="silent")]
    onsets = []
    t = LEAD_S
    for vid, dur in SAID:
        v = ts.get(vid)
        segs.append(Segment(duration_s=dur, kind="voiced", f0_start_hz=120.0, f0_end_hz=105.0,
                            formants_hz=(v.f1_hz, v.f2_hz, v.f3_hz), label=vid))
        segs.append(Segment(duration_s=GAP_S, kind="silent"))
        onsets.append((t, t + dur))
        t += dur + GAP_S
    x, truth = render(Schedule(tuple(segs), voice="man"), rate_hz=RATE, seed=7, peak_dbfs=-6.0)
    sf.write(path, x, RATE, subtype="FLOAT")
    return x, onsets


@pytest.fixture(scope="module")
def recorded(tmp_path_factory):
    """Render the recording, write the drill, run it once through the CLI."""
    base = tmp_path_factory.mktemp("drillrun")
    wav = base / "take.wav"
    x, onsets = render_recording(wav)
    short = base / "short.wav"       # the first two vowels only, for the runs that test failures
    n_short = int(round((LEAD_S + 2 * (VOWEL_S + GAP_S)) * RATE))
    sf.write(short, x[:n_short], RATE, subtype="FLOAT")
    one = base / "one.wav"           # the first vowel only
    sf.write(one, x[:int(round((LEAD_S + VOWEL_S + GAP_S) * RATE))], RATE, subtype="FLOAT")
    long = base / "long.wav"         # three times over, for the kill test
    sf.write(long, np.concatenate([x, x, x]), RATE, subtype="FLOAT")
    drill = base / "drill.yaml"
    drill.write_text(yaml.safe_dump(DRILL))
    data = base / "data"
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        rc = main(["drill", str(drill), "--speaker", "S11", "--source", f"file:{wav}", "--pace", "0",
                   "--data", str(data), "--seed", "5"])
    return {"base": base, "wav": wav, "short": short, "one": one, "long": long, "x": x, "onsets": onsets, "drill": drill,
            "data": data, "rc": rc, "out": out.getvalue()}


def test_attempts_found_at_the_right_times(recorded):
    assert recorded["rc"] == 0
    s = Store.open(recorded["data"])
    rows = s.attempts(1)
    assert len(rows) == len(SAID)
    for r, (on, off) in zip(rows, recorded["onsets"]):
        # the engine's voicing onset and hangover smear the edges by a few frames
        assert abs(r["start_s"] - on) < 0.06, (r["number"], r["start_s"], on)
        assert abs(r["end_s"] - off) < 0.08, (r["number"], r["end_s"], off)


def test_judgements_are_right(recorded):
    s = Store.open(recorded["data"])
    rows = s.attempts(1)
    got = [(r["target_id"], r["auto_hit"], r["trial"], r["nearest_id"] if r["auto_hit"] is not None else None,
            r["flags"]) for r in rows]
    assert got == EXPECTED
    for r in rows:
        if r["auto_hit"] == 1:
            assert r["closeness"] >= 50
        if r["auto_hit"] == 0:
            assert r["closeness"] < 50
    summ = s.summary(1)
    assert (summ.trials, summ.hits, summ.flagged) == (6, 4, 1)
    assert {t.key: (t.hits, t.trials) for t in summ.per_block} == {"1:fk": (3, 4), "2:dr": (1, 2)}
    sess = s.session(1)
    assert sess["speaker_id"] == "S11" and sess["drill"] == "test-front" and sess["ended_utc"]
    kinds = [e["kind"] for e in s.events(1)]
    assert kinds.count("block_start") == 2 and kinds.count("block_end") == 2 and kinds[-1] == "drill_end"


def test_measures_match_the_known_vowels(recorded):
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    s = Store.open(recorded["data"])
    for r, (vid, dur) in zip(s.attempts(1), SAID):
        if dur < 0.1:
            continue
        v = ts.get(vid)
        # within 10 % of the synthesised F1/F2 (the engine's accuracy is its own tests' business)
        assert abs(r["f1_hz"] - v.f1_hz) < 0.10 * v.f1_hz
        assert abs(r["f2_hz"] - v.f2_hz) < 0.10 * v.f2_hz
        assert abs(r["f0_hz"] - 112.5) < 10
        assert r["track_json"] and r["steady_end_s"] - r["steady_start_s"] >= 0.08


def test_clips_hold_the_attempt_audio(recorded):
    s = Store.open(recorded["data"])
    x = recorded["x"]
    for r in s.attempts(1):
        clip, rate = sf.read(recorded["data"] / r["clip"])
        assert rate == RATE
        t0 = max(0.0, r["start_s"] - 0.25)
        assert len(clip) == pytest.approx((r["end_s"] + 0.15 - t0) * RATE, abs=2)
        i = int(round(t0 * RATE))
        np.testing.assert_allclose(clip, x[i:i + len(clip)], atol=2.0 / 32768)


def test_sessions_and_export_commands(recorded, capsys, tmp_path):
    capsys.readouterr()
    assert main(["sessions", "--data", str(recorded["data"])]) == 0
    out = capsys.readouterr().out
    assert "S11" in out and "test-front" in out and "67%" in out
    csv_path = tmp_path / "s1.csv"
    assert main(["export", "1", "--csv", str(csv_path), "--data", str(recorded["data"])]) == 0
    import csv

    rows = list(csv.DictReader(csv_path.open()))
    assert len(rows) == len(SAID)
    assert [r["result"] for r in rows] == ["hit", "hit", "miss", "", "hit", "hit", "miss"]
    assert rows[3]["flags"] == "too_short" and rows[0]["speaker"] == "S11"


def test_each_attempt_and_the_summary_are_printed(recorded):
    out = recorded["out"]
    assert recorded["rc"] == 0
    lines = [ln for ln in out.splitlines() if ln.startswith("#")]
    assert len(lines) == len(SAID)
    assert "miss" in lines[2] and "sounded like kit" in lines[2] and "too_short" in lines[3]
    assert "trials 6, hits 4, accuracy 67%" in out
    assert "1:fk" in out and "3/4" in out and "fleece" in out and "session 1 finished" in out


def _prompts_come_before_their_answers(out: str) -> None:
    lines = [ln for ln in out.splitlines() if ln.startswith(("say ", "#"))]
    said = [ln for ln in lines if ln.startswith("say ")]
    judged = [ln for ln in lines if ln.startswith("#") and ("HIT" in ln or "miss" in ln)]
    assert len(said) >= len(judged) == 6
    for i, ln in enumerate(lines):
        if ln in judged:
            ask = next(a for a in reversed(lines[:i]) if a.startswith("say "))
            prompt = ask.split("'")[1]
            assert f"'{prompt}'->" in ln, (ask, ln)
            # and no later prompt came between the one answered and its result
            assert lines.index(ask) == max(j for j, a in enumerate(lines[:i]) if a.startswith("say ")), lines
    assert all(", trial " in a and "(block " in a for a in said)
    assert len(set(said)) == len(said)                     # each prompt once


def test_each_prompt_is_printed_before_the_attempt_that_answers_it(recorded):
    # a learner at a terminal must read what to say before saying it, not after the result
    _prompts_come_before_their_answers(recorded["out"])


def test_with_no_pause_the_next_prompt_still_follows_the_last_result(recorded):
    # with --pause 0 the next prompt is put at once, while the last result still waits for its
    # clip's tail: the prompt is held back until that result is printed
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        rc = main(["drill", str(recorded["drill"]), "--speaker", "S16", "--source", f"file:{recorded['wav']}",
                   "--pace", "0", "--pause", "0", "--no-save", "--seed", "5"])
    assert rc == 0
    _prompts_come_before_their_answers(out.getvalue())


def test_coach_override_is_stored_beside_the_automatic_result(recorded, tmp_path):
    from livevowel.dsp.engine import analyze
    from livevowel.session.drills import load_drill
    from livevowel.session.runner import DrillSession
    from livevowel.session.store import SessionRecorder
    from livevowel.targets import load_target_set

    x = recorded["x"][: int(round((LEAD_S + 3 * (VOWEL_S + GAP_S)) * RATE))]   # the first three vowels
    frames = list(analyze(x, RATE, causal=True).frames)
    rec = SessionRecorder(folder=tmp_path)
    rec.start(speaker_id="S12", target_set="gae-men", drill="test-front", mode="coach")
    sess = DrillSession(load_drill(recorded["drill"]), load_target_set("gae-men"), rec, mode="coach")
    sess.add_audio(x, start_s=0.0, rate_hz=RATE)
    out = []
    for k in range(0, len(frames), 7):
        out += sess.add_frames(frames[k:k + 7])
        if out and out[-1].trial is not None and sess.run.state == "result":
            sess.next()
    sess.override(3, hit=True, note="clear FLEECE to my ear")
    summ = sess.finish()
    rows = Store.open(tmp_path).attempts(1)
    assert len(rows) == 3
    r3 = rows[2]
    assert r3["auto_hit"] == 0 and r3["override_hit"] == 1 and r3["override_note"] == "clear FLEECE to my ear"
    assert summ.hits == 3 and summ.trials == 3
    assert sess.run.block_states[0].results[2].hit is True


def _drill_process(recorded, speaker, data, *, pace):
    """`livevowel drill` on the long recording in a child process (unbuffered text pipes)."""
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    return subprocess.Popen([sys.executable, "-m", "livevowel", "drill", str(recorded["drill"]), "--speaker", speaker,
                             "--source", f"file:{recorded['long']}", "--pace", str(pace), "--data", str(data)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def test_kill_mid_run_loses_nothing_committed(recorded, tmp_path):
    data = tmp_path / "killed"
    proc = _drill_process(recorded, "S13", data, pace=0)
    printed = []
    try:
        for line in proc.stdout:
            if line.startswith("#"):
                printed.append(line)
            if len(printed) >= 2:
                break
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    assert proc.returncode == -signal.SIGKILL and len(printed) == 2
    s = Store.open(data)
    rows = s.attempts(1)
    assert len(rows) >= 2 and [r["number"] for r in rows] == list(range(1, len(rows) + 1))
    assert [r["auto_hit"] for r in rows[:2]] == [1, 1]
    for r in rows:
        assert (data / r["clip"]).exists()
    assert s.session(1)["ended_utc"] is None
    assert not list(data.rglob("*.part"))


def test_sigterm_ends_the_session_like_ctrl_c(recorded, tmp_path, capsys):
    # a service manager's or kill's SIGTERM: the session is closed and stamped (not "cut off"),
    # and `sessions` lists it as an unfinished drill
    data = tmp_path / "termed"
    proc = _drill_process(recorded, "S14", data, pace=1)
    printed = []
    try:
        for line in proc.stdout:
            printed.append(line)
            if line.startswith("#"):
                break
        proc.send_signal(signal.SIGTERM)
        out, _ = proc.communicate(timeout=60)
    finally:
        proc.kill()
    assert proc.returncode == 128 + signal.SIGTERM, "".join(printed) + out      # 143: stopped by SIGTERM
    assert "stopped" in out
    s = Store.open(data)
    assert s.session(1)["ended_utc"] is not None and len(s.attempts(1)) >= 1
    capsys.readouterr()
    assert main(["sessions", "--data", str(data)]) == 0
    row = [ln for ln in capsys.readouterr().out.splitlines() if ln.strip().startswith("1 ")]
    assert len(row) == 1 and row[0].rstrip().endswith("unfinished")


def test_bad_drill_and_missing_target_via_cli(tmp_path, capsys, recorded):
    bad = tmp_path / "bad.yaml"
    d = yaml.safe_load(recorded["drill"].read_text())
    d["blocks"][1]["items"][0]["target"] = "caught"
    bad.write_text(yaml.safe_dump(d))
    rc = main(["drill", str(bad), "--source", f"file:{recorded['wav']}", "--pace", "0", "--data", str(tmp_path)])
    err = capsys.readouterr().err
    assert rc == 2 and "block 2 (dr) item 1: target 'caught' is not in set 'gae-men'" in err
    assert "Traceback" not in err
    bad.write_text("drill: x\ntarget_set: gae-men\nblocks:\n  - items: [{prompt: a}]\n")
    rc = main(["drill", str(bad), "--data", str(tmp_path)])
    assert rc == 2 and "block 1 (block1) item 1: the key 'target' is missing" in capsys.readouterr().err


def test_corrupt_database_stops_with_a_message_and_is_not_overwritten(tmp_path, capsys, recorded):
    (tmp_path / DB_NAME).write_bytes(b"\x00garbage" * 500)
    before = (tmp_path / DB_NAME).read_bytes()
    rc = main(["drill", str(recorded["drill"]), "--source", f"file:{recorded['wav']}", "--pace", "0",
               "--data", str(tmp_path)])
    err = capsys.readouterr().err
    assert rc == 2 and "damaged" in err and "move it aside" in err
    assert (tmp_path / DB_NAME).read_bytes() == before
    assert main(["sessions", "--data", str(tmp_path)]) == 2


def test_read_only_data_folder_continues_in_memory(capsys, recorded):
    target = Path("/sys/livevowel-drill-test")
    try:
        target.mkdir()
        target.rmdir()
        pytest.skip("/sys is writable here")
    except OSError:
        pass
    rc = main(["drill", str(recorded["drill"]), "--source", f"file:{recorded['one']}", "--pace", "0",
               "--data", str(target), "--quiet"])
    cap = capsys.readouterr()
    assert rc == 0
    assert "continues in memory" in cap.err and "NOT SAVED" in cap.err
    assert "trials 1, hits 1" in cap.out


def test_sessions_without_a_record(tmp_path, capsys):
    assert main(["sessions", "--data", str(tmp_path / "none")]) == 2
    assert "no session record here yet" in capsys.readouterr().err


def test_export_unknown_session(recorded, tmp_path, capsys):
    assert main(["export", "99", "--csv", str(tmp_path / "x.csv"), "--data", str(recorded["data"])]) == 2
    assert "no session 99" in capsys.readouterr().err
    assert not (tmp_path / "x.csv").exists()


def test_practice_drill_headless_stops_after_the_seconds_asked(tmp_path, capsys, recorded):
    args = ["practice", "--drill", str(recorded["drill"]), "--headless", "--source", f"file:{recorded['wav']}",
            "--pace", "0", "--data", str(tmp_path)]
    assert main(args) == 0
    whole = Store.open(tmp_path).attempts(1)
    assert main(args + ["--seconds", "2.5"]) == 0          # was ignored without --screenshot
    cut = Store.open(tmp_path).attempts(2)
    assert 0 < len(cut) < len(whole) and all(r["start_s"] < 2.5 for r in cut), (len(cut), len(whole))
    capsys.readouterr()


def test_practice_drill_headless_runs_without_a_screen_and_clips_can_be_off(tmp_path, capsys, recorded):
    rc = main(["practice", "--drill", str(recorded["drill"]), "--headless", "--source", f"file:{recorded['short']}",
               "--pace", "0", "--data", str(tmp_path), "--speaker", "S14", "--no-clips"])
    out = capsys.readouterr().out
    assert rc == 0 and "trials 2, hits 2" in out
    rows = Store.open(tmp_path).attempts(1)
    assert [r["auto_hit"] for r in rows] == [1, 1] and Store.open(tmp_path).session(1)["speaker_id"] == "S14"
    assert all(r["clip"] is None for r in rows) and not (tmp_path / "clips").exists()
    assert main(["practice", "--drill", str(recorded["drill"]), "--headless", "--coach", "--data", str(tmp_path)]) == 2


def test_practice_drill_on_the_screen(tmp_path, capsys, recorded):
    shot = tmp_path / "drill.png"
    rc = main(["practice", "--drill", str(recorded["drill"]), "--headless", "--screenshot", str(shot),
               "--source", f"file:{recorded['short']}", "--pace", "0", "--data", str(tmp_path / "d"),
               "--no-tone", "--size", "640x400"])
    out = capsys.readouterr().out
    assert rc == 0 and shot.exists()
    assert "trials 2, hits 2" in out
    rows = Store.open(tmp_path / "d").attempts(1)
    assert [r["target_id"] for r in rows] == ["fleece", "kit"] and all(r["clip"] for r in rows)


def test_drill_controller_follows_prompts_and_takes_coach_keys(tmp_path, recorded):
    from livevowel.session.drills import load_drill
    from livevowel.session.live import DrillController
    from livevowel.session.runner import DrillSession
    from livevowel.session.store import SessionRecorder
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    rec = SessionRecorder(folder=tmp_path)
    rec.start(mode="coach")
    sess = DrillSession(load_drill(recorded["drill"]), ts, rec, mode="coach")
    ctl = DrillController(sess, ts.targets)
    assert ctl.current.id == "fleece" and "say \u201cbeat\u201d" in ctl.label and "block 1/2 trial 1" in ctl.label
    sess.run.attempt(True, now_s=1.0)
    assert ctl.next() and ctl.current.id == "kit"
    assert ctl.previous() and ctl.current.id == "kit" and "trial 2" in ctl.label
    assert ctl.skip_block() and ctl.current.id == "dress"
    assert not ctl.select("lot")


def test_coach_judges_afterwards_beside_the_automatic_result(recorded, tmp_path, capsys):
    import shutil

    data = tmp_path / "copy"
    shutil.copytree(recorded["data"], data)
    assert main(["sessions", "1", "--attempt", "3", "--result", "hit", "--note", "fine by ear",
                 "--data", str(data)]) == 0
    s = Store.open(data)
    r = s.attempts(1)[2]
    assert (r["auto_hit"], r["override_hit"], r["override_note"]) == (0, 1, "fine by ear")
    assert s.summary(1).hits == 5
    assert main(["sessions", "1", "--attempt", "3", "--result", "exclude", "--data", str(data)]) == 0
    r = Store.open(data).attempts(1)[2]
    assert r["counted"] == 0 and r["override_hit"] == 1 and Store.open(data).summary(1).trials == 5
    from livevowel.cli.export import rows_for_csv   # the export says why it does not count

    assert rows_for_csv(Store.open(data), 1)[2]["result"] == "excluded"
    assert main(["sessions", "1", "--attempt", "3", "--result", "auto", "--data", str(data)]) == 0
    r = Store.open(data).attempts(1)[2]
    assert r["override_hit"] is None and r["override_note"] == "fine by ear" and r["auto_hit"] == 0
    capsys.readouterr()
    assert main(["sessions", "1", "--attempt", "99", "--result", "hit", "--data", str(data)]) == 2
    assert "no attempt 99" in capsys.readouterr().err


def test_judging_an_attempt_that_was_no_trial_says_the_counts_stay(recorded, tmp_path, capsys):
    import shutil
    import sqlite3

    data = tmp_path / "copy"
    shutil.copytree(recorded["data"], data)
    s = Store.open(data)
    db = s.path
    s.close()
    with sqlite3.connect(db) as conn:       # attempt 2 as one made outside a prompt
        conn.execute("UPDATE attempts SET trial = NULL WHERE session_id = 1 AND number = 2")
    before = Store.open(data).summary(1)
    capsys.readouterr()
    assert main(["sessions", "1", "--attempt", "2", "--result", "miss", "--data", str(data)]) == 0
    assert "was not a trial" in capsys.readouterr().out
    after = Store.open(data).summary(1)
    assert (after.trials, after.hits) == (before.trials, before.hits)
    assert Store.open(data).attempts(1)[1]["override_hit"] == 0            # the judgement is kept


def test_profile_is_stored_with_the_speaker_and_used_again(tmp_path, capsys, recorded):
    from livevowel.profile import CalibrationToken, SpeakerProfile
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    # a speaker whose formants are 10 % above the set's: measured vowels sit low in the mapped regions
    tokens = [CalibrationToken(v, ts.get(v).f1_hz * 1.1, ts.get(v).f2_hz * 1.1) for v in ("fleece", "lot", "goose")]
    prof = SpeakerProfile.calibrate("S15", tokens, ts, voice_group="adult_male", method="nearey-shared")
    path = prof.save(tmp_path / "s15.yaml")
    args = ["drill", str(recorded["drill"]), "--source", f"file:{recorded['one']}", "--pace", "0",
            "--data", str(tmp_path / "d"), "--quiet"]
    assert main(args + ["--profile", str(path)]) == 0
    assert main(args + ["--speaker", "S15"]) == 0
    assert "judging with the profile stored" in capsys.readouterr().err
    assert main(args + ["--speaker", "S15", "--no-profile"]) == 0
    s = Store.open(tmp_path / "d")
    assert [r["speaker_id"] for r in s.sessions()] == ["S15"] * 3
    assert [s.attempts(i)[0]["speaker_space"] for i in (1, 2, 3)] == [1, 1, 0]
    assert s.session(2)["target_set"] == "gae-men@S15" and s.session(3)["target_set"] == "gae-men"
    assert s.attempts(1)[0]["closeness"] == pytest.approx(s.attempts(2)[0]["closeness"])


def test_coach_led_on_the_screen_moves_on_with_the_arrow_key(tmp_path, recorded, monkeypatch, capsys):
    """The coach presses → after each attempt (posted as a key event when the attempt is saved)."""
    import pygame

    from livevowel.session.runner import DrillSession

    orig = DrillSession.__init__

    def init(self, *a, **kw):
        orig(self, *a, **kw)
        self.on_outcome = lambda oc: pygame.event.post(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_RIGHT,
                                                                          mod=0, unicode=""))

    monkeypatch.setattr(DrillSession, "__init__", init)
    rc = main(["practice", "--drill", str(recorded["drill"]), "--coach", "--headless", "--screenshot",
               str(tmp_path / "coach.png"), "--source", f"file:{recorded['short']}", "--pace", "0",
               "--data", str(tmp_path / "d"), "--no-tone", "--size", "640x400", "--quiet"])
    assert rc == 0
    s = Store.open(tmp_path / "d")
    rows = s.attempts(1)
    assert s.session(1)["mode"] == "coach"
    # without the key both attempts would be trials of the first prompt (FLEECE), the second a miss
    assert [(r["prompt"], r["target_id"], r["trial"], r["auto_hit"]) for r in rows] == [
        ("beat", "fleece", 1, 1), ("bit", "kit", 2, 1)]


def test_drill_screen_draws_counts_and_pulses_what_is_judged(tmp_path, recorded, monkeypatch, capsys):
    """After an adaptive change the region drawn is the one judged, and the header shows the record."""
    from screens import capture_screens

    made = capture_screens(monkeypatch)
    drill = dict(DRILL, blocks=[{
        "id": "fk", "order": "contrast", "repetitions": 2, "hit_size_sd": 2.0, "hold_s": 0.1,
        "items": [{"prompt": "beat", "target": "fleece"}, {"prompt": "bit", "target": "kit"}],
        # two hits in two trials: harder, hit size 2.0 -> 1.0
        "adapt": {"every": 2, "harder_at": 0.8, "easier_at": 0.2, "change": ["hit_size"], "hit_size_factor": 0.5,
                  "hit_size_range": [0.5, 3.0]}}])
    path = tmp_path / "adapt.yaml"
    path.write_text(yaml.safe_dump(drill))
    rc = main(["practice", "--drill", str(path), "--headless", "--screenshot", str(tmp_path / "a.png"),
               "--source", f"file:{recorded['short']}", "--pace", "0", "--data", str(tmp_path / "d"),
               "--no-tone", "--size", "640x400", "--quiet"])
    assert rc == 0 and (tmp_path / "a.png").exists()
    rows = Store.open(tmp_path / "d").attempts(1)
    assert [(r["target_id"], r["auto_hit"]) for r in rows] == [("fleece", 1), ("kit", 1)]
    (scr,) = made
    cur = scr.controller.current
    assert cur.id == "fleece"                          # trial 3 of the block is up
    assert scr.task() == (1.0, 0.1)                    # the adapted size and the block's hold
    assert scr.counter.hold_s == 0.1
    assert scr.counts() == (2, 2, 2, "block 1")        # the recorded trials, not the screen's own count
    # pulses follow the recorded results, at the size each was judged at (before the change)
    assert [(e.kind, e.target_id, e.size_sd) for e in scr.events] == [("hit", "fleece", 2.0), ("hit", "kit", 2.0)]

    def area(poly):                                    # shoelace formula
        x, y = poly[:, 0], poly[:, 1]
        return 0.5 * abs(np.dot(x, np.roll(y, 1)) - np.dot(y, np.roll(x, 1)))

    # an ellipse's area grows with the square of its size (the drawn 64-gon is inscribed the same way)
    drawn, own = area(scr.outline_of(cur)), area(np.asarray(cur.outline_hz(64)))
    assert drawn / own == pytest.approx((1.0 / cur.hit_size_sd) ** 2, rel=1e-9)
    # a vowel 1.4 SD from the centre: inside the set's region (1.5 SD) but not the task's (1.0 SD)
    from livevowel.dsp.types import Frame

    f1, f2 = (float(v) for v in cur.outline_hz(4, size_sd=1.4)[0])
    assert cur.contains(f1, f2)
    scr.feed([Frame(100.0 + 0.01 * k, True, 120.0, f1, f2, 3000.0, 60.0, 90.0, 150.0, -20.0, 1.0)
              for k in range(30)], now_s=1e6)
    assert [log[4] for log in list(scr.dot_log)[-30:]] == [False] * 30
    assert scr.counter.hold_progress == 0.0


def test_a_hit_nearer_another_centre_does_not_read_sounded_like():
    # a hit whose nearest region centre is another vowel's (inside the target's hit size, e.g.
    # after calibration) must not say it "sounded like" that vowel; a miss still does
    from types import SimpleNamespace as NS

    from livevowel.session.runner import Outcome

    att = NS(start_s=1.0, end_s=1.5, f1_hz=450.0, f2_hz=1100.0)
    prompt = NS(item=NS(prompt="who'd"), target="goose")
    for hit, want, not_want in ((True, "in range; nearest centre foot", "sounded like"),
                                (False, "sounded like foot", "in range")):
        j = NS(closeness=64.0, nearest_id="foot", target_id="goose", reason="hit" if hit else "outside")
        line = Outcome(1, att, j, prompt, NS(hit=hit)).line()
        assert want in line and not_want not in line, line
    j = NS(closeness=98.0, nearest_id="goose", target_id="goose", reason="hit")
    assert "sounded like goose" in Outcome(2, att, j, prompt, NS(hit=True)).line()
