"""Engine behaviour: settings, input handling, framing, resampling, voicing, gaps, bad input.

Formant values are Peterson & Barney (1952) group means (from memory);
signals come from the project's Klatt (1980) cascade synthesiser, whose
ground truth is known exactly.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import resample_poly

from livevowel import config
from livevowel.dsp import framing
from livevowel.dsp.engine import AnalysisSettings, BadSamples, StreamingAnalyzer, analyze, voice_from_f0
from livevowel.dsp.resample import StreamResampler, rational_ratio, resample
from livevowel.dsp.synth import Schedule, Segment, render, synthesize_vowel
from livevowel.errors import UserError

# Peterson & Barney (1952) means, Hz (from memory)
MEN = {"i": (270.0, 2290.0, 3010.0), "u": (300.0, 870.0, 2240.0), "ɑ": (730.0, 1090.0, 2440.0)}
WOMEN = {"i": (310.0, 2790.0, 3310.0), "u": (370.0, 950.0, 2670.0), "ɑ": (850.0, 1220.0, 2810.0)}

MALE = AnalysisSettings(voice="adult_male")
FEMALE = AnalysisSettings(voice="adult_female")


def vowel(formants, f0=120.0, rate=16000, seconds=0.5, voice="man", seed=0, **kw):
    return synthesize_vowel(formants_hz=formants, f0_hz=f0, duration_s=seconds, rate_hz=rate, voice=voice,
                            seed=seed, **kw)


def medians(track):
    v = track.voiced & np.isfinite(track.f1_hz)
    return np.nanmedian(track.f1_hz[v]), np.nanmedian(track.f2_hz[v])


# ---------------------------------------------------------------- settings
def test_from_config_defaults_and_units():
    s = AnalysisSettings.from_config(config.load())
    assert s.window_s == pytest.approx(0.025) and s.hop_s == pytest.approx(0.010)
    assert s.hold_s == pytest.approx(0.050) and s.auto_settle_s == pytest.approx(0.5)
    assert s.voice == "auto" and s.method == "dap" and s.taper == "gaussian"


def test_from_config_overrides_and_tracking_weights():
    st = config.load(overrides={"analysis": {"voice": "child", "hop_ms": 5.0}})
    st.values["analysis"]["transition_cost"] = 3.0
    s = AnalysisSettings.from_config(st)
    assert s.voice == "child" and s.hop_s == pytest.approx(0.005) and s.w_trans == 3.0


def test_bad_settings_raise_clear_errors():
    with pytest.raises(ValueError, match="voice"):
        AnalysisSettings(voice="baritone")
    with pytest.raises(ValueError, match="method"):
        AnalysisSettings(method="magic")
    st = config.load()
    st.values["analysis"]["voicing_on"] = 0.9   # above voicing_off
    with pytest.raises(UserError, match="voicing_on"):
        AnalysisSettings.from_config(st)


def test_lpc_order_and_rate_follow_the_voice():
    x = vowel(MEN["ɑ"], rate=44100, seconds=0.3)
    for voice, rate, order in (("adult_male", 10000, 14), ("adult_female", 11000, 12), ("child", 16000, 12)):
        r = analyze(x, 44100, settings=AnalysisSettings(voice=voice))
        assert r.analysis_rate_hz == rate and r.ceiling_hz == rate / 2
        # 5 formants below the ceiling: 2 * 5 + 2 (common practice); men + 2 more
        # (engine.SOURCE_POLE_PAIRS: measured better in noise)
        assert r.order == order
    r = analyze(x, 44100, settings=AnalysisSettings(voice="adult_male", ceiling_hz=4500.0))
    assert r.analysis_rate_hz == 9000


# ---------------------------------------------------------------- framing / resampling
def test_frame_times_are_window_centres_in_input_time():
    x = vowel(MEN["ɑ"], rate=48000, seconds=0.3)
    fr = analyze(x, 48000, settings=MALE).frames
    # 25 ms window = 250 samples at 10 kHz: centre (250 - 1) / 2 / 10000 s; 10 ms hop
    assert fr.time_s[0] == pytest.approx(0.01245)
    np.testing.assert_allclose(np.diff(fr.time_s), 0.010)
    assert len(fr) == (3000 - 250) // 100 + 1


def test_pre_emphasis_coefficient_formula():
    # a = exp(-2 pi fc / fs): 50 Hz at 10 kHz -> 0.96907 (Markel & Gray 1976 form)
    assert framing.pre_emphasis_coefficient(50.0, 10000.0) == pytest.approx(np.exp(-np.pi / 100), rel=1e-12)
    assert framing.pre_emphasis_coefficient(0.0, 10000.0) == 0.0


def test_condition_frames_removes_dc():
    rows = np.full((2, 101), 0.3) + np.random.default_rng(0).standard_normal((2, 101)) * 1e-3
    out = framing.condition_frames(rows, coef=0.97, window=np.ones(100))
    assert np.max(np.abs(out)) < 0.01


@pytest.mark.parametrize("rates", [(48000, 10000), (44100, 11000), (8000, 10000), (96000, 16000), (22050, 16000)])
def test_stream_resampler_matches_scipy_resample_poly(rates):
    fin, fout = rates
    x = np.random.default_rng(1).standard_normal(3001)
    up, down = rational_ratio(fin, fout)
    ref = resample_poly(x, up, down)          # scipy reference
    np.testing.assert_allclose(resample(x, in_rate_hz=fin, out_rate_hz=fout), ref)
    rs = StreamResampler(fin, fout)
    y = np.concatenate([rs.process(x[:1000]), rs.process(x[1000:1001]), rs.process(x[1001:]), rs.flush()])
    assert len(y) == len(ref)
    np.testing.assert_allclose(y, ref, atol=1e-12)


def test_stream_resampler_delay():
    rs = StreamResampler(44100, 11000)
    assert rs.delay_s == pytest.approx(0.001)   # 11 output samples at 11 kHz
    got = 0
    for i in range(441):
        got += len(rs.process(np.zeros(10)))
        if got:
            # first output (time 0) needs input up to time delay_s
            assert (i + 1) * 10 / 44100 >= rs.delay_s
            break


# ---------------------------------------------------------------- input handling
def test_int16_and_stereo_input_scale_and_downmix():
    x = vowel(MEN["ɑ"])
    xi = np.round(x * 32767).astype(np.int16)
    a = analyze(xi, 16000, settings=MALE).frames
    b = analyze(xi.astype(np.float64) / 32768.0, 16000, settings=MALE).frames
    np.testing.assert_array_equal(a.f1_hz, b.f1_hz)
    np.testing.assert_allclose(a.level_db, b.level_db)
    st = analyze(np.column_stack([x, x]), 16000, settings=MALE).frames
    mono = analyze(x, 16000, settings=MALE).frames
    np.testing.assert_allclose(st.f1_hz, mono.f1_hz)
    assert np.nanmax(a.level_db) < 0


def test_level_of_a_full_scale_sine_is_minus_3_dbfs():
    t = np.arange(16000) / 16000
    x = np.sin(2 * np.pi * 220 * t)
    fr = analyze(x, 16000, settings=MALE).frames
    # RMS of a full-scale sine = 1/sqrt(2) -> -3.01 dBFS (definition of dBFS, common practice)
    assert np.median(fr.level_db) == pytest.approx(-3.01, abs=0.1)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_samples_raise_a_clear_value_error(bad):
    x = vowel(MEN["ɑ"], seconds=0.2)
    x[100] = bad
    with pytest.raises(ValueError, match="NaN or infinite.*index 100"):
        analyze(x, 16000)
    with pytest.raises(BadSamples):
        StreamingAnalyzer(16000).process(x)
    assert issubclass(BadSamples, UserError)   # the CLI prints it as one line


def test_bad_rate_and_dtype():
    with pytest.raises(ValueError, match="rate"):
        analyze(np.zeros(100), 4000)
    with pytest.raises(ValueError, match="rate"):
        analyze(np.zeros(100), 16000.5)
    with pytest.raises(ValueError, match="numbers"):
        analyze(np.array(["a", "b"]), 16000)
    with pytest.raises(ValueError, match="shape"):
        analyze(np.zeros((10, 2, 2)), 16000)


@pytest.mark.parametrize("causal", [False, True])
@pytest.mark.parametrize("n", [0, 1, 300])
def test_empty_and_too_short_input(n, causal):
    r = analyze(np.zeros(n), 16000, causal=causal)
    assert len(r.frames) == 0
    assert any("shorter than one" in w for w in r.warnings)


@pytest.mark.parametrize("causal", [False, True])
def test_all_zeros_is_all_unvoiced(causal):
    r = analyze(np.zeros(8000), 16000, settings=MALE, causal=causal)
    assert len(r.frames) > 40
    assert not r.frames.voiced.any()
    assert np.all(np.isnan(r.frames.f1_hz)) and np.all(r.frames.confidence == 0)
    assert any("silence" in w for w in r.warnings)


def test_dc_offset_does_not_move_formants():
    x = vowel(MEN["ɑ"]) * 0.5
    f1, f2 = medians(analyze(x, 16000, settings=MALE).frames)
    g1, g2 = medians(analyze(x + 0.3, 16000, settings=MALE).frames)
    assert abs(g1 / f1 - 1) < 0.02 and abs(g2 / f2 - 1) < 0.02


def test_clipping_is_reported_and_formants_stay_plausible():
    x = np.clip(vowel(MEN["ɑ"]) * 6.0, -1.0, 1.0)
    r = analyze(x, 16000, settings=MALE)
    assert any("clipping" in w for w in r.warnings)
    f1, f2 = medians(r.frames)
    assert 600 < f1 < 900 and 900 < f2 < 1400


def test_telephone_rate_caps_the_ceiling_with_a_warning():
    x = vowel(MEN["ɑ"], rate=8000)
    r = analyze(x, 8000, settings=MALE)
    assert r.ceiling_hz == 4000 and r.analysis_rate_hz == 8000
    assert r.order == 12             # 4 formants below 4 kHz, 2 * 4 + 4 for men (engine.SOURCE_POLE_PAIRS)
    assert any("limits the formant ceiling" in w for w in r.warnings)
    f1, f2 = medians(r.frames)
    assert abs(f1 / 730 - 1) < 0.05 and abs(f2 / 1090 - 1) < 0.05


@pytest.mark.parametrize("causal", [False, True])
@pytest.mark.parametrize("voice,fm,f0", [("man", MEN["i"], 120.0), ("woman", WOMEN["i"], 220.0)])
def test_telephone_rate_still_reads_a_high_f2(voice, fm, f0, causal):
    # /i/'s F2 (Peterson & Barney 1952, from memory: men 2290, women 2790 Hz) lies above
    # 0.55 x the 4000 Hz ceiling an 8 kHz input allows; the plausible ranges follow the
    # voice's own ceiling (engine._Plan.max_hz), so it is still read (was: no frame at all)
    x = vowel(fm, f0=f0, rate=8000, voice=voice, seed=1)
    s = AnalysisSettings(voice="adult_male" if voice == "man" else "adult_female")
    fr = analyze(x, 8000, settings=s, causal=causal).frames
    have = fr.voiced & np.isfinite(fr.f2_hz)
    assert have.sum() >= 0.9 * fr.voiced.sum() > 0
    assert abs(np.median(fr.f1_hz[have]) / fm[0] - 1) < 0.06 and abs(np.median(fr.f2_hz[have]) / fm[1] - 1) < 0.03


def test_telephone_rate_with_voice_auto_notes_only_the_chosen_voices_ceiling():
    # auto starts from the adult_female plan (5500 Hz) and settles on the man's (5000 Hz):
    # only the plan it measured with is worth a note
    r = analyze(vowel(MEN["ɑ"], rate=8000), 8000, settings=AnalysisSettings(voice="auto"))
    assert r.voice == "adult_male"
    notes = [w for w in r.warnings if "limits the formant ceiling" in w]
    assert len(notes) == 1 and "adult male" in notes[0], r.warnings


def test_96k_input_gives_the_same_formants_as_16k():
    a = medians(analyze(vowel(MEN["ɑ"], rate=96000), 96000, settings=MALE).frames)
    b = medians(analyze(vowel(MEN["ɑ"], rate=16000), 16000, settings=MALE).frames)
    assert abs(a[0] / b[0] - 1) < 0.02 and abs(a[1] / b[1] - 1) < 0.02


# ---------------------------------------------------------------- voice
def test_voice_from_f0_bounds():
    assert voice_from_f0(120) == "adult_male"
    assert voice_from_f0(210) == "adult_female"
    assert voice_from_f0(300) == "child"


# Peterson & Barney (1952) children's /ɑ/, Hz (from memory)
CHILD_A = (1030.0, 1370.0, 3170.0)


@pytest.mark.parametrize("f0,voice,expect", [(120.0, "man", "adult_male"), (210.0, "woman", "adult_female"),
                                             (300.0, "child", "child")])
def test_auto_voice_decides_for_typical_voices(f0, voice, expect):
    fm = {"man": MEN["ɑ"], "woman": WOMEN["ɑ"], "child": CHILD_A}[voice]
    x = vowel(fm, f0=f0, voice=voice, seconds=0.4)
    assert analyze(x, 16000, settings=AnalysisSettings(voice="auto")).voice == expect


# ---------------------------------------------------------------- coarse facts (common practice)
@pytest.mark.parametrize("group,table,settings,f0,voice", [("men", MEN, MALE, 120.0, "man"),
                                                           ("women", WOMEN, FEMALE, 210.0, "woman")])
@pytest.mark.parametrize("causal", [False, True])
def test_coarse_vowel_facts(group, table, settings, f0, voice, causal):
    got = {v: medians(analyze(vowel(F, f0=f0, voice=voice, seconds=0.4), 16000, settings=settings,
                              causal=causal).frames) for v, F in table.items()}
    # common practice: adult /i/ F1 < ~400 and F2 > ~2000 Hz; /u/ F2 < ~1200 Hz; /ɑ/ F1 > ~600 Hz
    assert got["i"][0] < 400 and got["i"][1] > 2000
    assert got["u"][1] < 1200
    assert got["ɑ"][0] > 600


# ---------------------------------------------------------------- voicing, gaps
def _gappy(gap_s: float):
    sch = Schedule((
        Segment(duration_s=0.3, f0_start_hz=120.0, formants_hz=MEN["ɑ"]),
        Segment(duration_s=gap_s, kind="silent"),
        Segment(duration_s=0.3, f0_start_hz=120.0, formants_hz=MEN["ɑ"]),
    ), voice="man")
    y, truth = render(sch, rate_hz=16000, seed=0, peak_dbfs=-6.0)
    return y, truth


def test_unvoiced_and_silent_stretches_are_reported_unvoiced():
    sch = Schedule((
        Segment(duration_s=0.2, kind="silent"),
        Segment(duration_s=0.3, f0_start_hz=120.0, formants_hz=MEN["ɑ"]),
        Segment(duration_s=0.3, kind="noise", formants_hz=MEN["i"]),
        Segment(duration_s=0.2, kind="silent"),
    ), voice="man")
    y, truth = render(sch, rate_hz=16000, seed=0, peak_dbfs=-6.0)
    for causal in (False, True):
        fr = analyze(y, 16000, settings=MALE, causal=causal).frames
        kind = truth.at(fr.time_s)["kind"]
        # frames wholly inside a stretch (window half-length 12.5 ms plus a hop from the edges)
        edge = np.array([np.min(np.abs(fr.time_s[i] - np.array([0.2, 0.5, 0.8]))) for i in range(len(fr))])
        inner = edge > 0.03
        assert not fr.voiced[inner & (kind != 1)].any()
        assert fr.voiced[inner & (kind == 1)].mean() > 0.95
        assert np.all(np.isnan(fr.f0_hz[~fr.voiced]))


@pytest.mark.parametrize("causal", [False, True])
def test_short_dropout_is_held_long_silence_resets(causal):
    y, _ = _gappy(0.045)
    fr = analyze(y, 16000, settings=MALE, causal=causal).frames
    gap = (fr.time_s > 0.3) & (fr.time_s < 0.345) & ~fr.voiced
    assert gap.any()
    assert np.all(np.isfinite(fr.f1_hz[gap]))            # held through a 45 ms gap
    assert abs(np.nanmedian(fr.f1_hz[gap]) / 730 - 1) < 0.05
    assert np.all(fr.confidence[gap] == 0)
    y, _ = _gappy(0.25)
    fr = analyze(y, 16000, settings=MALE, causal=causal).frames
    deep = (fr.time_s > 0.42) & (fr.time_s < 0.5)
    assert np.all(~fr.voiced[deep]) and np.all(np.isnan(fr.f1_hz[deep]))   # reset after 50 ms


def test_confidence_is_high_on_clean_vowels_and_lower_in_noise():
    x = vowel(MEN["ɑ"])
    clean = analyze(x, 16000, settings=MALE).frames
    rng = np.random.default_rng(0)
    noisy = analyze(x + rng.standard_normal(len(x)) * 0.05, 16000, settings=MALE).frames
    assert np.median(clean.confidence[clean.voiced]) > 0.6
    assert np.all((clean.confidence >= 0) & (clean.confidence <= 1))
    assert np.median(noisy.confidence[noisy.voiced]) < np.median(clean.confidence[clean.voiced])


@pytest.mark.parametrize("causal", [False, True])
def test_a_fit_the_harmonics_cannot_support_gets_no_confidence(causal):
    # a man's /u/ (Peterson & Barney 1952 means, from memory: 300, 870, 2240 Hz) at F0 400 Hz
    # in white noise at 20 dB SNR keeps only h1 and h2 above the noise, and the fit puts F1 and F2
    # on them (about 400 and 800 Hz): confidence 0, so the practice screen shows no dot
    # (its default min_confidence is 0.4); clean, or at F0 120 Hz in the same noise, it is measured
    from livevowel.dsp.synth import add_noise

    def steady(f0, snr_db):
        x = synthesize_vowel(formants_hz=(300, 870, 2240), f0_hz=f0, duration_s=0.6, rate_hz=16000, voice="man",
                             jitter_pct=0.5, seed=3)
        if snr_db is not None:
            x = add_noise(x, snr_db=snr_db, seed=3)
        fr = analyze(x, 16000, settings=MALE, causal=causal).frames
        st = (fr.time_s > 0.1) & (fr.time_s < 0.5)
        return fr.f1_hz[st], fr.f2_hz[st], fr.confidence[st]

    min_conf = config.defaults()["practice"]["min_confidence"]
    f1, f2, conf = steady(400.0, 20.0)
    assert np.median(np.abs(f1 - 400.0)) < 0.06 * 400.0 and np.median(np.abs(f2 - 800.0)) < 0.06 * 400.0
    assert np.mean(conf < min_conf) > 0.9
    for f0, snr in ((400.0, None), (120.0, 20.0)):
        f1, f2, conf = steady(f0, snr)
        assert np.median(np.abs(f1 / 300.0 - 1.0)) < 0.05 and np.median(np.abs(f2 / 870.0 - 1.0)) < 0.07
        assert np.mean(conf >= min_conf) > 0.9, (f0, snr)


def test_the_benchmark_counts_shown_frames_at_the_screen_s_own_threshold():
    from livevowel.benchmarks.dsp import SHOWN_MIN_CONFIDENCE
    from livevowel.ui.screen import ScreenOptions

    assert SHOWN_MIN_CONFIDENCE == config.defaults()["practice"]["min_confidence"]
    # the screen's options with nothing configured use the same threshold
    assert ScreenOptions().min_confidence == SHOWN_MIN_CONFIDENCE


def test_offline_and_streaming_confidence_rules_agree():
    # the two copies of the confidence rule (arrays offline, floats per frame live) on
    # random frames, F1/F2 on and off harmonics of F0, with NaN F0, F3 and bandwidths
    from livevowel.dsp.engine import ON_HARMONIC, _confidence, _confidence_one

    rng = np.random.default_rng(0)
    n = 2000
    f0 = rng.uniform(80, 450, n)
    f0[::7] = np.nan
    f = np.column_stack([f0 * rng.integers(1, 4, n) * (1 + rng.uniform(-2, 2, n) * ON_HARMONIC),
                         rng.uniform(700, 2800, n), rng.uniform(2000, 3500, n)])
    f[::11, 2] = np.nan
    raw = f * (1 + rng.normal(0, 0.01, f.shape))
    b = rng.uniform(30, 600, (n, 3))
    b[::13, 1] = np.nan
    aper, level, ev = rng.uniform(0, 0.5, n), rng.uniform(-70, -10, n), rng.uniform(0, 1, n)
    many = _confidence(f, b, raw, aper, level, -50.0, ev, f0)
    one = [_confidence_one(f[i], b[i], raw[i], aper[i], level[i], -50.0, ev[i], f0[i]) for i in range(n)]
    np.testing.assert_allclose(many, one, rtol=0, atol=1e-12)
    assert 0.05 < np.mean(many < 0.4) < 0.95             # the rows span shown and hidden frames


@pytest.mark.parametrize("voice", ["auto", "child"])
def test_threads_share_the_work_without_changing_a_bit(voice):
    # Peterson & Barney (1952) means (from memory): a man's /ɑ/, a woman's /i/, a child's /u/, 2 s each
    parts = [synthesize_vowel(formants_hz=fm, f0_hz=f0, duration_s=2.0, rate_hz=16000, voice=v, seed=k)
             for k, (fm, f0, v) in enumerate((((730, 1090, 2440), 120.0, "man"), ((310, 2790, 3310), 220.0, "woman"),
                                               ((430, 1170, 3260), 300.0, "child")))]
    # and a man's /u/ at F0 400 Hz in white noise at 20 dB SNR (harmonic evidence below 1, see
    # test_a_fit_the_harmonics_cannot_support_gets_no_confidence)
    from livevowel.dsp.synth import add_noise

    parts.append(add_noise(synthesize_vowel(formants_hz=(300, 870, 2240), f0_hz=400.0, duration_s=1.0, rate_hz=16000,
                                            voice="man", seed=3), snr_db=20.0, seed=3))
    x = np.concatenate(parts)
    one = analyze(x, 16000, settings=AnalysisSettings(voice=voice, threads=1)).frames
    assert np.any(one.voiced & (one.confidence == 0.0))       # the noisy part reaches the evidence rule
    for n in (2, 3):
        many = analyze(x, 16000, settings=AnalysisSettings(voice=voice, threads=n)).frames
        for name in ("voiced", "f0_hz", "f1_hz", "f2_hz", "f3_hz", "b1_hz", "level_db", "confidence"):
            np.testing.assert_array_equal(getattr(many, name), getattr(one, name), err_msg=name)
    with pytest.raises(ValueError, match="threads"):
        AnalysisSettings(threads=-1)
    # long files are measured in parts of bounded size: parts of 250 frames (of 700) change nothing
    import livevowel.dsp.engine as engine

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(engine, "FEATURE_CHUNK_FRAMES", 250)
        for n in (1, 2):
            parts = analyze(x, 16000, settings=AnalysisSettings(voice=voice, threads=n)).frames
            for name in ("voiced", "f0_hz", "f1_hz", "f2_hz", "f3_hz", "b1_hz", "level_db", "confidence"):
                np.testing.assert_array_equal(getattr(parts, name), getattr(one, name), err_msg=name)


def test_a_vowel_ending_in_resonance_ringing_reports_no_f0_jump():
    # when the source stops, the tract rings at F1 for a few ms and YIN reads F1 as F0 (known
    # answer: the synthesiser's F1 of 500 Hz after an F0 of 108-315 Hz); those frames are not voice
    from livevowel.dsp.synth import Schedule, Segment, render

    segs = [Segment(duration_s=0.5, kind="silent")]
    for f0 in (120.0, 200.0, 350.0):
        segs += [Segment(duration_s=0.6, kind="voiced", f0_start_hz=f0, f0_end_hz=f0 * 0.9,
                         formants_hz=(500.0, 1500.0, 2500.0)), Segment(duration_s=0.5, kind="silent")]
    x, _ = render(Schedule(tuple(segs), voice="woman"), rate_hz=16000, seed=1, peak_dbfs=-12.0)
    for causal in (False, True):
        fr = analyze(x, 16000, causal=causal).frames
        f0 = fr.f0_hz
        for on, f0_end in ((0.5, 108.0), (1.6, 180.0), (2.7, 315.0)):
            mid = (fr.time_s > on + 0.1) & (fr.time_s < on + 0.5)
            assert fr.voiced[mid].all()                  # each vowel voiced through its middle
            # its last 50 ms and the 60 ms after it: any voiced frame has the vowel's own F0
            # (within 15 %), none the ringing's 500 Hz
            end = (fr.time_s > on + 0.55) & (fr.time_s < on + 0.66) & fr.voiced & np.isfinite(f0)
            assert end.any() and np.all(np.abs(f0[end] / f0_end - 1.0) < 0.15), (causal, on, f0[end])


def test_the_ringing_rule_frame_by_frame():
    from livevowel.dsp.engine import RING_WITHIN, _drop_ringing, _ringing_step

    st = None
    v, st = _ringing_step(st, 0, True, 120.0, -20.0)
    assert v
    v, st = _ringing_step(st, 1, True, 400.0, -26.0)         # x3.3 and 6 dB down: ringing
    assert not v
    v, st = _ringing_step(st, 2, True, float("nan"), -35.0)   # still quiet: rings on
    assert not v
    v, st = _ringing_step(st, 3, True, 125.0, -19.0)          # the voice back at its pitch
    assert v
    v, st = _ringing_step(st, 4, True, 250.0, -19.5)          # an octave up but not quieter: voice
    assert v
    v, st = _ringing_step(None, 10, True, 400.0, -40.0)       # nothing to compare with: voice
    assert v
    v, st = _ringing_step(("voice", 0, 120.0, -20.0), 1 + RING_WITHIN, True, 400.0, -30.0)   # too long ago
    assert v
    voiced = np.array([True, True, True, False, True, True])
    f0 = np.array([110.0, 108.0, 420.0, np.nan, 109.0, 108.0])
    lv = np.array([-20.0, -21.0, -30.0, -60.0, -20.0, -20.0])
    assert _drop_ringing(voiced, f0, lv).tolist() == [True, True, False, False, True, True]
