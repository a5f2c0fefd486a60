"""Attempt segmentation and measures.

The frame streams here are built with known answers: voiced runs of given
lengths at given times with given formants (a process with a known answer),
so the segmenter must find exactly those runs. The end-to-end check on
synthesised speech is in tests/test_drill_run.py.
"""

import math

import numpy as np
import pytest

from livevowel.dsp.types import Frame, FrameTrack
from livevowel.session.attempts import (AttemptSegmenter, AttemptSettings, measure_attempt, measure_span,
                                        segment_track, steady_part)

HOP = 0.010


def frames(spec, *, hop=HOP, level=-20.0, t0=0.0):
    """Frames from a list of (duration_s, voiced, f1, f2) runs."""
    out = []
    t = t0 + hop / 2
    for dur, voiced, f1, f2 in spec:
        n = int(round(dur / hop))
        for _ in range(n):
            out.append(Frame(time_s=t, voiced=voiced, f0_hz=120.0 if voiced else math.nan,
                             f1_hz=f1 if voiced else math.nan, f2_hz=f2 if voiced else math.nan,
                             f3_hz=2500.0 if voiced else math.nan, b1_hz=80.0, b2_hz=100.0, b3_hz=150.0,
                             level_db=level if voiced else -70.0, confidence=0.9 if voiced else 0.0))
            t += hop
    return out


def run_all(fr, settings=AttemptSettings()):
    seg = AttemptSegmenter(settings=settings)
    spans = []
    for f in fr:
        spans += seg.push(f)
    spans += seg.flush()
    return seg, [measure_span(s, settings=settings) for s in spans]


def test_runs_found_at_their_times():
    fr = frames([(0.3, False, 0, 0), (0.4, True, 300, 2300), (0.5, False, 0, 0), (0.25, True, 700, 1200),
                 (0.3, False, 0, 0)])
    _, atts = run_all(fr)
    assert len(atts) == 2
    assert atts[0].start_s == pytest.approx(0.3, abs=1e-9) and atts[0].end_s == pytest.approx(0.7, abs=1e-9)
    assert atts[1].start_s == pytest.approx(1.2, abs=1e-9) and atts[1].end_s == pytest.approx(1.45, abs=1e-9)
    assert atts[0].f1_hz == 300 and atts[0].f2_hz == 2300 and atts[1].f1_hz == 700
    assert atts[0].flags == () and atts[1].flags == ()
    assert atts[0].duration_s == pytest.approx(0.4)


def test_attempt_is_reported_as_soon_as_hangover_passes():
    s = AttemptSettings(hangover_s=0.06)
    seg = AttemptSegmenter(settings=s)
    fr = frames([(0.2, True, 300, 2300), (0.2, False, 0, 0)])
    closed_at = None
    for f in fr:
        if seg.push(f):
            closed_at = f.time_s
            break
    # last voiced frame centre 0.195 s; closes on the first frame more than 60 ms later
    assert closed_at == pytest.approx(0.195 + 0.07, abs=1e-9)


def test_short_dip_within_hangover_does_not_split():
    fr = frames([(0.2, True, 300, 2300), (0.05, False, 0, 0), (0.2, True, 300, 2300), (0.3, False, 0, 0)])
    _, atts = run_all(fr, AttemptSettings(hangover_s=0.06))
    assert len(atts) == 1 and atts[0].duration_s == pytest.approx(0.45)
    # a longer gap splits
    fr = frames([(0.2, True, 300, 2300), (0.1, False, 0, 0), (0.2, True, 300, 2300), (0.3, False, 0, 0)])
    _, atts = run_all(fr, AttemptSettings(hangover_s=0.06))
    assert len(atts) == 2


def test_a_jump_in_frame_times_splits_the_attempt():
    # voiced frames on both sides of a pause (no frames at all for 1.2 s, as a paused input gives)
    before = frames([(0.3, True, 300, 2300)])
    after = frames([(0.3, True, 400, 2000), (0.3, False, 0, 0)], t0=1.5)
    _, atts = run_all(before + after)
    assert len(atts) == 2
    assert atts[0].end_s == pytest.approx(0.3) and atts[1].start_s == pytest.approx(1.5)
    assert (atts[0].f1_hz, atts[1].f1_hz) == (300, 400)
    # a gap of one missing frame is not a jump
    fr = frames([(0.3, True, 300, 2300), (0.3, False, 0, 0)])
    _, atts = run_all(fr[:15] + fr[16:])
    assert len(atts) == 1


def test_stopped_input_flags_the_open_attempt():
    seg = AttemptSegmenter()
    for f in frames([(0.3, True, 300, 2300)]):
        assert seg.push(f) == []
    (span,) = seg.flush(stopped=True)
    att = measure_span(span)
    assert att.flags == ("stopped",) and not att.usable


def test_too_short_is_kept_and_flagged_and_blips_counted():
    fr = frames([(0.1, False, 0, 0), (0.08, True, 300, 2300), (0.3, False, 0, 0), (0.02, True, 300, 2300),
                 (0.3, False, 0, 0)])
    seg, atts = run_all(fr, AttemptSettings(min_duration_s=0.12, ignore_below_s=0.03))
    assert len(atts) == 1
    assert atts[0].flags == ("too_short",) and not atts[0].usable
    assert seg.ignored_blips == 1


def test_quiet_unmeasured_and_clipped_flags():
    fr = frames([(0.3, True, 300, 2300), (0.3, False, 0, 0)], level=-60.0)
    _, atts = run_all(fr, AttemptSettings(min_level_db=-50))
    assert "too_quiet" in atts[0].flags
    # formants missing in most frames
    fr = frames([(0.3, True, math.nan, math.nan), (0.3, False, 0, 0)])
    _, atts = run_all(fr)
    assert "unmeasured" in atts[0].flags and math.isnan(atts[0].f1_hz)
    # clipping from samples at full scale
    track = FrameTrack.from_frames(frames([(0.3, True, 300, 2300)]))
    x = 0.5 * np.sin(np.linspace(0, 200, 4800))
    assert "clipped" not in measure_attempt(track, samples=x).flags
    x[100:110] = 1.0
    assert "clipped" in measure_attempt(track, samples=x).flags


def test_long_run_is_cut_and_flagged():
    fr = frames([(1.0, True, 300, 2300), (0.2, False, 0, 0)])
    _, atts = run_all(fr, AttemptSettings(max_duration_s=0.5))
    assert len(atts) == 2
    assert atts[0].flags == ("cut",) and atts[0].duration_s == pytest.approx(0.5)


def test_steady_part_is_the_stable_stretch():
    # glide in, 150 ms steady at F1 500 / F2 1500, glide out
    glide_in = [(0.01, True, 300 + 20 * k, 2300 - 80 * k) for k in range(10)]
    steady = [(0.15, True, 500, 1500)]
    glide_out = [(0.01, True, 500 + 30 * k, 1500 + 60 * k) for k in range(1, 11)]
    fr = frames(glide_in + steady + glide_out + [(0.2, False, 0, 0)])
    _, atts = run_all(fr)
    a = atts[0]
    assert a.steady_method == "stable"
    assert a.f1_hz == 500 and a.f2_hz == 1500
    assert a.steady_start_s == pytest.approx(0.10, abs=0.011)
    assert a.steady_end_s == pytest.approx(0.25, abs=0.011)
    assert a.steady_end_s - a.steady_start_s >= 0.08
    # the whole track is kept for review
    assert len(a.track) == 10 + 15 + 10


def test_short_attempt_falls_back_to_middle():
    track = FrameTrack.from_frames(frames([(0.06, True, 400, 2000)]))
    i, j, method = steady_part(track, hop_s=HOP, min_s=0.08)
    assert method == "middle" and (i, j) == (1, 5)


def test_segment_track_equals_frame_by_frame_over_any_split():
    rng = np.random.default_rng(3)
    spec = []
    for _ in range(20):
        spec.append((float(rng.integers(1, 40)) * HOP, bool(rng.integers(0, 2)), 300.0, 2200.0))
    fr = frames(spec)
    whole = segment_track(FrameTrack.from_frames(fr))
    _, one = run_all(fr)
    assert [(a.start_s, a.end_s, a.flags) for a in whole] == [(a.start_s, a.end_s, a.flags) for a in one]


def test_settings_validation():
    with pytest.raises(ValueError):
        AttemptSettings(min_duration_s=-1)
    with pytest.raises(ValueError):
        AttemptSettings(min_duration_s=1.0, max_duration_s=0.5)


# -- judgement ---------------------------------------------------------------------

def _attempt_at(f1, f2, dur=0.3):
    from livevowel.session.attempts import measure_attempt

    return measure_attempt(FrameTrack.from_frames(frames([(dur, True, f1, f2)])))


def test_judge_hit_miss_closeness_and_nearest():
    from livevowel.session.judge import judge
    from livevowel.targets import closeness_from_distance, load_target_set

    ts = load_target_set("gae-men")
    fleece, kit = ts.get("fleece"), ts.get("kit")
    j = judge(_attempt_at(fleece.f1_hz, fleece.f2_hz), ts, "fleece", hit_size_sd=1.5)
    assert j.hit is True and j.closeness == pytest.approx(100.0) and j.nearest_id == "fleece"
    # KIT's centre said for a FLEECE prompt: a miss that sounded like KIT; the score is the
    # set's own formula at the same hit size (50 on the edge)
    j = judge(_attempt_at(kit.f1_hz, kit.f2_hz), ts, "FLEECE", hit_size_sd=1.5)
    d = fleece.distance(kit.f1_hz, kit.f2_hz)
    assert d > 1.5 and j.hit is False and j.nearest_id == "kit" and j.reason == "outside the target"
    assert j.closeness == pytest.approx(float(closeness_from_distance(d, 1.5)))
    assert j.target_id == "fleece"
    # the same point is a hit with a region large enough to hold it
    assert judge(_attempt_at(kit.f1_hz, kit.f2_hz), ts, "fleece", hit_size_sd=d + 0.1).hit is True


def test_judge_hold_time_and_flagged_attempts():
    from livevowel.session.judge import judge
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    t = ts.get("lot")
    # 150 ms inside LOT, then 150 ms at GOOSE: the median sits on one side; the longest stay inside is 150 ms
    a = measure_attempt(FrameTrack.from_frames(frames([(0.16, True, t.f1_hz, t.f2_hz), (0.15, True, 378, 997)])))
    j = judge(a, ts, "lot", hit_size_sd=1.5, hold_s=0.3)
    assert j.time_in_target_s == pytest.approx(0.16) and j.hit is False and "held 0.16 s of 0.30 s" in j.reason
    assert judge(a, ts, "lot", hit_size_sd=1.5, hold_s=0.1).hit is True
    short = _attempt_at(t.f1_hz, t.f2_hz, dur=0.05)
    j = judge(short, ts, "lot")
    assert j.hit is None and "too_short" in j.reason and j.nearest_id == "lot"


def test_judge_in_the_speakers_space():
    """A speaker whose formants are all 18 % above the set's (a shorter vocal tract): with the
    profile the centres move with the voice (Nearey 1978 log-mean scaling, one factor)."""
    from livevowel.profile import CalibrationToken, SpeakerProfile
    from livevowel.session.judge import judge
    from livevowel.targets import load_target_set

    ts = load_target_set("gae-men")
    k = 1.18
    tokens = [CalibrationToken(v, ts.get(v).f1_hz * k, ts.get(v).f2_hz * k) for v in ("fleece", "lot", "goose")]
    prof = SpeakerProfile.calibrate("S20", tokens, ts, voice_group="adult_female", method="nearey-shared")
    mapped = prof.map_set(ts)
    t = ts.get("dress")
    a = _attempt_at(t.f1_hz * k, t.f2_hz * k)
    assert judge(a, ts, "dress", hit_size_sd=1.5).hit is False
    j = judge(a, mapped, "dress", hit_size_sd=1.5, speaker_space=True)
    assert j.hit is True and j.speaker_space and j.closeness > 95
