"""Free practice kept in the session record (``practice --save`` / ``--speaker``).

The speech is the project's Klatt (1980)-style synthesiser speaking steady
vowels at the centres of the ``gae-men`` set (Hillenbrand et al. 1995 men's
means, as shipped), so each attempt's right answer is known: a FLEECE vowel
said for the FLEECE target is a hit, a KIT vowel said for it is a miss that
sounds like KIT.
"""

import pytest
import soundfile as sf

from livevowel.cli import main
from livevowel.session.store import Store

RATE = 16000


def render(path, said, *, lead_s=1.2, vowel_s=0.35, gap_s=0.9):
    from livevowel.dsp.synth import Schedule, Segment, render as synth_render
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    segs = [Segment(duration_s=lead_s, kind="silent")]
    for vid in said:
        v = ts.get(vid)
        segs += [Segment(duration_s=vowel_s, kind="voiced", f0_start_hz=120.0, f0_end_hz=105.0,
                         formants_hz=(v.f1_hz, v.f2_hz, v.f3_hz)),
                 Segment(duration_s=gap_s, kind="silent")]
    x, _ = synth_render(Schedule(tuple(segs), voice="man"), rate_hz=RATE, seed=3, peak_dbfs=-6.0)
    sf.write(path, x, RATE, subtype="FLOAT")
    return x


@pytest.fixture(scope="module")
def take(tmp_path_factory):
    p = tmp_path_factory.mktemp("free") / "take.wav"
    render(p, ["fleece", "kit", "fleece"])
    return p


def test_recorded_free_practice_judges_each_attempt_against_the_screen_target(take, tmp_path, capsys, monkeypatch):
    from screens import capture_screens

    made = capture_screens(monkeypatch)
    data = tmp_path / "d"
    rc = main(["practice", "--targets", "gae-men", "--target", "fleece", "--speaker", "S21", "--headless",
               "--screenshot", str(tmp_path / "free.png"), "--source", f"file:{take}", "--pace", "0",
               "--data", str(data), "--no-tone", "--size", "640x400", "--note", "warm-up"])
    out = capsys.readouterr().out
    assert rc == 0 and (tmp_path / "free.png").exists()
    s = Store.open(data)
    sess = s.session(1)
    assert (sess["mode"], sess["speaker_id"], sess["target_set"], sess["drill"]) == ("free", "S21", "gae-men", None)
    rows = s.attempts(1)
    assert [(r["target_id"], r["auto_hit"], r["trial"], r["nearest_id"]) for r in rows] == [
        ("fleece", 1, 1, "fleece"), ("fleece", 0, 2, "kit"), ("fleece", 1, 3, "fleece")]
    assert all(r["clip"] for r in rows) and all(r["hold_s"] == pytest.approx(0.25) for r in rows)
    summ = s.summary(1)
    assert (summ.trials, summ.hits, summ.per_block) == (3, 2, ())
    assert [(t.key, t.trials, t.hits) for t in summ.per_target] == [("fleece", 3, 2)]
    assert "trials 3, hits 2" in out and "->fleece" in out and "sounded like kit" in out
    (scr,) = made
    # the header shows the record, and the pulses follow the recorded hits
    assert scr.counts() == (2, 3, 1, "saved")
    assert [(e.kind, e.target_id) for e in scr.events] == [("hit", "fleece"), ("miss", "fleece"), ("hit", "fleece")]
    # the sessions command lists it like a drill session; the export says it was free practice
    assert main(["sessions", "--data", str(data)]) == 0
    assert "S21" in capsys.readouterr().out
    assert main(["export", "1", "--data", str(data)]) == 0
    import csv
    import io

    table = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [(r["mode"], r["drill"], r["target_id"], r["result"]) for r in table] == [
        ("free", "", "fleece", "hit"), ("free", "", "fleece", "miss"), ("free", "", "fleece", "hit")]


def test_unrecorded_free_practice_writes_nothing(take, tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("LIVEVOWEL_DATA", str(tmp_path / "nowhere"))
    rc = main(["practice", "--targets", "gae-men", "--target", "fleece", "--headless", "--source", f"file:{take}",
               "--pace", "0", "--no-tone"])
    assert rc == 0 and "hits in 3 attempts" in capsys.readouterr().out
    assert not (tmp_path / "nowhere").exists()


def test_no_save_keeps_free_practice_in_memory(take, tmp_path, capsys):
    rc = main(["practice", "--targets", "gae-men", "--target", "fleece", "--save", "--no-save", "--headless",
               "--source", f"file:{take}", "--pace", "0", "--no-tone", "--data", str(tmp_path / "d")])
    captured = capsys.readouterr()
    assert rc == 0 and "trials 3, hits 2" in captured.out and "NOT SAVED" in captured.err
    assert not (tmp_path / "d").exists()


@pytest.mark.parametrize("switch_at,expect", [
    (None, ("fleece", True, "hit")),
    # during the vowel (0.3-0.65 s): saved, not judged
    (0.45, (None, None, "not judged: the target changed during the attempt")),
    # after the vowel ended but before the attempt closed (hangover): judged against the target it was said for
    (0.72, ("fleece", True, "hit")),
])
def test_the_target_while_the_attempt_lasted_is_the_one_judged(tmp_path, switch_at, expect):
    from livevowel.dsp.engine import AnalysisSettings, analyze
    from livevowel.session.free import FreeSession
    from livevowel.session.store import SessionRecorder
    from livevowel.targets import load_target_set

    x = render(tmp_path / "one.wav", ["fleece", "kit"], lead_s=0.3, gap_s=0.6)
    frames = list(analyze(x, RATE, settings=AnalysisSettings(voice="adult_male"), causal=True).frames)
    ts = load_target_set("gae-men")
    current = {"id": "fleece"}
    rec = SessionRecorder(memory_only=True)
    rec.start(mode="free", target_set=ts.id)
    sess = FreeSession(ts, rec, lambda: current["id"], hold_s=0.25)
    outs = []
    for k in range(0, len(frames), 4):            # 40 ms batches, as the live consumer drains them
        batch = frames[k:k + 4]
        if switch_at is not None and batch[0].time_s >= switch_at:
            current["id"] = "kit"
        outs += sess.add_frames(batch)
    outs += sess.end_of_input()
    first, second = outs
    assert (first.judgement.target_id, first.judgement.hit, first.judgement.reason) == expect
    assert (first.trial is None) == (expect[1] is None)
    # the KIT vowel (1.25-1.6 s) is judged against the target current then
    want = "kit" if switch_at is not None else "fleece"
    assert (second.judgement.target_id, second.judgement.hit) == (want, want == "kit")
    summ = sess.finish()
    assert summ.attempts == 2 and len(rec.store.attempts(rec.session_id)) == 2      # saved either way


def test_stopping_during_an_attempt_keeps_it_unjudged(tmp_path):
    from livevowel.dsp.engine import AnalysisSettings, analyze
    from livevowel.session.free import FreeSession
    from livevowel.session.store import SessionRecorder
    from livevowel.targets import load_target_set

    x = render(tmp_path / "two.wav", ["fleece", "fleece"], lead_s=0.3, gap_s=0.6)
    frames = list(analyze(x, RATE, settings=AnalysisSettings(voice="adult_male"), causal=True).frames)
    ts = load_target_set("gae-men")
    for stopped in (False, True):
        rec = SessionRecorder(memory_only=True)
        rec.start(mode="free", target_set=ts.id)
        sess = FreeSession(ts, rec, lambda: "fleece", hold_s=0.25)
        # the input stops at 1.45 s, inside the second vowel (1.25-1.6 s)
        sess.add_frames([f for f in frames if f.time_s < 1.45])
        summ = sess.finish(stopped=stopped)
        rows = rec.store.attempts(rec.session_id)
        assert [r["flags"] for r in rows] == ["", "stopped" if stopped else ""]
        assert summ.trials == (1 if stopped else 2) and rows[0]["auto_hit"] == 1


def test_the_loop_tells_an_ended_input_from_a_stopped_one(take):
    from livevowel.audio.paced import PacedFileSource
    from livevowel.ui.app import run_practice
    from livevowel.ui.screen import ScreenOptions

    from livevowel import config

    settings = config.load(config_file=None)
    for seconds, ended in ((None, True), (1.0, False)):
        _, res = run_practice(settings=settings, options=ScreenOptions(tone=False), targets="gae-men",
                              source=PacedFileSource(take, pace=0.0), headless=True, seconds=seconds, pace=0.0)
        assert res.input_ended is ended


def test_options_that_only_drills_take_are_refused(take, tmp_path, capsys):
    for extra in (["--coach"], ["--seed", "3"], ["--pause", "1"]):
        rc = main(["practice", "--targets", "gae-men", "--save", "--headless", "--source", f"file:{take}",
                   "--data", str(tmp_path / "d")] + extra)
        assert rc == 2 and "belongs to drills" in capsys.readouterr().err
    # a bad target is refused before the record is opened: no data folder is made
    rc = main(["practice", "--targets", "gae-men", "--target", "zzz", "--save", "--headless", "--source",
               f"file:{take}", "--data", str(tmp_path / "d")])
    assert rc == 2 and not (tmp_path / "d").exists()


def test_no_save_still_maps_with_the_profile_stored_with_the_speaker(take, tmp_path, capsys):
    from livevowel.profile import CalibrationToken, SpeakerProfile
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    tokens = [CalibrationToken(v, ts.get(v).f1_hz * 1.1, ts.get(v).f2_hz * 1.1) for v in ("fleece", "lot", "goose")]
    prof = SpeakerProfile.calibrate("S22", tokens, ts, voice_group="adult_male", method="nearey-shared")
    path = prof.save(tmp_path / "s22.yaml")
    data = tmp_path / "d"
    base = ["practice", "--targets", "gae-men", "--target", "fleece", "--headless", "--source", f"file:{take}",
            "--pace", "0", "--no-tone", "--data", str(data), "--quiet"]
    assert main(base + ["--profile", str(path)]) == 0          # stores the profile with the speaker
    capsys.readouterr()
    assert main(base + ["--speaker", "S22", "--no-save"]) == 0
    cap = capsys.readouterr()
    assert "profile stored in the record" in cap.err and "NOT SAVED" in cap.err
    assert [s["speaker_id"] for s in Store.open(data).sessions()] == ["S22"]     # nothing more written
