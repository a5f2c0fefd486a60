"""The display loop, first-start caution, hit tone and the practice command."""

import os

import numpy as np
import pytest

pygame = pytest.importorskip("pygame")

from livevowel import CAUTION  # noqa: E402
from livevowel.dsp.types import Frame  # noqa: E402
from livevowel.errors import UserError  # noqa: E402
from livevowel.targets import load_target_set  # noqa: E402
from livevowel.ui import loop  # noqa: E402
from livevowel.ui.screen import PracticeScreen, ScreenOptions  # noqa: E402
from livevowel.ui.sound import HitTone, tone_samples  # noqa: E402


class FramesPipeline:
    """Test double of LivePipeline: hands out prepared frames, a few per drain."""

    def __init__(self, frames, per_drain=3):
        self.frames = list(frames)
        self.per_drain = per_drain
        self.started = self.stopped = False
        self.paused = False

    def start(self):
        self.started = True

    def stop(self):
        self.stopped = True

    def drain(self):
        out, self.frames = self.frames[:self.per_drain], self.frames[self.per_drain:]
        return out

    def health(self):
        return None

    @property
    def done(self):
        return not self.frames


def frames_at(target, n, t0=0.0):
    return [Frame(t0 + i * 0.01, True, 120.0, target.f1_hz, target.f2_hz, 2500.0, 80, 100, 150, -20.0, 0.9)
            for i in range(n)]


@pytest.fixture
def tset():
    return load_target_set("gae-men")


def test_windowed_run_on_an_invisible_driver_says_how_to_run_headless(capsys, monkeypatch):
    # SDL's dummy driver with no --headless: a window nobody can see waits for keys nobody can press
    monkeypatch.setenv("SDL_VIDEODRIVER", "dummy")
    monkeypatch.setattr(loop, "_noted_invisible", [])
    loop.init_display(headless=False)
    err = capsys.readouterr().err
    assert "SDL_VIDEODRIVER=dummy" in err and "--headless" in err and err.count("\n") == 1
    loop.init_display(headless=False)               # a run starts the display twice: one note
    loop.init_display(headless=True)                # asked for: no note
    assert capsys.readouterr().err == ""


def test_caution_is_shown_once_per_user(tset, tmp_path):
    assert os.environ["LIVEVOWEL_DATA"].startswith(str(tmp_path))  # conftest isolates the data folder
    assert loop.caution_needed()
    loop.init_display(headless=False)  # dummy video driver in tests, but the windowed code path
    s = PracticeScreen(tset, options=ScreenOptions(fps=240))
    s.controller.select("lot")
    pipe = FramesPipeline(frames_at(tset.get("lot"), 40))
    # run() puts the caution up and holds the input back until a key is pressed (a
    # Space that reached the screen instead would pause it: no hit, no marker)
    pygame.event.post(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_SPACE, unicode=" ", mod=0))
    r = loop.run(s, pipe, headless=False, keep_open=False)
    assert pipe.started and s.caution_text is None and s.counter.hits == 1 and r.frames == 40
    assert not loop.caution_needed()
    assert (tmp_path / "user-data" / loop.CAUTION_MARKER).is_file()
    assert CAUTION in (tmp_path / "user-data" / loop.CAUTION_MARKER).read_text(encoding="utf-8")
    s2 = PracticeScreen(tset, options=ScreenOptions(fps=240))
    s2.controller.select("lot")
    loop.run(s2, FramesPipeline(frames_at(tset.get("lot"), 40)), headless=False, keep_open=False)
    assert s2.caution_text is None and s2.counter.hits == 1


def test_headless_loop_feeds_frames_and_saves_screenshot(tset, tmp_path):
    s = PracticeScreen(tset, options=ScreenOptions(fps=240))
    s.controller.select("lot")
    pipe = FramesPipeline(frames_at(tset.get("lot"), 100))
    shot = tmp_path / "shot.png"
    r = loop.run(s, pipe, headless=True, seconds=0.6, screenshot=shot)
    assert pipe.started and pipe.stopped
    assert 0.6 <= r.input_s < 0.7 and r.frames == pytest.approx(61, abs=3)  # stopped at --seconds
    assert s.counter.hits == 1 and s.caution_text is None  # headless never shows the caution
    img = pygame.image.load(str(shot))
    assert img.get_size() == (1280, 800)
    with pytest.raises(UserError, match="PNG"):
        loop.save_screenshot(img, tmp_path / "shot.jpg")


def test_hit_tone_is_quiet_short_and_off_without_audio():
    s = tone_samples(rate_hz=44100, volume=0.15)
    assert s.dtype == np.int16
    assert len(s) == round(0.14 * 44100)
    assert np.max(np.abs(s)) == pytest.approx(0.15 * 32767, abs=2)  # about -16.5 dBFS peak
    assert abs(int(s[0])) < 50 and abs(int(s[-1])) < 50           # ramped ends, no click
    with pytest.raises(ValueError):
        tone_samples(volume=0.9)
    assert os.environ.get("SDL_AUDIODRIVER") == "dummy"
    assert not HitTone(enabled=True).enabled


def test_practice_command_on_a_recording(tmp_path):
    sf = pytest.importorskip("soundfile")
    from livevowel.cli import main
    from livevowel.dsp.synth import synthesize_vowel

    lot = load_target_set("gae-men").get("lot")
    x = synthesize_vowel(formants_hz=(lot.f1_hz, lot.f2_hz, 2500.0), f0_hz=110.0, duration_s=1.2, rate_hz=16000,
                         seed=1)
    wav = tmp_path / "lot.wav"
    sf.write(wav, np.concatenate([np.zeros(4000), x, np.zeros(4000)]), 16000)
    shot = tmp_path / "p.png"
    code = main(["practice", "--targets", "gae-men", "--target", "lot", "--source", f"file:{wav}", "--pace", "0",
                 "--headless", "--screenshot", str(shot), "--no-tone"])
    assert code == 0 and shot.is_file()


def test_practice_command_names_an_unknown_target(capsys):
    from livevowel.cli import main

    assert main(["practice", "--targets", "gae-men", "--target", "nope", "--source", "demo", "--headless"]) == 2
    err = capsys.readouterr().err
    assert "nope" in err and "lot" in err


def test_regions_and_range_follow_the_speaker_profile(tmp_path):
    """A speaker whose vowels are all 18% higher than the reference (a uniform
    scaling, the simplest vocal-tract-length difference) sees every region and
    the plane's range moved up by that factor."""
    from livevowel.profile import CalibrationToken, SpeakerProfile
    from livevowel.ui.app import load_targets
    from livevowel.ui.geometry import range_for_outlines

    ref = load_target_set("gae-men")
    k = 1.18
    toks = [CalibrationToken(t.id, t.f1_hz * k, t.f2_hz * k) for t in ref.targets if t.id in ("fleece", "lot", "goose")]
    prof = SpeakerProfile.calibrate("S01", toks, ref, voice_group="adult_male", today="2026-01-01")
    path = tmp_path / "s01.yaml"
    prof.save(path)
    mapped = load_targets("gae-men", profile_path=path)
    lot_ref, lot_me = ref.get("lot"), mapped.get("lot")
    assert lot_me.f1_hz == pytest.approx(lot_ref.f1_hz * k, rel=0.03)
    assert lot_me.f2_hz == pytest.approx(lot_ref.f2_hz * k, rel=0.03)
    r_ref = range_for_outlines([t.outline_hz() for t in ref.targets], units="hz")
    r_me = range_for_outlines([t.outline_hz() for t in mapped.targets], units="hz")
    assert r_me.f2_hz[1] == pytest.approx(r_ref.f2_hz[1] * k, rel=0.05)
    assert r_me.f1_hz[1] == pytest.approx(r_ref.f1_hz[1] * k, rel=0.05)


def test_pause_hides_the_dot_and_ignores_frames(tset):
    loop.init_display(headless=True)
    s = PracticeScreen(tset, options=ScreenOptions())
    s.controller.select("lot")
    s.feed(frames_at(tset.get("lot"), 5), now_s=0.0)
    assert s.dot_visible(0.01)
    assert s.handle_event(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_SPACE, unicode=" ", mod=0)) == "pause"
    assert s.paused and not s.dot_visible(0.01)
    s.feed(frames_at(tset.get("lot"), 60, t0=0.05), now_s=0.02)
    assert s.counter.hits == 0 and not s.dot_visible(0.03)
    s.handle_event(pygame.event.Event(pygame.KEYDOWN, key=pygame.K_SPACE, unicode=" ", mod=0))
    s.feed(frames_at(tset.get("lot"), 30, t0=1.0), now_s=0.04)
    assert s.counter.hits == 1 and s.dot_visible(0.05)


def test_ctrl_c_keeps_the_screenshot_and_says_where(tset, tmp_path):
    # Ctrl-C (KeyboardInterrupt in the loop) still saves the picture asked for with --screenshot
    class Interrupted(FramesPipeline):
        def drain(self):
            out = super().drain()
            if len(self.frames) < 20:
                raise KeyboardInterrupt
            return out

    s = PracticeScreen(tset, options=ScreenOptions(fps=240))
    s.controller.select("lot")
    pipe = Interrupted(frames_at(tset.get("lot"), 40))
    with pytest.raises(KeyboardInterrupt) as exc:
        loop.run(s, pipe, headless=True, screenshot=tmp_path / "stopped.png")
    res = exc.value.result
    assert res.screenshot == tmp_path / "stopped.png" and res.screenshot.stat().st_size > 1000
    assert pipe.stopped and res.frames > 0
    img = pygame.image.load(str(res.screenshot))
    assert img.get_size() == (1280, 800)


def test_a_live_input_that_goes_quiet_still_ends_on_the_clock(tset):
    # a device lost mid-run delivers no frames; the frames' clock never reaches --seconds, the wall
    # clock does (before: the headless safety limit, seconds + 30 s)
    class LostDevice(FramesPipeline):
        source = type("Mic", (), {"live": True})()

        @property
        def done(self):
            return False                  # a live device never ends by itself

    s = PracticeScreen(tset, options=ScreenOptions(fps=60))
    pipe = LostDevice(frames_at(tset.get("lot"), 5))
    res = loop.run(s, pipe, headless=True, seconds=0.5)
    assert res.input_s < 0.5 and res.wall_s < 0.5 + loop.LIVE_LIMIT_GRACE_S + 5.0
    assert res.wall_s >= 0.5 + loop.LIVE_LIMIT_GRACE_S
    # not live (a file): only the frames' clock counts, the input ending stops it
    res = loop.run(s, FramesPipeline(frames_at(tset.get("lot"), 5)), headless=True, seconds=0.5)
    assert res.input_ended
