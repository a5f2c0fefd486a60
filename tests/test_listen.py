"""`livevowel listen`: the terminal view of the live path, its files and its errors.

Reference values: frames must equal the offline causal analysis of the same
file (the engine's contract), to the precision of the CSV (0.1 Hz, 1 ms,
0.1 dB); vowel formants are Peterson & Barney (1952) men's means, from
memory (/ɑ/ 730, 1090 Hz; /i/ 270, 2290 Hz), within 10 %.
"""

from __future__ import annotations

import csv
import os
import subprocess
import sys
import time

import numpy as np
import pytest
import soundfile as sf

import vmic
from livevowel import config
from livevowel.audio.pipeline import LivePipeline
from livevowel.cli import main
from livevowel.dsp.engine import AnalysisSettings, analyze
from livevowel.dsp.synth import synthesize_vowel
from livevowel.dsp.types import FRAME_COLUMNS
from livevowel.framesio import read_frames_csv

PB_A = (730.0, 1090.0, 2440.0)   # Peterson & Barney (1952), men's /ɑ/, from memory
PB_I = (270.0, 2290.0, 3010.0)   # Peterson & Barney (1952), men's /i/, from memory
RATE = 16000


def _file(path, formants=PB_A, seconds=1.2, lead_s=0.3):
    x = synthesize_vowel(formants_hz=formants, f0_hz=120.0, duration_s=seconds, rate_hz=RATE)
    y = np.concatenate([np.zeros(int(lead_s * RATE)), x, np.zeros(int(0.2 * RATE))])
    sf.write(str(path), y, RATE, subtype="FLOAT")
    return y


def test_listen_file_source_writes_frames_and_audio(tmp_path, capsys):
    y = _file(tmp_path / "a.wav")
    out_csv, out_wav = tmp_path / "f.csv", tmp_path / "r.wav"
    rc = main(["listen", "--source", f"file:{tmp_path / 'a.wav'}", "--pace", "0",
               "--frames", str(out_csv), "--record", str(out_wav)])
    assert rc == 0
    cap = capsys.readouterr()
    lines = [ln for ln in cap.out.splitlines() if ln.strip()]
    assert lines and all("\r" not in ln for ln in lines)          # not a terminal: plain lines
    assert "F1" in lines[-1] and "level" in lines[-1]
    assert "frames written" in cap.err and "audio written" in cap.err
    with open(out_csv, newline="") as fh:
        header = next(csv.reader(fh))
    assert tuple(header) == FRAME_COLUMNS
    got = read_frames_csv(out_csv)
    ref = analyze(y.astype(np.float32), RATE, settings=AnalysisSettings.from_config(config.load()),
                  causal=True).frames
    assert len(got) == len(ref)
    np.testing.assert_array_equal(got.voiced, ref.voiced)
    np.testing.assert_allclose(got.time_s, ref.time_s, atol=5e-4)
    for name in ("f0_hz", "f1_hz", "f2_hz", "f3_hz"):
        # the table leaves the readings the engine holds through unvoiced gaps empty
        want = np.where(ref.voiced, getattr(ref, name), np.nan)
        np.testing.assert_allclose(getattr(got, name), want, atol=0.051, equal_nan=True)
        assert np.array_equal(np.isnan(getattr(got, name)), np.isnan(want))
    v = got.voiced
    assert np.nanmedian(got.f1_hz[v]) == pytest.approx(PB_A[0], rel=0.1)
    back, rate = sf.read(str(out_wav))
    assert rate == RATE and len(back) == len(y)


def test_listen_seconds_stops_early(tmp_path, capsys):
    _file(tmp_path / "a.wav", seconds=2.0)
    out_csv = tmp_path / "f.csv"
    assert main(["listen", "--source", f"file:{tmp_path / 'a.wav'}", "--pace", "0", "--seconds", "0.8",
                 "--frames", str(out_csv)]) == 0
    got = read_frames_csv(out_csv)
    assert len(got) > 50 and got.time_s.max() <= 0.8


def test_listen_ctrl_c_ends_cleanly_with_files_written(tmp_path, capsys, monkeypatch):
    _file(tmp_path / "a.wav", seconds=3.0)
    calls = {"n": 0}
    real = LivePipeline.health

    def health(self):
        calls["n"] += 1
        if calls["n"] == 15:          # about 0.75 s into the session
            raise KeyboardInterrupt
        return real(self)

    monkeypatch.setattr(LivePipeline, "health", health)
    out_csv, out_wav = tmp_path / "f.csv", tmp_path / "r.wav"
    rc = main(["listen", "--source", f"file:{tmp_path / 'a.wav'}", "--frames", str(out_csv),
               "--record", str(out_wav)])
    assert rc == 0
    assert "stopped:" in capsys.readouterr().err
    got = read_frames_csv(out_csv)
    assert 20 < len(got) < 300
    rec, _ = sf.read(str(out_wav))
    assert 0.3 < len(rec) / RATE < 3.0


def test_listen_interrupt_signal_writes_files(tmp_path):
    import signal

    out_csv, out_wav = tmp_path / "f.csv", tmp_path / "r.wav"
    cmd = [sys.executable, "-m", "livevowel", "listen", "--source", "demo", "--frames", str(out_csv),
           "--record", str(out_wav)]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        t0 = time.monotonic()
        while time.monotonic() - t0 < 30:          # wait until it is listening
            if "listening" in proc.stdout.readline():
                break
        time.sleep(1.0)
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, err
    assert "stopped:" in err
    got = read_frames_csv(out_csv)
    rec, rate = sf.read(str(out_wav))
    assert len(got) > 50 and len(rec) / rate > 0.5
    assert abs(len(rec) / rate - (got.time_s.max() + 0.0125)) < 0.1


@pytest.mark.parametrize("argv, message", [
    (["--source", "speaker"], "unknown --source"),
    (["--source", "file:/no/such.wav"], "no such file"),
    (["--source", "demo", "--frames", "/no/such/folder/f.csv"], "does not exist"),
    (["--source", "demo", "--seconds", "0"], "--seconds"),
    (["--source", "demo", "--device", "3"], "--source mic only"),
])
def test_listen_bad_input_is_one_line_error(argv, message, capsys):
    assert main(["listen", *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and len(err.splitlines()) == 1 and "Traceback" not in err


def test_listen_demo_source_runs(tmp_path, capsys):
    out_csv = tmp_path / "f.csv"
    assert main(["listen", "--source", "demo", "--pace", "0", "--seconds", "3", "--frames", str(out_csv)]) == 0
    got = read_frames_csv(out_csv)
    assert got.voiced.sum() > 50


@pytest.mark.device
def test_listen_command_through_the_virtual_microphone(tmp_path):
    vmic.require()
    x = synthesize_vowel(formants_hz=PB_A, f0_hz=120.0, duration_s=1.5, rate_hz=RATE)
    sf.write(str(tmp_path / "a.wav"), x, RATE)
    out_csv, out_wav = tmp_path / "f.csv", tmp_path / "r.wav"
    cfg = tmp_path / "mine.yaml"   # a fixed voice halves the engine's work on a shared test machine
    cfg.write_text("analysis:\n  voice: adult_male\n", encoding="utf-8")
    cmd = [sys.executable, "-m", "livevowel", "listen", "--device", vmic.DEVICE, "--seconds", "5",
           "--frames", str(out_csv), "--record", str(out_wav), "--config", str(cfg)]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=dict(os.environ))
    try:
        first = []
        t0 = time.monotonic()
        while time.monotonic() - t0 < 20:        # wait for the stream to be open and delivering
            line = proc.stdout.readline()
            first.append(line)
            if "listening" in line or not line:
                break
        assert "listening" in first[-1], "".join(first)
        time.sleep(1.0)
        player = vmic.play(tmp_path / "a.wav")
        assert player.wait(15) == 0
        out, err = proc.communicate(timeout=30)
        out = "".join(first) + out
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, err
    assert "listening" in out and "F2" in out
    got = read_frames_csv(out_csv)
    v = got.voiced & np.isfinite(got.f1_hz)
    assert v.sum() >= 50
    assert np.nanmedian(got.f1_hz[v]) == pytest.approx(PB_A[0], rel=0.10)
    assert np.nanmedian(got.f2_hz[v]) == pytest.approx(PB_A[1], rel=0.10)
    rec, rate = sf.read(str(out_wav))
    assert rate >= 16000 and 4.0 < len(rec) / rate < 6.0
