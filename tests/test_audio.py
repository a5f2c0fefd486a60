"""The live input path without a sound device: sources, queue, health, pipeline.

Known answers used here:
* a recording played through the paced source must give the same frames as
  the offline causal analysis of the same file (the engine's contract);
* RMS of a sine of amplitude A is A / sqrt(2), so a full-scale sine reads
  -3.01 dBFS and one at amplitude 0.1 reads -23.01 dBFS (common practice);
* RMS of white Gaussian noise is its standard deviation (common practice);
* vowel formants: Peterson & Barney (1952) men's means, from memory
  (/ɑ/ 730, 1090, 2440 Hz; /i/ 270, 2290, 3010 Hz).
"""

from __future__ import annotations

import math
import threading
import time
import tracemalloc

import numpy as np
import pytest
import soundfile as sf

from livevowel.audio import Block, DropOldestQueue, GeneratedVoiceSource, PacedFileSource, Sink, open_source
from livevowel.audio.health import HealthMeter
from livevowel.audio.options import FALLBACK_VOWELS, fallback_demo_schedule, parse_spec
from livevowel.audio.pipeline import LivePipeline, LiveSettings
from livevowel.dsp.engine import AnalysisSettings, analyze
from livevowel.dsp.synth import KlattVoice, Schedule, Segment, synthesize_vowel
from livevowel.dsp.types import FrameTrack
from livevowel.errors import UserError

RATE = 16000
PB_A = (730.0, 1090.0, 2440.0)   # Peterson & Barney (1952), men's /ɑ/, from memory
PB_I = (270.0, 2290.0, 3010.0)   # Peterson & Barney (1952), men's /i/, from memory
MALE = AnalysisSettings(voice="adult_male")
NO_FLOOR = LiveSettings(noise_margin_db=None)


class Collect(Sink):
    """A sink that keeps every block and event."""

    def __init__(self) -> None:
        self.blocks: list[Block] = []
        self.events: list[str] = []

    def on_block(self, block: Block) -> None:
        self.blocks.append(block)

    def on_event(self, kind: str, message: str = "") -> None:
        self.events.append(kind)


def _wait(src, timeout=20.0):
    t0 = time.monotonic()
    while not src.finished:
        assert time.monotonic() - t0 < timeout, "source did not finish"
        time.sleep(0.01)


def _vowel_file(path, formants, *, seconds=1.5, lead_s=0.3, noise_db=None, rate=RATE, seed=1):
    x = synthesize_vowel(formants_hz=formants, f0_hz=120.0, duration_s=seconds, rate_hz=rate, seed=seed)
    lead = np.zeros(int(lead_s * rate))
    y = np.concatenate([lead, x, np.zeros(int(0.2 * rate))])
    if noise_db is not None:
        y = y + np.random.default_rng(seed).normal(0.0, 10 ** (noise_db / 20), y.shape)
    sf.write(str(path), y, rate, subtype="FLOAT")
    return y


def _run(pipe: LivePipeline, timeout=60.0) -> FrameTrack:
    frames = []
    pipe.start()
    t0 = time.monotonic()
    while not pipe.done:
        assert time.monotonic() - t0 < timeout, "pipeline did not finish"
        frames += pipe.drain()
        time.sleep(0.01)
    frames += pipe.drain()
    return FrameTrack.from_frames(frames)


# --------------------------------------------------------------- queue
def test_drop_oldest_queue_keeps_newest_and_counts_drops():
    q = DropOldestQueue(3)
    q.put_many(range(5))
    assert q.dropped == 2
    assert q.get_all() == [2, 3, 4]
    assert q.get() is None and len(q) == 0
    with pytest.raises(ValueError):
        DropOldestQueue(0)


def test_drop_oldest_queue_across_threads_loses_nothing_when_drained():
    q = DropOldestQueue(20_000)              # room for everything: nothing may be lost or repeated
    got: list[int] = []
    done = threading.Event()

    def consume():
        while not done.is_set() or len(q):
            got.extend(q.get_all())
            time.sleep(0.0005)

    t = threading.Thread(target=consume)
    t.start()
    for i in range(20_000):
        q.put(i)
        if i % 500 == 0:
            time.sleep(0.0005)                # let the consumer run in between
    done.set()
    t.join()
    assert got == list(range(20_000)) and q.dropped == 0


# --------------------------------------------------------------- sources
def test_paced_file_blocks_tile_the_file_with_capture_times(tmp_path):
    y = _vowel_file(tmp_path / "a.wav", PB_A, seconds=0.5)
    src = PacedFileSource(tmp_path / "a.wav", pace=0, block_s=0.010)
    sink = Collect()
    src.start(sink)
    _wait(src)
    assert sink.events[0] == "started" and sink.events[-1] == "end"
    assert all(b.samples.dtype == np.float32 and b.samples.shape[1] == 1 for b in sink.blocks)
    assert all(b.n == 160 for b in sink.blocks[:-1]) and 0 < sink.blocks[-1].n <= 160
    starts = np.array([b.start_time_s for b in sink.blocks])
    np.testing.assert_allclose(starts, np.arange(len(starts)) * 160 / RATE)
    joined = np.concatenate([b.samples[:, 0] for b in sink.blocks])
    np.testing.assert_array_equal(joined, y.astype(np.float32))


def test_paced_file_at_real_time_is_not_faster_than_real_time(tmp_path):
    sf.write(str(tmp_path / "s.wav"), np.zeros(int(0.4 * RATE)), RATE)
    for pace, least in ((1.0, 0.4), (4.0, 0.1)):
        src = PacedFileSource(tmp_path / "s.wav", pace=pace)
        sink = Collect()
        t0 = time.monotonic()
        src.start(sink)
        _wait(src)
        took = time.monotonic() - t0
        assert took >= least * 0.97, f"pace {pace}: 0.4 s of audio delivered in {took:.3f} s"
        arrivals = np.array([b.received_s for b in sink.blocks]) - t0
        # each block is handed over no earlier than its last sample would be captured
        ends = np.array([b.start_time_s + b.duration_s for b in sink.blocks]) / pace
        assert np.all(arrivals >= ends - 0.002)


def test_generated_voice_blocks_equal_the_synth_render():
    sched = Schedule((Segment(duration_s=0.3, kind="voiced", f0_start_hz=110.0, formants_hz=PB_A),
                      Segment(duration_s=0.2, kind="voiced", f0_start_hz=110.0, formants_hz=PB_I)))
    src = GeneratedVoiceSource(sched, rate_hz=RATE, pace=0, seed=3)
    sink = Collect()
    src.start(sink)
    _wait(src)
    joined = np.concatenate([b.samples[:, 0] for b in sink.blocks])
    ref = KlattVoice(sched, rate_hz=RATE, seed=3).render(int(round(0.5 * RATE)))
    np.testing.assert_array_equal(joined, ref.astype(np.float32))
    assert src.duration_s == pytest.approx(0.5)


def test_source_specs_and_their_errors(tmp_path):
    assert parse_spec("mic") == ("mic", None)
    assert parse_spec("file:x.wav") == ("file", "x.wav")
    assert parse_spec("demo") == ("demo", None)
    for bad in ("speaker", "file:", "mic2"):
        with pytest.raises(UserError):
            parse_spec(bad)
    with pytest.raises(UserError, match="no such file"):
        open_source(f"file:{tmp_path / 'missing.wav'}")
    (tmp_path / "t.txt").write_text("not audio")
    with pytest.raises(UserError, match="not an audio file"):
        open_source(f"file:{tmp_path / 't.txt'}")
    with pytest.raises(UserError, match="pace"):
        open_source("demo", pace=-1)
    with pytest.raises(UserError, match="--device"):
        open_source("demo", device="1")
    demo = open_source("demo", pace=0)
    assert isinstance(demo, GeneratedVoiceSource) and demo.duration_s > 1.0
    fallback = GeneratedVoiceSource(fallback_demo_schedule(), pace=0)   # used when livevowel.demo is absent
    assert fallback.duration_s == pytest.approx(1.0 + 1.5 * len(FALLBACK_VOWELS))


# --------------------------------------------------------------- health
def test_health_levels_clipping_and_noise_floor():
    m = HealthMeter(floor_s=1.0, max_floor_db=-35.0, clip_level=0.99)
    rng = np.random.default_rng(0)
    t = 0.0
    for _ in range(100):                      # 1 s of noise, sigma 0.001 -> -60 dBFS
        x = rng.normal(0.0, 0.001, 160).astype(np.float32)
        m.add_block(x, time_s=t, rate_hz=RATE, received_s=t + 0.01, segment=0, overflow=False)
        t += 0.01
    assert m.noise_floor_db == pytest.approx(-60.0, abs=1.0) and m.floor_used
    n = np.arange(160)
    sine = (0.1 * np.sin(2 * np.pi * 500 * n / RATE)).astype(np.float32)   # whole periods in 10 ms
    m.add_block(sine, time_s=t, rate_hz=RATE, received_s=t + 0.01, segment=0, overflow=True)
    assert m.level_db == pytest.approx(20 * math.log10(0.1 / math.sqrt(2)), abs=0.05)   # -23.01 dBFS
    assert not m.clipping and m.overflows == 1
    m.add_block(np.clip(sine * 20, -1, 1), time_s=t + 0.01, rate_hz=RATE, received_s=t + 0.02, segment=0,
                overflow=False)
    assert m.clipping and m.clipped_samples > 0
    m.add_voiced_levels(np.full(200, -20.0))
    assert m.snr_db == pytest.approx(40.0, abs=1.5)


def test_health_lag_grows_when_delivery_falls_behind_the_clock():
    m = HealthMeter()
    for i in range(50):                       # on time
        m.add_block(np.zeros(160, np.float32), time_s=i * 0.01, rate_hz=RATE, received_s=100 + (i + 1) * 0.01,
                    segment=0, overflow=False)
    assert m.lag_s == pytest.approx(0.0, abs=1e-9)
    for i in range(50, 100):                  # each block arrives 10 ms later than the one before should
        m.add_block(np.zeros(160, np.float32), time_s=i * 0.01, rate_hz=RATE,
                    received_s=100 + (i + 1) * 0.01 + (i - 49) * 0.01, segment=0, overflow=False)
    assert m.lag_s == pytest.approx(0.5, abs=1e-6)


def test_voice_lead_in_is_not_taken_as_the_noise_floor():
    m = HealthMeter(floor_s=0.5, max_floor_db=-35.0)
    x = synthesize_vowel(formants_hz=PB_A, f0_hz=120.0, duration_s=0.6, rate_hz=RATE).astype(np.float32)
    for i in range(0, len(x) - 159, 160):
        m.add_block(x[i:i + 160], time_s=i / RATE, rate_hz=RATE, received_s=i / RATE, segment=0, overflow=False)
    assert m.noise_floor_db > -35.0 and not m.floor_used


def test_a_session_that_starts_mid_speech_finds_the_room_at_the_first_pause():
    # speaking from the first moment: the lead-in "floor" is the voice (about -20 dBFS), which
    # gave an SNR of about 0 dB and a "noisy" warning for the whole session. No SNR is reported
    # until a quiet stretch shows the room (white noise at -60 dBFS here); then voice - room.
    m = HealthMeter(floor_s=1.0, max_floor_db=-35.0)
    rng = np.random.default_rng(3)
    vowel = synthesize_vowel(formants_hz=PB_A, f0_hz=120.0, duration_s=2.0, rate_hz=RATE,
                             peak_dbfs=-12.0).astype(np.float32)
    room = rng.normal(0.0, 0.001, 2 * RATE).astype(np.float32)          # -60 dBFS
    blocks = [vowel[i:i + 160] for i in range(0, len(vowel) - 159, 160)]
    blocks += [room[i:i + 160] for i in range(0, len(room) - 159, 160)]
    blocks += [vowel[i:i + 160] for i in range(0, len(vowel) - 159, 160)]
    voice_db = 10 * math.log10(np.mean(vowel.astype(float) ** 2))
    seen = []
    for k, b in enumerate(blocks):
        m.add_block(b, time_s=k * 0.01, rate_hz=RATE, received_s=k * 0.01, segment=0, overflow=False)
        m.add_voiced_levels(np.array([voice_db]) if k < 200 or k >= 400 else np.array([]))
        seen.append((m.room_floor_db, m.snr_db))
    assert m.noise_floor_db > -35.0 and not m.floor_used           # the lead-in was the voice
    assert all(math.isnan(snr) for _, snr in seen[:200])          # no SNR from a voice as its own floor
    assert m.room_floor_db == pytest.approx(-60.0, abs=1.0)
    assert m.snr_db == pytest.approx(voice_db + 60.0, abs=1.5)
    assert not any(math.isfinite(snr) and snr < 10 for _, snr in seen)   # never a false "noisy"


def test_a_second_of_digital_silence_is_not_taken_for_the_room():
    # start-up buffers or a system noise gate give exact zeros: the room is still the -60 dBFS
    # noise around them (an SNR of ~100 dB "clean" would be wrong); a source with no noise at
    # all (every stretch digital silence) keeps its -120 dBFS
    rng = np.random.default_rng(4)
    m = HealthMeter(floor_s=1.0, max_floor_db=-35.0)
    blocks = [rng.normal(0.0, 0.001, 160).astype(np.float32) for _ in range(150)]
    blocks += [np.zeros(160, np.float32)] * 120 + [rng.normal(0.0, 0.001, 160).astype(np.float32)] * 50
    for k, b in enumerate(blocks):
        m.add_block(b, time_s=k * 0.01, rate_hz=RATE, received_s=k * 0.01, segment=0, overflow=False)
    assert m.room_floor_db == pytest.approx(-60.0, abs=1.0)
    quiet = HealthMeter(floor_s=1.0)
    for k in range(300):
        quiet.add_block(np.zeros(160, np.float32), time_s=k * 0.01, rate_hz=RATE, received_s=k * 0.01, segment=0,
                        overflow=False)
    assert quiet.room_floor_db == -120.0


# --------------------------------------------------------------- pipeline
def test_stream_through_paced_source_equals_offline_causal_analysis(tmp_path):
    y = _vowel_file(tmp_path / "a.wav", PB_A, seconds=1.0, rate=44100)
    track = _run(LivePipeline(PacedFileSource(tmp_path / "a.wav", pace=0, block_s=0.0123), settings=MALE,
                              live=NO_FLOOR))
    ref = analyze(y.astype(np.float32), 44100, settings=MALE, causal=True).frames
    assert len(track) == len(ref) > 50
    for name in ("time_s", "voiced", "f0_hz", "f1_hz", "f2_hz", "f3_hz", "b1_hz", "level_db", "confidence"):
        np.testing.assert_array_equal(getattr(track, name), getattr(ref, name), err_msg=name)
    v = track.voiced
    assert np.nanmedian(track.f1_hz[v]) == pytest.approx(PB_A[0], rel=0.1)
    assert np.nanmedian(track.f2_hz[v]) == pytest.approx(PB_A[1], rel=0.1)


def test_noise_floor_sets_the_engine_voicing_floor(tmp_path):
    # 1 s of noise at -50 dBFS, then a vowel: the floor is measured in the first
    # second; there the engine is restarted with voicing_floor_db = floor + margin.
    rate = RATE
    rng = np.random.default_rng(5)
    x = synthesize_vowel(formants_hz=PB_A, f0_hz=120.0, duration_s=1.0, rate_hz=rate)
    y = np.concatenate([np.zeros(rate), x, np.zeros(rate // 5)]) + rng.normal(0, 10 ** (-50 / 20), 2 * rate + rate // 5)
    y = y.astype(np.float32)
    sf.write(str(tmp_path / "n.wav"), y, rate, subtype="FLOAT")
    live = LiveSettings(noise_margin_db=6.0)
    pipe = LivePipeline(PacedFileSource(tmp_path / "n.wav", pace=0), settings=MALE, live=live)
    track = _run(pipe)
    h = pipe.health()
    assert h.noise_floor_db == pytest.approx(-50.0, abs=1.0) and h.floor_used
    raised = pipe.analysis_settings
    assert raised.voicing_floor_db == pytest.approx(h.noise_floor_db + 6.0)
    assert h.snr_db == pytest.approx(float(np.mean(track.level_db[track.voiced])) + 50.0, abs=3.0)
    # before: the configured settings on the first second; after: the raised floor from 1.0 s on
    first = analyze(y[:rate], rate, settings=MALE, causal=True).frames
    rest = analyze(y[rate:], rate, settings=raised, causal=True).frames
    assert len(track) == len(first) + len(rest)
    np.testing.assert_array_equal(track.time_s, np.concatenate([first.time_s, rest.time_s + 1.0]))
    for name in ("voiced", "f1_hz", "f2_hz", "level_db"):
        np.testing.assert_array_equal(getattr(track, name),
                                      np.concatenate([getattr(first, name), getattr(rest, name)]), err_msg=name)
    assert not track.voiced[track.time_s < 0.95].any()
    v = track.voiced
    assert np.nanmedian(track.f1_hz[v]) == pytest.approx(PB_A[0], rel=0.1)


def test_stalled_consumer_drops_oldest_results_and_counts_them(tmp_path):
    _vowel_file(tmp_path / "a.wav", PB_A, seconds=1.5)
    pipe = LivePipeline(PacedFileSource(tmp_path / "a.wav", pace=0), settings=MALE, live=NO_FLOOR, queue_size=40)
    pipe.start()
    assert pipe.wait(60)                       # never drained while running
    frames = pipe.drain()
    h = pipe.health()
    assert len(frames) == 40
    assert h.dropped == pipe.frames_out - 40 > 100
    assert frames[-1].time_s == pytest.approx(max(f.time_s for f in frames))
    times = [f.time_s for f in frames]
    assert times == sorted(times) and np.allclose(np.diff(times), 0.01)


def test_overflow_flags_are_counted_not_fatal():
    class Flaky(PacedFileSource):
        def __init__(self):  # a 0.3 s silent source whose every 5th block is flagged
            self.inner_blocks = [Block(samples=np.zeros((160, 1), np.float32), rate_hz=RATE, start_time_s=i * 0.01,
                                       received_s=time.monotonic(), overflow=i % 5 == 0) for i in range(30)]
            self.rate_hz, self.channels, self.blocksize, self.pace, self.name = RATE, 1, 160, 0.0, "flaky"
            self._done = False

        def start(self, sink):
            sink.on_event("started")
            for b in self.inner_blocks:
                sink.on_block(b)
            self._done = True
            sink.on_event("end")

        def stop(self):
            pass

    pipe = LivePipeline(Flaky(), settings=MALE, live=NO_FLOOR)
    _run(pipe)
    h = pipe.health()
    assert h.overflows == 6 and pipe.error is None and h.state == "stopped"


def test_recording_is_written_atomically_and_matches_the_input(tmp_path):
    y = _vowel_file(tmp_path / "a.wav", PB_I, seconds=0.5)
    out = tmp_path / "rec.wav"
    pipe = LivePipeline(PacedFileSource(tmp_path / "a.wav", pace=0), settings=MALE, live=NO_FLOOR, record_to=out)
    pipe.start()
    assert not out.exists()                    # only a temporary file while running
    pipe.wait(30)
    back, rate = sf.read(str(out))
    assert rate == RATE and back.shape == y.shape
    assert np.max(np.abs(back - y)) <= 1.0 / 32768 + 1e-9   # 16-bit quantisation
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".part")] == []


def test_latency_budget_lists_each_stage():
    src = open_source("demo", pace=0)
    pipe = LivePipeline(src, settings=MALE)
    b = pipe.latency_budget(consumer_poll_s=0.02)
    assert b["block"] == pytest.approx(0.005) and b["queue"] == 0.02
    for stage in ("resampler", "window", "smoother"):
        assert stage in b and b[stage] >= 0
    assert "total" not in b


def test_short_soak_keeps_memory_flat_and_drops_nothing(tmp_path):
    # 6 s at pace 0 under tracemalloc (which slows Python about five-fold); the
    # full 10-minute soak runs in `livevowel bench --only live`.
    sched = Schedule(tuple(Segment(duration_s=1.0, kind="voiced", f0_start_hz=115.0,
                                   formants_hz=(PB_A if i % 2 else PB_I), transition_s=0.1) for i in range(6)))
    y = KlattVoice(sched, rate_hz=RATE, seed=2).render(6 * RATE)
    sf.write(str(tmp_path / "soak.wav"), y, RATE, subtype="FLOAT")
    pipe = LivePipeline(PacedFileSource(tmp_path / "soak.wav", pace=0), settings=MALE, live=NO_FLOOR)
    n = 0
    sizes = []
    tracemalloc.start()
    try:
        pipe.start()
        t0 = time.monotonic()
        while not pipe.done:
            assert time.monotonic() - t0 < 180
            n += len(pipe.drain())
            sizes.append((pipe.health().seconds, tracemalloc.get_traced_memory()[0]))
            time.sleep(0.05)
        n += len(pipe.drain())
    finally:
        tracemalloc.stop()
    after_warmup = [s for t, s in sizes if t >= 2.0]
    assert len(after_warmup) > 5
    assert max(after_warmup) - min(after_warmup) < 1e6
    h = pipe.health()
    assert h.dropped == 0 and h.dropped_blocks == 0 and n == pipe.frames_out
    assert n == pytest.approx(600, abs=5)


def test_faster_than_real_time_waits_for_a_busy_consumer(tmp_path):
    # pace 4 (0.6 s of audio in 0.15 s) while the consumer reports a backlog for
    # its first 0.5 s: the source waits instead of outrunning it, and loses nothing.
    sf.write(str(tmp_path / "s.wav"), np.zeros(int(0.6 * RATE)), RATE)

    class Busy(Collect):
        def __init__(self):
            super().__init__()
            self.until = time.monotonic() + 0.5

        def backlog_s(self):
            return 1.0 if time.monotonic() < self.until else 0.0

    src = PacedFileSource(tmp_path / "s.wav", pace=4.0)
    sink = Busy()
    t0 = time.monotonic()
    src.start(sink)
    _wait(src)
    assert time.monotonic() - t0 >= 0.5
    assert len(sink.blocks) == int(0.6 * RATE) // src.blocksize
    assert sink.blocks[0].received_s >= sink.until


def test_pause_stops_analysis_but_not_the_input_measures(tmp_path):
    _vowel_file(tmp_path / "a.wav", PB_A, seconds=0.8)
    pipe = LivePipeline(PacedFileSource(tmp_path / "a.wav", pace=0), settings=MALE, live=NO_FLOOR)
    pipe.pause()
    track = _run(pipe)
    h = pipe.health()
    assert len(track) == 0 and h.seconds == pytest.approx(1.3, abs=0.011) and h.level_db < -100
    assert h.noise_floor_db <= -100


def test_no_input_message_names_what_portaudio_sees():
    from livevowel.audio.devices import no_input_message

    class FakePortAudio:  # stands in for the sounddevice module's device list
        PortAudioError = RuntimeError

        @staticmethod
        def query_devices():
            return [{"name": "HDMI out", "max_input_channels": 0, "max_output_channels": 2}]

    msg = no_input_message(FakePortAudio)
    assert "HDMI out (0 in, 2 out)" in msg and "--source file:PATH" in msg and "--source demo" in msg


def test_a_source_that_cannot_start_leaves_no_recording(tmp_path):
    class Broken(PacedFileSource):
        def start(self, sink):
            raise UserError("cannot open the device")

    _vowel_file(tmp_path / "a.wav", PB_A, seconds=0.2)
    pipe = LivePipeline(Broken(tmp_path / "a.wav"), settings=MALE, record_to=tmp_path / "rec.wav")
    with pytest.raises(UserError):
        pipe.start()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav"]
