"""Formant accuracy on synthetic vowels with known formants.

Vowels: Peterson & Barney (1952) group means for men, women and children
(F1, F2, F3 in Hz; from memory), rendered by the project's Klatt (1980)
cascade synthesiser (livevowel.dsp.synth) with 0.5 % jitter and 0.2 dB
shimmer, at several F0 values. The synthesiser's ground truth is exact, so
the goals are asserted directly:

* median absolute F1 and F2 error (pooled over the voiced frames of the ten
  vowels) <= 3 % for F0 up to 250 Hz and <= 5 % for F0 300-350 Hz;
* frames more than 20 % off (or not measured) <= 2 % of voiced frames;
* median F1 and F2 error <= 5 % over the whole 300-400 Hz band; frames more
  than 20 % off there <= 2 % (for F1 below F0, women's /i/ at F0 350-400
  Hz, thanks to the closed-phase F1 candidate);
* with white noise at 20 dB SNR the median F1 and F2 errors are at most
  1.5 x the measured clean errors (men, women and children at F0 100-250 Hz;
  children 250-350 Hz) -- the looser check against 1.5 x the clean goal is
  kept for men and women;
* the default method beats plain autocorrelation LPC on the same frames at high F0.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pytest

from livevowel.dsp.engine import AnalysisSettings, analyze
from livevowel.dsp.synth import Schedule, Segment, add_noise, render, synthesize_vowel

# Peterson & Barney (1952) means, Hz (from memory): F1, F2, F3
PB = {
    "men": {"i": (270, 2290, 3010), "ɪ": (390, 1990, 2550), "ɛ": (530, 1840, 2480), "æ": (660, 1720, 2410),
            "ɑ": (730, 1090, 2440), "ɔ": (570, 840, 2410), "ʊ": (440, 1020, 2240), "u": (300, 870, 2240),
            "ʌ": (640, 1190, 2390), "ɝ": (490, 1350, 1690)},
    "women": {"i": (310, 2790, 3310), "ɪ": (430, 2480, 3070), "ɛ": (610, 2330, 2990), "æ": (860, 2050, 2850),
              "ɑ": (850, 1220, 2810), "ɔ": (590, 920, 2710), "ʊ": (470, 1160, 2680), "u": (370, 950, 2670),
              "ʌ": (760, 1400, 2780), "ɝ": (500, 1640, 1960)},
    "children": {"i": (370, 3200, 3730), "ɪ": (530, 2730, 3600), "ɛ": (690, 2610, 3570),
                 "æ": (1010, 2320, 3320), "ɑ": (1030, 1370, 3170), "ɔ": (680, 1060, 3180),
                 "ʊ": (560, 1410, 3310), "u": (430, 1170, 3260), "ʌ": (850, 1590, 3360),
                 "ɝ": (560, 1820, 2160)},
}
VOICE = {"men": ("adult_male", "man"), "women": ("adult_female", "woman"), "children": ("child", "child")}
RATE = 16000


@lru_cache(maxsize=None)
def errors(group: str, f0: float, snr_db: float | None = None, method: str = "dap",
           causal: bool = False, closed_phase_below: float = AnalysisSettings.closed_phase_below
           ) -> tuple[np.ndarray, np.ndarray]:
    """Relative |error| of F1 and F2 over the voiced frames of all ten vowels (1.0 = not measured)."""
    e1, e2 = [], []
    s = AnalysisSettings(voice=VOICE[group][0], method=method, closed_phase_below=closed_phase_below)
    for k, (vowel, fm) in enumerate(PB[group].items()):
        x = synthesize_vowel(formants_hz=fm, f0_hz=f0, duration_s=0.4, rate_hz=RATE, voice=VOICE[group][1],
                             jitter_pct=0.5, shimmer_db=0.2, seed=k)
        if snr_db is not None:
            x = add_noise(x, snr_db=snr_db, seed=k)
        fr = analyze(x, RATE, settings=s, causal=causal).frames
        v = fr.voiced
        assert v.mean() > 0.9, f"{group} {vowel} F0 {f0}: only {v.mean():.0%} of frames voiced"
        for est, true, out in ((fr.f1_hz[v], fm[0], e1), (fr.f2_hz[v], fm[1], e2)):
            err = np.abs(est / true - 1.0)
            out.append(np.where(np.isfinite(err), err, 1.0))
    return np.concatenate(e1), np.concatenate(e2)


def band(group: str, f0s, **kw) -> tuple[np.ndarray, np.ndarray]:
    parts = [errors(group, float(f0), **kw) for f0 in f0s]
    return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


LOW = [("men", (100, 130, 160)), ("men", (170, 200, 240)), ("women", (180, 220, 250)), ("children", (250,))]
HIGH = [("women", (300,)), ("children", (300, 350))]


@pytest.mark.parametrize("group,f0s", LOW)
def test_clean_error_up_to_250_hz(group, f0s):
    e1, e2 = band(group, f0s)
    assert np.median(e1) <= 0.03 and np.median(e2) <= 0.03, (np.median(e1), np.median(e2))
    assert np.mean((e1 > 0.2) | (e2 > 0.2)) <= 0.02


@pytest.mark.parametrize("group,f0s", HIGH)
def test_clean_error_300_to_350_hz(group, f0s):
    e1, e2 = band(group, f0s)
    assert np.median(e1) <= 0.05 and np.median(e2) <= 0.05, (np.median(e1), np.median(e2))
    assert np.mean((e1 > 0.2) | (e2 > 0.2)) <= 0.02


@pytest.mark.parametrize("group", ["men", "women", "children"])
def test_clean_median_error_300_to_400_hz(group):
    e1, e2 = band(group, (300, 350, 400))
    assert np.median(e1) <= 0.05 and np.median(e2) <= 0.05, (np.median(e1), np.median(e2))


@pytest.mark.parametrize("group", ["men", "women", "children"])
def test_clean_outliers_300_to_400_hz(group):
    # women's /i/ (F1 310 Hz below F0 350-400 Hz) read 25-50 % high with DAP
    # alone; the closed-phase F1 (AnalysisSettings.closed_phase_below) fixes it;
    # for men (measured on these signals: 3.4 % of frames off before the
    # between-harmonics case, 0.2 % with it) see the test after next
    e1, e2 = band(group, (300, 350, 400))
    assert np.mean((e1 > 0.2) | (e2 > 0.2)) <= 0.02


# Measured with livevowel.dsp.dap's censored harmonics (noisy / clean median, x):
# men 100-160 Hz F1 0.94 / 0.89 % (1.05), F2 0.36 / 0.44 % (0.83); men 170-240 Hz
# F1 2.82 / 2.39 % (1.18), F2 0.56 / 0.46 % (1.21); women 180-250 Hz F1 2.82 /
# 2.50 % (1.13), F2 0.56 / 0.38 % (1.46); children 110-240 Hz F1 0.97 / 0.96 %
# (1.01), F2 0.35 / 0.30 % (1.19; before: F2 2.48 x, 8.5 % of frames > 20 % off,
# F1 and F2 merged in children's /ɔ/ and /u/). Until then a noisy median under
# 1 % of the formant passed whatever the ratio.
@pytest.mark.parametrize("group,f0s", [("men", (100, 130, 160)), ("men", (170, 200, 240)),
                                       ("women", (180, 220, 250)), ("children", (110, 170, 240))])
def test_20_db_noise_costs_at_most_half_again_of_measured_clean(group, f0s):
    c1, c2 = band(group, f0s)
    n1, n2 = band(group, f0s, snr_db=20.0)
    for noisy, clean in ((np.median(n1), np.median(c1)), (np.median(n2), np.median(c2))):
        assert noisy <= 1.5 * clean, (noisy, clean)
    assert np.mean((n1 > 0.2) | (n2 > 0.2)) <= 0.02


@pytest.mark.parametrize("group,f0s", [("men", (100, 130, 160)), ("women", (180, 220, 250))])
def test_20_db_noise_costs_at_most_half_again(group, f0s):
    c1, c2 = band(group, f0s)
    n1, n2 = band(group, f0s, snr_db=20.0)
    # held to 1.5 x the clean goal (3 %): the measured clean errors are far
    # below it (men: F1 ~0.9 %, F2 ~0.2 %), so a ratio to them is mostly a
    # ratio to rounding; the measured ratios are in the engine's report
    assert np.median(n1) <= 1.5 * 0.03, (np.median(n1), np.median(c1))
    assert np.median(n2) <= 1.5 * 0.03, (np.median(n2), np.median(c2))
    assert np.median(n1) <= 2.5 * np.median(c1)
    assert np.mean((n1 > 0.2) | (n2 > 0.2)) <= 0.02


def test_20_db_noise_children():
    # children's /ɔ/ (F1 680, F2 1060 Hz: close, F2 weak) used to merge F1 and F2
    # in ~8 % of frames here, until harmonics 8-12 dB above a resolved noise
    # floor counted as lost in noise (dap.NOISE_DROP_RESOLVED_DB)
    c1, c2 = band("children", (250, 300, 350))
    n1, n2 = band("children", (250, 300, 350), snr_db=20.0)
    assert np.median(n1) <= 1.5 * np.median(c1) and np.median(n2) <= 1.5 * np.median(c2)
    assert np.mean((n1 > 0.2) | (n2 > 0.2)) <= 0.02


@pytest.mark.parametrize("group,f0s", [("women", (220, 250, 300)), ("children", (250, 300, 350))])
def test_harmonic_fit_beats_plain_lpc_at_high_f0(group, f0s):
    d1, d2 = band(group, f0s)
    a1, a2 = band(group, f0s, method="autocorrelation")
    # measured gain is reported by `livevowel bench --only dsp` (accuracy table)
    assert np.median(d1) < 0.8 * np.median(a1)
    assert np.mean((d1 > 0.2) | (d2 > 0.2)) <= np.mean((a1 > 0.2) | (a2 > 0.2))


def test_causal_path_is_as_accurate_as_offline():
    o1, o2 = band("women", (220,))
    c1, c2 = band("women", (220,), causal=True)
    assert np.median(c1) <= 0.03 and np.median(c2) <= 0.03
    assert abs(np.median(c1) - np.median(o1)) < 0.01


@pytest.mark.parametrize("causal", [False, True])
def test_glide_is_followed(causal):
    # /ɑ/ -> /i/ (men's means, Peterson & Barney 1952, from memory) over 200 ms
    sch = Schedule((
        Segment(duration_s=0.2, f0_start_hz=120.0, f0_end_hz=130.0, formants_hz=PB["men"]["ɑ"], transition_s=0.2,
                transition="linear"),
        Segment(duration_s=0.2, f0_start_hz=130.0, f0_end_hz=110.0, formants_hz=PB["men"]["i"]),
    ), voice="man", jitter_pct=0.5)
    y, truth = render(sch, rate_hz=RATE, seed=4, peak_dbfs=-6.0)
    fr = analyze(y, RATE, settings=AnalysisSettings(voice="adult_male"), causal=causal).frames
    t = truth.at(fr.time_s)
    v = fr.voiced & t["voiced"]
    for name in ("f1_hz", "f2_hz"):
        err = np.abs(getattr(fr, name)[v] / t[name][v] - 1)
        assert np.nanmedian(err) < 0.05
        assert np.mean(~(err < 0.2)) <= 0.05
    # the F2 rise is followed: end over start as in the synthesiser's track (1.78 on these frames),
    # within 4 % (a fixed bound of 1.8 was above the true ratio and passed only while the start read low)
    late, early = fr.time_s > 0.3, (fr.time_s < 0.05) & np.isfinite(fr.f2_hz)
    rise = np.nanmedian(fr.f2_hz[late]) / np.nanmedian(fr.f2_hz[early])
    true_rise = np.median(t["f2_hz"][late]) / np.median(t["f2_hz"][early])
    assert abs(rise / true_rise - 1) < 0.04


@pytest.mark.parametrize("causal", [False, True])
def test_men_falsetto_f1_below_f0(causal):
    # men's /i/ and /u/ (Peterson & Barney 1952 means, F1 270 and 300 Hz, from
    # memory) sung at F0 350 and 400 Hz: F1 lies below F0, where DAP alone
    # read it between the first two harmonics (measured: 33-76 % high)
    s = AnalysisSettings(voice="adult_male")
    for k, vowel in enumerate(("i", "u")):
        fm = PB["men"][vowel]
        for f0 in (350.0, 400.0):
            x = synthesize_vowel(formants_hz=fm, f0_hz=f0, duration_s=0.4, rate_hz=RATE, voice="man",
                                 jitter_pct=0.5, shimmer_db=0.2, seed=k)
            fr = analyze(x, RATE, settings=s, causal=causal).frames
            err = np.abs(fr.f1_hz[fr.voiced] / fm[0] - 1.0)
            assert np.nanmedian(err) <= 0.05, (vowel, f0, np.nanmedian(fr.f1_hz[fr.voiced]))
            assert np.mean(~(err <= 0.2)) <= 0.05, (vowel, f0)


@pytest.mark.parametrize("causal", [False, True])
def test_harmonic_locking_above_1_3_f0_is_undone(causal):
    # DAP alone reads men's /ɔ/ (F1 570, F2 840 Hz; Peterson & Barney 1952, from memory)
    # at F0 350 and 400 Hz with F1 on 2 x F0 (measured: 696 and 799 Hz) and F2 lost,
    # and a pressed voice's /i/ (open quotient 0.4, F1 270 Hz) at F0 170 Hz on 2 x F0
    # (343 Hz): the closed-phase fit replaces the candidates there
    for fm, f0, oq in ((PB["men"]["ɔ"], 350.0, 0.6), (PB["men"]["ɔ"], 400.0, 0.6), (PB["men"]["i"], 170.0, 0.4)):
        x = synthesize_vowel(formants_hz=fm, f0_hz=f0, duration_s=0.4, rate_hz=RATE, voice="man",
                             jitter_pct=0.5, shimmer_db=0.2, seed=1, open_quotient=oq)
        for cp in (AnalysisSettings.closed_phase_below, 0.0):
            fr = analyze(x, RATE, settings=AnalysisSettings(voice="adult_male", closed_phase_below=cp),
                         causal=causal).frames
            v = fr.voiced
            f1, f2 = np.nanmedian(fr.f1_hz[v]), np.nanmedian(fr.f2_hz[v])
            if cp:
                assert abs(f1 / fm[0] - 1) < 0.03 and abs(f2 / fm[1] - 1) < 0.03, (fm, f0, f1, f2)
            else:
                assert abs(f1 / (2 * f0) - 1) < 0.03, (fm, f0, f1)      # the failure this fixes


@pytest.mark.parametrize("causal", [False, True])
def test_reading_between_harmonics_is_undone_on_a_clean_signal(causal, monkeypatch):
    # DAP alone reads men's /ɝ/ (F1 490, F2 1350 Hz; Peterson & Barney 1952, from memory)
    # at F0 350 Hz between the first two harmonics, 23 % high (measured: 603 Hz) with F2
    # right; on this noise-free signal the closed-phase fit is exact and reads F2 and F3
    # where DAP does, so its F1 is taken (engine.CLOSED_PHASE_AGREE; 0 switches it off)
    import livevowel.dsp.engine as engine

    fm = PB["men"]["ɝ"]
    x = synthesize_vowel(formants_hz=fm, f0_hz=350.0, duration_s=0.4, rate_hz=RATE, voice="man",
                         jitter_pct=0.5, shimmer_db=0.2, seed=9)
    for agree in (engine.CLOSED_PHASE_AGREE, 0.0):
        monkeypatch.setattr(engine, "CLOSED_PHASE_AGREE", agree)
        fr = analyze(x, RATE, settings=AnalysisSettings(voice="adult_male"), causal=causal).frames
        v = fr.voiced
        f1, f2 = np.nanmedian(fr.f1_hz[v]), np.nanmedian(fr.f2_hz[v])
        if agree:
            assert abs(f1 / fm[0] - 1) < 0.03 and abs(f2 / fm[1] - 1) < 0.05, (f1, f2)
        else:
            assert f1 / fm[0] - 1 > 0.15 and abs(f2 / fm[1] - 1) < 0.05, (f1, f2)   # the failure this fixes


@pytest.mark.parametrize("group", ["men", "women"])
def test_closed_phase_f1_helps_at_high_f0_in_20_db_noise(group):
    # the closed-phase F1 is noise-sensitive (it errs upwards in noise, so it
    # may then only lower DAP's reading): it must still lower the share of
    # frames > 20 % off at F0 300-400 Hz without raising the median F1 error
    # by more than 5 % of itself (measured on these signals, women / men:
    # outliers 8.3 -> 6.5 % / 22.3 -> 17.4 %, median 4.28 -> 4.36 % / 6.09 -> 5.94 %)
    f0s = (300, 350, 400)
    w1, w2 = band(group, f0s, snr_db=20.0)
    d1, d2 = band(group, f0s, snr_db=20.0, closed_phase_below=0.0)
    assert np.mean((w1 > 0.2) | (w2 > 0.2)) < np.mean((d1 > 0.2) | (d2 > 0.2))
    assert np.median(w1) <= 1.05 * np.median(d1), (np.median(w1), np.median(d1))
