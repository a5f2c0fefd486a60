"""Device faults and the real capture path through the virtual microphone.

Device tests play a synthesised vowel into the virtual microphone (a null
sink of a private PulseAudio server, recorded through PortAudio's ALSA
"pulse" device) and check the measured formants against the synthesised
ones: Peterson & Barney (1952) men's means, from memory (/i/ 270, 2290 Hz;
/ɑ/ 730, 1090 Hz), within 10 %.
"""

from __future__ import annotations

import builtins
import sys
import time

import numpy as np
import pytest

import vmic
from livevowel.audio.devices import InputDevice, import_sounddevice, resolve_device
from livevowel.audio.pipeline import LivePipeline
from livevowel.dsp.engine import AnalysisSettings
from livevowel.dsp.synth import synthesize_vowel
from livevowel.dsp.types import FrameTrack
from livevowel.errors import UserError

PB_I = (270.0, 2290.0, 3010.0)   # Peterson & Barney (1952), men's /i/, from memory
PB_A = (730.0, 1090.0, 2440.0)   # Peterson & Barney (1952), men's /ɑ/, from memory
MALE = AnalysisSettings(voice="adult_male")


# --------------------------------------------------------------- no device needed
def test_missing_portaudio_names_the_system_package(monkeypatch):
    real_import = builtins.__import__

    def fake_import(name, *a, **kw):
        if name == "sounddevice":
            raise OSError("PortAudio library not found")
        return real_import(name, *a, **kw)

    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(builtins, "__import__", fake_import)
    with pytest.raises(UserError, match="libportaudio2") as info:
        import_sounddevice()
    assert "--source file:PATH" in str(info.value) and "--source demo" in str(info.value)


DEVS = [
    InputDevice(0, "USB Headset Mic", "ALSA", 1, 48000.0, False),
    InputDevice(3, "Built-in Microphone", "ALSA", 2, 44100.0, True),
    InputDevice(5, "USB Audio Interface", "ALSA", 8, 96000.0, False),
]


def test_device_chosen_by_index_part_of_name_or_default():
    assert resolve_device(None, DEVS).index == 3
    assert resolve_device("5", DEVS).name == "USB Audio Interface"
    assert resolve_device(0, DEVS).name == "USB Headset Mic"
    assert resolve_device("headset", DEVS).index == 0
    with pytest.raises(UserError, match="several"):
        resolve_device("usb", DEVS)
    with pytest.raises(UserError, match="index 7"):
        resolve_device("7", DEVS)
    with pytest.raises(UserError, match="livevowel devices"):
        resolve_device("bluetooth", DEVS)


def test_no_input_device_says_so_and_suggests_other_sources():
    with pytest.raises(UserError, match="no input device") as info:
        resolve_device(None, [])
    assert "--source file:PATH" in str(info.value) and "--source demo" in str(info.value)


# --------------------------------------------------------------- the real device
def _vowel(path, formants, seconds=1.5):
    import soundfile as sf

    x = synthesize_vowel(formants_hz=formants, f0_hz=120.0, duration_s=seconds, rate_hz=16000, peak_dbfs=-6.0)
    sf.write(str(path), x, 16000)


def _until(cond, timeout, what):
    t0 = time.monotonic()
    while not cond():
        if time.monotonic() - t0 > timeout:
            raise AssertionError(f"timed out after {timeout} s waiting for {what}")
        time.sleep(0.02)


class Consumer:
    """Drains a pipeline like a display would, keeping every frame."""

    def __init__(self, pipe):
        self.pipe, self.frames = pipe, []

    def poll(self):
        self.frames += self.pipe.drain()
        return self.frames

    def track(self):
        self.poll()
        return FrameTrack.from_frames(self.frames)


def _check_formants(track, formants, where):
    v = track.voiced & np.isfinite(track.f1_hz)
    assert v.sum() >= 50, f"{where}: only {v.sum()} voiced frames"
    assert np.nanmedian(track.f1_hz[v]) == pytest.approx(formants[0], rel=0.10), where
    assert np.nanmedian(track.f2_hz[v]) == pytest.approx(formants[1], rel=0.10), where


@pytest.mark.device
def test_microphone_records_a_vowel_played_into_the_device(tmp_path):
    vmic.require()
    from livevowel.audio.mic import MicrophoneSource

    _vowel(tmp_path / "i.wav", PB_I)
    src = MicrophoneSource(vmic.DEVICE)
    assert src.rate_hz == src.device.default_rate_hz
    pipe = LivePipeline(src, settings=MALE, record_to=tmp_path / "cap.wav")
    c = Consumer(pipe)
    pipe.start()
    try:
        _until(lambda: pipe.health().seconds > 1.2, 10, "the first second of input")
        player = vmic.play(tmp_path / "i.wav")
        _until(lambda: player.poll() is not None, 15, "paplay")
        assert player.returncode == 0, player.stderr.read()
        time.sleep(0.6)
        c.poll()
    finally:
        pipe.stop()
    h = pipe.health()
    _check_formants(c.track(), PB_I, "microphone /i/")
    assert h.state == "stopped" and h.overflows == 0 and h.dropped == 0 and h.dropped_blocks == 0
    assert h.noise_floor_db < -60 and h.floor_used
    assert h.snr_db > 30
    import soundfile as sf

    rec, rate = sf.read(str(tmp_path / "cap.wav"))
    assert rate == src.rate_hz and len(rec) / rate == pytest.approx(h.seconds, abs=0.05)
    assert np.max(np.abs(rec)) > 0.1


@pytest.mark.device
def test_overflow_from_the_device_callback_is_counted(tmp_path):
    vmic.require()
    import sounddevice as sd

    from livevowel.audio.mic import MicrophoneSource

    src = MicrophoneSource(vmic.DEVICE)
    pipe = LivePipeline(src, settings=MALE)
    pipe.start()
    try:
        _until(lambda: pipe.health().seconds > 0.1, 10, "input")
        flags = sd.CallbackFlags(2)  # paInputOverflow
        assert flags.input_overflow
        src._callback(np.zeros((src.blocksize, src._open_channels), np.float32), src.blocksize, None, flags)
        _until(lambda: pipe.health().overflows >= 1, 5, "the overflow count")
    finally:
        pipe.stop()
    assert src.overflows == 1 and pipe.health().overflows == 1 and pipe.error is None


@pytest.mark.device
def test_input_lost_mid_session_keeps_frames_and_resumes(tmp_path):
    vmic.require()
    from livevowel.audio.mic import MicrophoneSource

    _vowel(tmp_path / "i.wav", PB_I, 1.2)
    _vowel(tmp_path / "a.wav", PB_A, 1.2)
    src = MicrophoneSource(vmic.DEVICE, lost_after_s=0.5, retry_s=0.5)
    pipe = LivePipeline(src, settings=MALE)
    c = Consumer(pipe)
    pipe.start()
    try:
        _until(lambda: pipe.health().seconds > 1.2, 10, "the first second of input")
        p = vmic.play(tmp_path / "i.wav")
        _until(lambda: p.poll() is not None, 15, "paplay")
        time.sleep(0.5)
        before = list(c.poll())
        vmic.unplug()
        try:
            _until(lambda: pipe.health().state == "input lost", 5, "'input lost'")
            assert "input lost" in pipe.health().message
            time.sleep(1.0)
        finally:
            vmic.plug()
        _until(lambda: pipe.health().state == "listening", 10, "the input to come back")
        time.sleep(0.5)
        p = vmic.play(tmp_path / "a.wav")
        _until(lambda: p.poll() is not None, 15, "paplay")
        time.sleep(0.6)
        c.poll()
    finally:
        pipe.stop()
    track = c.track()
    assert c.frames[: len(before)] == before            # nothing measured before the loss was lost
    assert np.all(np.diff(track.time_s) > 0)            # time goes on across the gap
    gap = np.argmax(np.diff(track.time_s)) + 1
    assert track.time_s[gap] - track.time_s[gap - 1] > 0.9
    _check_formants(track[:gap], PB_I, "before the loss")
    _check_formants(track[gap:], PB_A, "after the device came back")
    assert pipe.error is None


@pytest.mark.device
def test_slow_consumer_in_the_callback_shows_as_lag(tmp_path):
    # The server buffers seconds of audio, so a callback that takes longer than
    # its block shows as delivery falling behind the clock, not as overflow.
    vmic.require()
    from livevowel.audio.mic import MicrophoneSource

    class SlowPipeline(LivePipeline):
        def on_block(self, block):
            time.sleep(block.duration_s * 1.5)
            super().on_block(block)

    src = MicrophoneSource(vmic.DEVICE)
    pipe = SlowPipeline(src, settings=MALE)
    pipe.start()
    try:
        _until(lambda: pipe.health().seconds > 0.2, 10, "input")
        time.sleep(3.0)
        h = pipe.health()
    finally:
        pipe.stop()
    assert h.lag_s > 0.5 or h.overflows > 0, h
    assert h.latency_s > h.lag_s


@pytest.mark.device
def test_guided_calibration_from_the_microphone(tmp_path, capsys):
    """`targets calibrate --listen` on the live microphone: the corner vowels of gae-men
    (Hillenbrand et al. 1995 men's means, as shipped) with every formant 15 % higher, played
    into the virtual microphone while it listens, must give back a factor of 1.15."""
    vmic.require()
    import threading

    import yaml
    from test_calibration import FACTOR, render

    from livevowel.cli import main

    take = tmp_path / "corners.wav"
    render(take, [("fleece", 0.5), ("lot", 0.5), ("goose", 0.5)], lead_s=0.5, gap_s=1.2)
    players = []
    timer = threading.Timer(1.5, lambda: players.append(vmic.play(take)))   # after the input has started
    timer.start()
    prof = tmp_path / "s40.yaml"
    try:
        rc = main(["targets", "calibrate", str(prof), "--speaker", "S40", "--group", "adult_female",
                   "--set", "gae-men", "--listen", "--takes", "1", "--wait", "20", "--device", vmic.DEVICE])
    finally:
        timer.cancel()
        for p in players:
            p.wait(timeout=15)
    out = capsys.readouterr().out
    assert rc == 0, out
    data = yaml.safe_load(prof.read_text())
    assert [t["vowel"] for t in data["tokens"]] == ["fleece", "lot", "goose"]
    assert data["transform"]["factors"]["f1"] == pytest.approx(FACTOR, rel=0.04)


def test_no_device_at_all_asks_after_the_sound_server():
    # PortAudio seeing nothing at all usually means no sound server (or none reachable)
    from types import SimpleNamespace as NS

    from livevowel.audio.devices import no_input_message

    class NoDevices:
        PortAudioError = RuntimeError

        @staticmethod
        def query_devices():
            return []

    msg = no_input_message(NoDevices)
    assert "sound server" in msg and "--source demo" in msg
    speakers = NS(PortAudioError=RuntimeError,
                  query_devices=lambda: [{"name": "HDMI", "max_input_channels": 0, "max_output_channels": 2}])
    assert "sound server" not in no_input_message(speakers) and "HDMI" in no_input_message(speakers)
