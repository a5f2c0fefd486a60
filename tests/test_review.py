"""``livevowel review`` on synthesised recordings whose vowels are known.

The homework take is rendered with the Klatt (1980)-style synthesiser from
steady vowels at the centres of the shipped ``gae-men`` set (Hillenbrand et
al. 1995 men's means), separated by silence, so every attempt's place,
vowel and therefore judgement is known in advance. A silent file and a file
of white noise hold no speech at all.
"""

import contextlib
import csv
import io
import re

import numpy as np
import pytest
import soundfile as sf
import yaml

from livevowel.cli import main
from livevowel.session.store import DB_NAME, Store

RATE = 16000
LEAD_S, VOWEL_S, GAP_S = 0.8, 0.35, 0.6
SAID = ["fleece", "kit", "kit", "dress", "lot", "fleece"]
DRILL = {
    "drill": "homework-front", "title": "homework", "target_set": "gae-men", "pause_s": 0.3,
    "blocks": [
        {"id": "fk", "order": "contrast", "repetitions": 2, "hit_size_sd": 2.0,
         "items": [{"prompt": "beat", "target": "fleece"}, {"prompt": "bit", "target": "kit"}]},
        {"id": "dr", "repetitions": 2, "hit_size_sd": 2.0, "items": [{"prompt": "bet", "target": "dress"}]},
    ],
}
# prompts in order: fleece kit fleece kit | dress dress; said: fleece kit kit dress lot fleece
EXPECTED = [  # (target, auto_hit, nearest, block_index, trial)
    ("fleece", 1, "fleece", 0, 1), ("kit", 1, "kit", 0, 2), ("fleece", 0, "kit", 0, 3),
    ("kit", 0, "dress", 0, 4), ("dress", 0, "lot", 1, 1), ("dress", 0, "fleece", 1, 2),
]


def _render(said, seed=3):
    from livevowel.dsp.synth import Schedule, Segment, render
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    segs = [Segment(duration_s=LEAD_S, kind="silent")]
    onsets, t = [], LEAD_S
    for vid in said:
        v = ts.get(vid)
        segs += [Segment(duration_s=VOWEL_S, kind="voiced", f0_start_hz=120.0, f0_end_hz=105.0,
                         formants_hz=(v.f1_hz, v.f2_hz, v.f3_hz), label=vid),
                 Segment(duration_s=GAP_S, kind="silent")]
        onsets.append(t)
        t += VOWEL_S + GAP_S
    x, _ = render(Schedule(tuple(segs), voice="man"), rate_hz=RATE, seed=seed, peak_dbfs=-6.0)
    return x, onsets


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    base = tmp_path_factory.mktemp("review")
    x, onsets = _render(SAID)
    take = base / "take.wav"
    sf.write(take, x, RATE, subtype="PCM_16")
    silent = base / "silent.wav"
    sf.write(silent, np.zeros(2 * RATE), RATE, subtype="PCM_16")
    noise = base / "noise.wav"
    sf.write(noise, 0.02 * np.random.default_rng(1).standard_normal(2 * RATE), RATE, subtype="PCM_16")
    drill = base / "drill.yaml"
    drill.write_text(yaml.safe_dump(DRILL))
    return {"base": base, "take": take, "silent": silent, "noise": noise, "drill": drill, "x": x, "onsets": onsets}


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(argv)
    return rc, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def reviewed(files):
    data = files["base"] / "data"
    rc, out, err = _run(["review", str(files["take"]), "--targets", "gae-men", "--drill", str(files["drill"]),
                         "--speaker", "S21", "--data", str(data)])
    return {"data": data, "rc": rc, "out": out, "err": err}


def test_review_finds_and_judges_the_known_vowels(files, reviewed):
    assert reviewed["rc"] == 0, reviewed["err"]
    s = Store.open(reviewed["data"])
    sess = s.sessions()
    assert len(sess) == 1
    row = sess[0]
    assert row["mode"] == "review" and row["source"] == f"file:{files['take']}" and row["speaker_id"] == "S21"
    assert row["drill"] == "homework-front" and row["target_set"] == "gae-men" and row["ended_utc"]
    rows = s.attempts(row["id"])
    assert len(rows) == len(SAID)
    got = [(r["target_id"], r["auto_hit"], r["nearest_id"], r["block_index"], r["trial"]) for r in rows]
    assert got == EXPECTED
    for r, on in zip(rows, files["onsets"]):
        assert abs(r["start_s"] - on) < 0.06           # engine onset smear: a few 10 ms frames
        assert abs(r["duration_s"] - VOWEL_S) < 0.08
        assert (reviewed["data"] / r["clip"]).is_file()
    assert (row["trials"], row["hits"]) == (6, 2)
    assert "trials 6, hits 2, accuracy 33%" in reviewed["out"]


def test_review_equals_the_live_drill_run(files, reviewed, tmp_path):
    """--pacing self_paced gives the very rows the live path stores for the same file."""
    live = tmp_path / "live"
    rc, _, err = _run(["drill", str(files["drill"]), "--source", f"file:{files['take']}", "--pace", "0",
                       "--data", str(live), "--seed", "5", "--quiet"])
    assert rc == 0, err
    rev = tmp_path / "rev"
    rc, _, err = _run(["review", str(files["take"]), "--targets", "gae-men", "--drill", str(files["drill"]),
                       "--pacing", "self_paced", "--data", str(rev), "--seed", "5", "-q"])
    assert rc == 0, err
    a = Store.open(live).attempts(1)
    b = Store.open(rev).attempts(1)
    cols = ("number", "start_s", "end_s", "f1_hz", "f2_hz", "f3_hz", "f0_hz", "level_db", "flags", "trial",
            "target_id", "auto_hit", "closeness", "nearest_id", "steady_start_s", "steady_end_s", "track_json")
    assert len(a) == len(b) == len(SAID)
    for ra, rb in zip(a, b):
        assert {c: ra[c] for c in cols} == {c: rb[c] for c in cols}
        assert (live / ra["clip"]).read_bytes() == (rev / rb["clip"]).read_bytes()


def test_one_target_for_every_attempt(files):
    from livevowel.review import analyse_file, read_as_live, review_analysed, single_target_drill
    from livevowel.session.store import SessionRecorder
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    an = analyse_file(str(files["take"]))
    x, rate, _ = read_as_live(files["take"])
    assert rate == RATE and x.dtype == np.float32
    rec = SessionRecorder(memory_only=True)
    rec.start(target_set=ts.id, mode="review", source=f"file:{files['take']}")
    res = review_analysed(an, x, target_set=ts, recorder=rec, drill=single_target_drill("FLEECE", ts))
    assert [r["target_id"] for r in res.rows] == ["fleece"] * 6 and [r["trial"] for r in res.rows] == [1, 2, 3, 4, 5, 6]
    hits = [r["auto_hit"] for r in res.rows]
    # said fleece first and last (hits); dress and lot lie far outside the FLEECE region (misses)
    assert hits[0] == 1 and hits[5] == 1 and hits[3] == 0 and hits[4] == 0
    assert res.drill_done is False and res.after_drill == 0 and res.summary.trials == 6


def test_without_a_task_attempts_are_measured_not_judged(files, tmp_path):
    out_csv = tmp_path / "a.csv"
    rc, out, err = _run(["review", str(files["take"]), "--targets", "gae-men", "--no-store", "--csv", str(out_csv)])
    assert rc == 0, err
    rows = list(csv.DictReader(out_csv.open()))
    assert [r["nearest_id"] for r in rows] == SAID
    assert all(r["result"] == "" and r["auto_hit"] == "" and r["recording"] == str(files["take"]) for r in rows)
    assert not (tmp_path / DB_NAME).exists()


def test_csv_to_standard_output_is_only_csv(files):
    rc, out, err = _run(["review", str(files["take"]), "--targets", "gae-men", "--no-store", "--csv", "-"])
    assert rc == 0, err
    rows = list(csv.reader(io.StringIO(out)))
    assert len(rows) == 1 + len(SAID) and len({len(r) for r in rows}) == 1    # header + one row per attempt
    assert "attempts" in err                                                    # the summary went to stderr


def test_no_speech_is_reported_and_nothing_stored(files, tmp_path):
    data = tmp_path / "d"
    rc, out, err = _run(["review", str(files["silent"]), "--targets", "gae-men", "--data", str(data)])
    assert rc == 1
    assert "no speech found in 2.0 s (the file is silent); nothing stored" in err
    assert "Traceback" not in err
    assert Store.open(data).sessions() == []
    rc, out, err = _run(["review", str(files["noise"]), "--targets", "gae-men", "--no-store"])
    assert rc == 1 and "no speech found" in err


def test_folder_over_worker_processes(files, tmp_path):
    folder = tmp_path / "hw"
    folder.mkdir()
    (folder / "a-take.wav").write_bytes(files["take"].read_bytes())
    (folder / "b-silent.wav").write_bytes(files["silent"].read_bytes())
    (folder / "notes.txt").write_text("not audio")
    data = tmp_path / "d"
    rc, out, err = _run(["review", str(folder), "--targets", "gae-men", "--drill", str(files["drill"]),
                         "--speaker", "S22", "--data", str(data), "--jobs", "2"])
    assert rc == 1                                  # one file had no speech; the other is stored
    assert "reviewing 1/2" in err and "reviewing 2/2" in err and "b-silent.wav: no speech found" in err
    s = Store.open(data)
    sess = s.sessions()
    assert len(sess) == 1 and sess[0]["source"].endswith("a-take.wav") and sess[0]["mode"] == "review"
    assert [(r["target_id"], r["auto_hit"]) for r in s.attempts(sess[0]["id"])] == [e[:2] for e in EXPECTED]


def test_bad_options(files, tmp_path):
    rc, _, err = _run(["review", str(files["take"]), "--targets", "gae-men", "--drill", str(files["drill"]),
                       "--target", "kit", "--no-store"])
    assert rc == 2 and "not both" in err
    rc, _, err = _run(["review", str(files["take"]), "--targets", "no-such-set", "--no-store"])
    assert rc == 2 and "Traceback" not in err
    rc, _, err = _run(["review", str(files["take"]), "--targets", "gae-men", "--target", "zzz", "--no-store"])
    assert rc == 2 and "zzz" in err
    rc, _, err = _run(["review", str(tmp_path / "missing.wav"), "--targets", "gae-men", "--no-store"])
    assert rc == 1 and "no such file" in err


def test_a_reviewed_session_makes_a_report(files, reviewed, tmp_path):
    from livevowel.report import build_session_report

    s = Store.open(reviewed["data"])
    res = build_session_report(s, 1, tmp_path / "rep")
    text = res.html.read_text(encoding="utf-8")
    assert "reviewed from a recording" in text and "recording take.wav" in text
    assert str(files["base"]) not in text                    # the recording's folder is not shown
    assert res.clip_mode == "inline" and res.clips == len(SAID)
    summ = s.summary(1)
    for t in summ.per_target:                                 # the store's own summary, cell by cell
        assert re.search(rf'data-key="{t.key}">.*?class="n trials">{t.trials}<.*?class="n hits">{t.hits}<', text)
