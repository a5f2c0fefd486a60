"""``livevowel analyze`` run the way the README says, on good and bad input.

Every bad input must give either sensible output (unvoiced frames, a
warning) or a one-line error with a non-zero exit status -- never a
traceback, never a half-written output file.
"""

from __future__ import annotations

import csv
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from livevowel.dsp.synth import synthesize_vowel
from livevowel.dsp.types import FRAME_COLUMNS

# Peterson & Barney (1952) men's mean /ɑ/: F1 730, F2 1090, F3 2440 Hz (from memory).
PB_MEN_A = (730.0, 1090.0, 2440.0)


def run_cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "livevowel", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=300)


def vowel(rate=16000, seconds=0.6, f0=120.0):
    return synthesize_vowel(formants_hz=PB_MEN_A, f0_hz=f0, duration_s=seconds, rate_hz=rate, seed=3)


def read_table(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def voiced_medians(rows):
    v = [r for r in rows if r["voiced"] == "1" and r["f1_hz"]]
    return len(v), float(np.median([float(r["f1_hz"]) for r in v])), float(np.median([float(r["f2_hz"]) for r in v]))


def assert_clean_error(proc):
    assert proc.returncode != 0
    assert "Traceback" not in proc.stderr
    lines = [ln for ln in proc.stderr.strip().splitlines() if ln]
    assert lines and lines[-1].startswith("livevowel analyze: error:"), proc.stderr


def test_one_file_writes_the_documented_columns(tmp_path):
    sf.write(tmp_path / "a.wav", vowel(), 16000, subtype="PCM_16")
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", "--voice", "adult_male", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    rows = read_table(tmp_path / "a.csv")
    assert list(rows[0].keys()) == list(FRAME_COLUMNS)
    n, f1, f2 = voiced_medians(rows)
    assert n > 0.6 * len(rows)
    # within 5 % of the synthesised formants (the engine's own accuracy tests are tighter)
    assert abs(f1 - PB_MEN_A[0]) / PB_MEN_A[0] < 0.05
    assert abs(f2 - PB_MEN_A[1]) / PB_MEN_A[1] < 0.05
    assert "median F1" in proc.stdout


def test_json_to_stdout(tmp_path):
    sf.write(tmp_path / "a.wav", vowel(), 16000)
    proc = run_cli("analyze", "a.wav", "--frames", "-", "--format", "json", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["columns"] == list(FRAME_COLUMNS)
    assert len(doc["frames"]) > 40


def test_folder_gives_one_table_per_input(tmp_path):
    src = tmp_path / "homework"
    src.mkdir()
    for name in ("one", "two", "three"):
        sf.write(src / f"{name}.wav", vowel(seconds=0.4), 16000)
    (src / "notes.txt").write_text("not audio")
    proc = run_cli("analyze", "homework", "--frames", "tables", "--jobs", "2", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert sorted(p.name for p in (tmp_path / "tables").iterdir()) == ["one.csv", "three.csv", "two.csv"]


def test_causal_matches_the_live_path_columns(tmp_path):
    sf.write(tmp_path / "a.wav", vowel(), 16000)
    proc = run_cli("analyze", "a.wav", "--causal", "--frames", "c.csv", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert len(read_table(tmp_path / "c.csv")) > 40


@pytest.mark.parametrize("subtype", ["PCM_U8", "PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE"])
def test_every_sample_format_gives_the_same_vowel(tmp_path, subtype):
    x = 0.5 * vowel() / np.abs(vowel()).max()
    sf.write(tmp_path / "a.wav", x, 16000, subtype=subtype)
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", "-q", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    n, f1, f2 = voiced_medians(read_table(tmp_path / "a.csv"))
    assert n > 0 and abs(f1 - PB_MEN_A[0]) / PB_MEN_A[0] < 0.06


@pytest.mark.parametrize("rate", [8000, 44100, 96000])
def test_rates_from_telephone_to_96k(tmp_path, rate):
    sf.write(tmp_path / "a.wav", vowel(rate=rate), rate)
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", "-q", "--voice", "adult_male", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    n, f1, f2 = voiced_medians(read_table(tmp_path / "a.csv"))
    assert n > 0 and abs(f2 - PB_MEN_A[1]) / PB_MEN_A[1] < 0.06


def test_many_channels_are_downmixed(tmp_path):
    x = vowel()
    sf.write(tmp_path / "a.wav", np.column_stack([x, x, 0.5 * x, np.zeros_like(x), x, x]), 16000)
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", "-q", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    n, f1, _ = voiced_medians(read_table(tmp_path / "a.csv"))
    assert n > 0 and abs(f1 - PB_MEN_A[0]) / PB_MEN_A[0] < 0.06


def test_not_an_audio_file(tmp_path):
    (tmp_path / "a.wav").write_text("this is text, not sound\n")
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path)
    assert_clean_error(proc)
    assert "not an audio file" in proc.stderr
    assert not (tmp_path / "a.csv").exists()


def test_missing_file(tmp_path):
    assert_clean_error(run_cli("analyze", "nope.wav", cwd=tmp_path))


def test_empty_file(tmp_path):
    sf.write(tmp_path / "a.wav", np.zeros(0), 16000)
    proc = run_cli("analyze", "a.wav", cwd=tmp_path)
    assert_clean_error(proc)
    assert "no samples" in proc.stderr


def test_one_sample_file_gives_no_frames_not_a_crash(tmp_path):
    sf.write(tmp_path / "a.wav", np.array([0.1]), 16000)
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    assert all(r["voiced"] == "0" for r in read_table(tmp_path / "a.csv"))


def test_all_zeros_is_all_unvoiced_with_a_warning(tmp_path):
    sf.write(tmp_path / "a.wav", np.zeros(8000), 16000)
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    rows = read_table(tmp_path / "a.csv")
    assert rows and all(r["voiced"] == "0" and r["f1_hz"] == "" for r in rows)
    assert "silent" in proc.stderr


def test_nan_and_inf_samples_are_zeroed_with_a_warning(tmp_path):
    x = vowel()
    x[1000:1010] = np.nan
    x[5000] = np.inf
    sf.write(tmp_path / "a.wav", x, 16000, subtype="FLOAT")
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "not finite" in proc.stderr
    n, f1, _ = voiced_medians(read_table(tmp_path / "a.csv"))
    assert n > 0 and abs(f1 - PB_MEN_A[0]) / PB_MEN_A[0] < 0.06


def test_clipped_and_dc_offset_audio(tmp_path):
    x = vowel()
    x = np.clip(2.5 * x / np.abs(x).max(), -1, 1) * 0.8 + 0.15  # hard clipping plus DC offset
    sf.write(tmp_path / "a.wav", np.clip(x, -1, 1), 16000, subtype="PCM_16")
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    n, f1, _ = voiced_medians(read_table(tmp_path / "a.csv"))
    assert n > 0  # still voiced and measured; exact values degrade with clipping


def test_rate_out_of_range(tmp_path):
    sf.write(tmp_path / "a.wav", vowel(rate=16000), 4000)
    proc = run_cli("analyze", "a.wav", cwd=tmp_path)
    assert_clean_error(proc)
    assert "outside 8000-96000 Hz" in proc.stderr


def test_a_failed_run_leaves_no_partial_file(tmp_path):
    (tmp_path / "a.csv").write_text("earlier results\n")
    (tmp_path / "a.wav").write_text("not audio")
    assert_clean_error(run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path))
    assert (tmp_path / "a.csv").read_text() == "earlier results\n"
    assert not list(tmp_path.glob(".a.csv.*"))


def test_help_reads_like_a_unix_tool(tmp_path):
    top = run_cli("--help", cwd=tmp_path)
    assert top.returncode == 0 and "analyze" in top.stdout and "usage: livevowel" in top.stdout
    sub = run_cli("analyze", "--help", cwd=tmp_path)
    assert sub.returncode == 0 and "--causal" in sub.stdout and "examples:" in sub.stdout


def test_a_folder_input_always_writes_into_a_folder(tmp_path):
    (tmp_path / "one").mkdir()
    sf.write(tmp_path / "one" / "take.wav", vowel(seconds=0.4), 16000)
    sf.write(tmp_path / "solo.wav", vowel(seconds=0.4), 16000)
    (tmp_path / "existing").mkdir()
    # a folder holding one take, into a folder that does not exist yet
    proc = run_cli("analyze", "one", "--frames", "tables", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert [p.name for p in (tmp_path / "tables").iterdir()] == ["take.csv"]
    # one file into an existing folder, or into a name ending in '/': the table goes inside
    for out in ("existing", "fresh/"):
        proc = run_cli("analyze", "solo.wav", "--frames", out, cwd=tmp_path)
        assert proc.returncode == 0, proc.stderr
        assert [p.name for p in (tmp_path / out.rstrip("/")).iterdir()] == ["solo.csv"]


def test_tables_for_a_folder_into_a_file_is_a_one_line_error(tmp_path):
    (tmp_path / "one").mkdir()
    sf.write(tmp_path / "one" / "take.wav", vowel(seconds=0.4), 16000)
    (tmp_path / "notes.txt").write_text("keep me\n")
    proc = run_cli("analyze", "one", "--frames", "notes.txt", cwd=tmp_path)
    assert_clean_error(proc)
    assert "is a file" in proc.stderr
    assert (tmp_path / "notes.txt").read_text() == "keep me\n"


def test_summary_voiced_share_is_the_tables(tmp_path):
    x = np.concatenate([np.zeros(8000), vowel(seconds=0.8), np.zeros(8000)])
    sf.write(tmp_path / "a.wav", x, 16000)
    proc = run_cli("analyze", "a.wav", "--frames", "a.csv", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    rows = read_table(tmp_path / "a.csv")
    share = np.mean([r["voiced"] == "1" for r in rows])
    assert f"voiced {share:.0%}" in proc.stdout, (share, proc.stdout)


def test_each_problem_is_warned_about_once(tmp_path):
    x = vowel()
    clipped = np.clip(3.0 * x / np.abs(x).max(), -1, 1)
    sf.write(tmp_path / "clip.wav", clipped, 16000, subtype="FLOAT")
    sf.write(tmp_path / "zero.wav", np.zeros(8000), 16000)
    for name, word in (("clip.wav", "full scale"), ("zero.wav", "silen")):
        proc = run_cli("analyze", name, cwd=tmp_path)
        assert proc.returncode == 0, proc.stderr
        warnings = [ln for ln in proc.stderr.splitlines() if ": warning:" in ln]
        assert len(warnings) == 1 and word in warnings[0], proc.stderr


def test_dc_offset_and_cancelling_channels_are_named(tmp_path):
    x = vowel()
    sf.write(tmp_path / "dc.wav", 0.5 * x + 0.3, 16000, subtype="FLOAT")
    proc = run_cli("analyze", "dc.wav", cwd=tmp_path)
    assert proc.returncode == 0 and "DC offset of 0.30" in proc.stderr, proc.stderr
    sf.write(tmp_path / "inv.wav", np.column_stack([x, -x]), 16000, subtype="FLOAT")
    proc = run_cli("analyze", "inv.wav", cwd=tmp_path)
    assert proc.returncode == 0 and "channels cancel" in proc.stderr, proc.stderr
