"""Candidate-to-formant assignment, Viterbi and causal tracking, display smoothing.

Candidate tables here are processes with known answers (a formant track
plus distractors placed by construction); the step-response and vowel-switch
checks use the Klatt synthesiser with Peterson & Barney (1952) men's /i/ and
/ɑ/ means (from memory). The compiled kernels are also checked against the
numpy definitions they replace (``*_reference``) on random candidate tables.
"""

from __future__ import annotations

from math import comb

import numpy as np
import pytest

from livevowel.dsp.engine import AnalysisSettings, analyze
from livevowel.dsp.synth import Schedule, Segment, render
from livevowel.dsp.tracking import (CausalTracker, DisplaySmoother, FrameCoster, TrackerCosts, local_costs,
                                    local_costs_reference, median3, median3_reference, median5_hanning, state_table,
                                    transition_costs, transition_costs_reference, viterbi_segments,
                                    viterbi_segments_reference)

REF = np.array([444.0, 1387.0, 2255.0])
COSTS = TrackerCosts()


def test_state_table_lists_every_ordered_choice():
    st = state_table(6)
    assert len(st) == comb(6, 3) + comb(6, 2)
    tri = st[st[:, 2] >= 0]
    assert np.all((tri[:, 0] < tri[:, 1]) & (tri[:, 1] < tri[:, 2]))
    assert not st.flags.writeable


def test_local_costs_pick_the_obvious_reading():
    freq = np.array([[500.0, 1500.0, 2500.0, 3500.0, np.nan, np.nan]])
    bw = np.array([[60.0, 90.0, 120.0, 200.0, np.nan, np.nan]])
    st = state_table(6)
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=np.array([np.nan]), costs=COSTS)
    best = sf[0, np.argmin(cost[0])]
    np.testing.assert_array_equal(best, [500.0, 1500.0, 2500.0])
    # states that need a missing candidate are impossible
    assert np.all(np.isinf(cost[0][np.any(st >= 4, axis=1)]))


def test_wide_candidate_is_skipped_and_narrow_one_is_not():
    # a 900 Hz-wide spurious pole between F1 and F2 is left out ...
    freq = np.array([[500.0, 900.0, 1500.0, 2500.0, np.nan, np.nan]])
    bw = np.array([[60.0, 900.0, 90.0, 120.0, np.nan, np.nan]])
    st = state_table(6)
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=np.array([np.nan]), costs=COSTS)
    np.testing.assert_array_equal(sf[0, np.argmin(cost[0])], [500.0, 1500.0, 2500.0])
    # ... but a strong F2 is not skipped in favour of F3 as "F2"
    freq = np.array([[430.0, 1170.0, 3260.0, 4600.0, np.nan, np.nan]])
    bw = np.array([[150.0, 250.0, 70.0, 200.0, np.nan, np.nan]])
    ref_child = np.array([617.0, 1842.0, 2838.0])
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=ref_child, f0_hz=np.array([350.0]), costs=COSTS)
    np.testing.assert_array_equal(sf[0, np.argmin(cost[0]), :2], [430.0, 1170.0])


def test_transition_cost_is_symmetric_log_distance():
    a = np.array([[500.0, 1500.0, 2500.0]])
    b = np.array([[550.0, 1500.0, np.nan]])
    c = transition_costs(a, b, COSTS)[0, 0]
    assert c == pytest.approx(COSTS.w_trans * np.log(1.1))
    # a formant missing on either side adds nothing
    assert transition_costs(a, np.array([[500.0, 1500.0, np.nan]]), COSTS)[0, 0] == 0.0


def _track_with_distractor(n=40, seed=0):
    """F1-F3 on a slow glide, plus a distractor that hops between 700 and 1000 Hz."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    true = np.column_stack([500 + 3 * t, 1500 - 5 * t, 2500 + 0 * t]).astype(float)
    dis = np.where(t % 2 == 0, 700.0, 1000.0) + rng.normal(0, 5, n)
    freq = np.sort(np.column_stack([true, dis, np.full(n, np.nan), np.full(n, np.nan)]), axis=1)
    bw = np.where(np.isin(freq, dis), 120.0, 80.0)
    bw[np.isnan(freq)] = np.nan
    return true, freq, bw


def test_viterbi_follows_the_continuous_track():
    true, freq, bw = _track_with_distractor()
    st = state_table(freq.shape[1])
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=np.full(len(freq), np.nan), costs=COSTS)
    best = viterbi_segments(cost, sf, np.r_[True, np.zeros(len(freq) - 1, bool)], COSTS)
    got = sf[np.arange(len(freq)), best]
    np.testing.assert_allclose(got, true)


def test_viterbi_restarts_at_segment_starts_and_survives_impossible_frames():
    true, freq, bw = _track_with_distractor(10)
    freq[4] = np.nan
    bw[4] = np.nan
    st = state_table(freq.shape[1])
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=np.full(10, np.nan), costs=COSTS)
    start = np.zeros(10, bool)
    start[[0, 6]] = True
    best = viterbi_segments(cost, sf, start, COSTS)
    assert best[4] == -1
    ok = best >= 0
    np.testing.assert_allclose(sf[np.flatnonzero(ok), best[ok]], true[ok])


def test_causal_tracker_with_lookahead_follows_the_track():
    true, freq, bw = _track_with_distractor()
    st = state_table(freq.shape[1])
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=np.full(len(freq), np.nan), costs=COSTS)
    tr = CausalTracker(COSTS)
    got = []
    for i in range(len(freq)):
        nxt = (cost[i + 1], sf[i + 1]) if i + 1 < len(freq) else (None, None)
        s, p = tr.step(cost[i], sf[i], *nxt)
        got.append(sf[i, s])
        if i + 1 < len(freq):
            assert p >= 0
    np.testing.assert_allclose(np.array(got), true)


def test_median3_ignores_missing_neighbours():
    a, b, c = np.array([1.0, np.nan, 5.0]), np.array([2.0, 2.0, np.nan]), np.array([9.0, 4.0, 1.0])
    np.testing.assert_allclose(median3(a, b, c), [2.0, 3.0, np.nan])


def test_median5_hanning_is_median_then_hanning_inside_a_run():
    """Rabiner, Sambur & Schmidt (1975): running median of 5, then the
    3-point Hanning window [1/4, 1/2, 1/4]; interior values checked against
    scipy.signal.medfilt and numpy.convolve (reference libraries)."""
    from scipy.signal import medfilt

    rng = np.random.default_rng(3)
    x = 1000.0 + 30.0 * rng.standard_normal(60)
    want = np.convolve(medfilt(x, 5), [0.25, 0.5, 0.25], mode="same")
    got = median5_hanning(x)
    np.testing.assert_allclose(got[3:-3], want[3:-3], rtol=1e-12)
    # worked by hand: run edges shrink the median window to 3 then 1 and skip the Hanning window
    y = np.array([np.nan, 1.0, 2.0, 10.0, 4.0, 5.0, np.nan, 7.0, 8.0])
    np.testing.assert_allclose(median5_hanning(y), [np.nan, 1.0, 2.25, 3.75, 4.75, 5.0, np.nan, 7.0, 8.0])


def test_median5_hanning_keeps_steps_and_drops_outliers():
    """A vowel change (step) stays a step, moved by at most a quarter of it on one
    frame each side; a two-frame outlier in a run vanishes; columns are separate."""
    step = np.r_[np.full(10, 500.0), np.full(10, 700.0)]
    out = median5_hanning(np.column_stack([step, step[::-1]]))
    np.testing.assert_allclose(out[:, 0], np.r_[np.full(9, 500.0), 550.0, 650.0, np.full(9, 700.0)])
    np.testing.assert_allclose(out[:, 1], out[::-1, 0])
    spike = np.full(15, 1200.0)
    spike[6:8] = 2400.0
    np.testing.assert_allclose(median5_hanning(spike), 1200.0)
    assert median5_hanning(np.zeros((0, 3))).shape == (0, 3)


def test_display_smoother_passes_jumps_and_damps_jitter():
    sm = DisplaySmoother(alpha_min=0.4, jump=0.15)
    sm.step(np.array([500.0, 1500.0, 2500.0]))
    rng = np.random.default_rng(0)
    jit = 500.0 * (1 + 0.02 * rng.standard_normal(200))
    ys = np.array([sm.step(np.array([j, 1500.0, 2500.0]))[0] for j in jit])
    assert np.std(ys) < 0.8 * np.std(jit)           # 2 % jitter is reduced
    y = sm.step(np.array([750.0, 1500.0, 2500.0]))  # a 50 % step passes at once
    assert y[0] == pytest.approx(750.0)
    sm.reset()
    sm.step(np.array([300.0, np.nan, 2000.0]))
    # a formant that reappears takes its new value at once
    assert sm.step(np.array([300.0, 1000.0, 2000.0]))[1] == 1000.0


def test_step_response_lag_of_the_causal_engine():
    """A sudden /i/ -> /ɑ/ change: the causal F1 reaches the new vowel within one hop of the offline track."""
    men_i, men_a = (270.0, 2290.0, 3010.0), (730.0, 1090.0, 2440.0)
    sch = Schedule((Segment(duration_s=0.25, f0_start_hz=120.0, formants_hz=men_i),
                    Segment(duration_s=0.25, f0_start_hz=120.0, formants_hz=men_a)), voice="man")
    y, _ = render(sch, rate_hz=16000, seed=1, peak_dbfs=-6.0)
    s = AnalysisSettings(voice="adult_male")
    c = analyze(y, 16000, settings=s, causal=True).frames
    o = analyze(y, 16000, settings=s).frames
    half = 0.5 * (270.0 + 730.0)

    def crossing(fr):
        after = np.flatnonzero((fr.time_s > 0.2) & (fr.f1_hz > half))
        return fr.time_s[after[0]]

    lag = crossing(c) - crossing(o)
    assert lag <= 0.010 + 1e-9
    # and both settle on the new vowel within 3 hops of the change plus half a window
    assert crossing(c) < 0.25 + 0.0125 + 0.03
    late = c.time_s > 0.32
    assert np.all(np.abs(c.f1_hz[late] / 730.0 - 1) < 0.05)


def test_causal_tracker_leaves_a_wrong_reading_after_a_jump():
    """Process with a known answer: F1-F3 jump from /i/ to /ɑ/ (Peterson & Barney 1952 men's means,
    from memory) with a fourth candidate above F3 throughout.

    Right after the jump, "F3 of /ɑ/ as F2, the extra pole as F3" sits close to the old /i/ reading,
    so a tracker that only weighs the transition from its last choice keeps it for as long as each
    frame's local saving is smaller than the jump. With the forward recursion the correct reading
    takes over as soon as the summed local costs outweigh the one jump: within two frames here.
    """
    men_i, men_a = (270.0, 2290.0, 3010.0), (730.0, 1090.0, 2440.0)
    n, jump = 30, 10
    true = np.array([men_i] * jump + [men_a] * (n - jump))
    extra = np.where(np.arange(n) < jump, 3500.0, 3550.0)[:, None]
    freq = np.column_stack([true, extra, np.full((n, 2), np.nan)])
    bw = np.where(np.isnan(freq), np.nan, np.array([60.0, 100.0, 150.0, 250.0, 0.0, 0.0]))
    st = state_table(6)
    ref_men = np.array([500.0, 1500.0, 2500.0])   # neutral tube, 17.5 cm (common practice)
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=ref_men, f0_hz=np.full(n, np.nan), costs=COSTS)
    # the trap: the wrong reading is cheaper to move to than the right one ...
    wrong = np.flatnonzero(np.all(sf[jump] == [730.0, 2440.0, 3550.0], axis=1))[0]
    right = np.flatnonzero(np.all(sf[jump] == men_a, axis=1))[0]
    tr = transition_costs(np.array([men_i]), sf[jump], COSTS)[0]
    assert tr[right] - tr[wrong] > cost[jump, wrong] - cost[jump, right] > 0
    # ... yet the causal track reads /ɑ/ correctly from two frames after the jump on
    tracker = CausalTracker(COSTS)
    got = []
    for i in range(n):
        nxt = (cost[i + 1], sf[i + 1]) if i + 1 < n else (None, None)
        s, _ = tracker.step(cost[i], sf[i], *nxt)
        got.append(sf[i, s])
    got = np.array(got)
    np.testing.assert_allclose(got[:jump], true[:jump])
    np.testing.assert_allclose(got[jump + 2:], true[jump + 2:])
    # and it agrees with the offline path there
    best = viterbi_segments(cost, sf, np.r_[True, np.zeros(n - 1, bool)], COSTS)
    np.testing.assert_allclose(got[jump + 2:], sf[np.arange(n), best][jump + 2:])


def _switch_frame_offsets(rate, voice, f0, seed):
    """Klatt-synthesised /i/ <-> /ɑ/ switches (Peterson & Barney 1952 men's means, from memory).

    Returns, per switch, the frame-centre time past the switch of the first of three causal frames
    whose F1 and F2 are both within 10 % of the new vowel's (inf when never)."""
    men_i, men_a = (270.0, 2290.0, 3010.0), (730.0, 1090.0, 2440.0)
    segs = [Segment(duration_s=0.3, kind="silent")]
    switch_t, targets, t = [], [], 0.3
    for k, (fm, dur) in enumerate(((men_i, 0.7), (men_a, 0.3), (men_i, 0.3), (men_a, 0.3))):
        segs.append(Segment(duration_s=dur, f0_start_hz=f0, formants_hz=fm))
        if k:
            switch_t.append(t)
            targets.append(fm)
        t += dur
    segs.append(Segment(duration_s=0.1, kind="silent"))
    y, _ = render(Schedule(tuple(segs), voice="man"), rate_hz=rate, seed=seed, peak_dbfs=-6.0)
    fr = analyze(y, rate, settings=AnalysisSettings(voice=voice), causal=True).frames
    out = []
    for ts, fm in zip(switch_t, targets):
        ok = ((np.abs(fr.f1_hz / fm[0] - 1) <= 0.1) & (np.abs(fr.f2_hz / fm[1] - 1) <= 0.1)
              & (fr.time_s >= ts) & fr.voiced)
        run3 = np.flatnonzero(ok[:-2] & ok[1:-1] & ok[2:])
        out.append(fr.time_s[run3[0]] - ts if run3.size else np.inf)
        # and it stays on the new vowel until the next switch
        if run3.size:
            stay = (fr.time_s >= fr.time_s[run3[0]]) & (fr.time_s < ts + 0.3 - 0.0125)
            assert np.all(ok[stay]), f"switch at {ts:.2f} s: leaves the new vowel again"
    return np.array(out)


@pytest.mark.parametrize("f0", [100.0, 140.0])
def test_causal_engine_follows_vowel_switches_promptly(f0):
    """Every /i/ <-> /ɑ/ switch is read within half a window plus two hops (frame centres).

    Half a window (12.5 ms) until a frame holds only the new vowel, then one hop for the tracker's
    lookahead and one for the display median. Before the forward recursion, /i/ -> /ɑ/ kept F3 of
    /ɑ/ as F2 for the whole vowel here."""
    off = _switch_frame_offsets(16000, "adult_male", f0, seed=0)
    assert np.all(off <= 0.0125 + 0.020 + 1e-9), off


def _random_tables(n=300, k=6, seed=0):
    rng = np.random.default_rng(seed)
    freq = np.sort(rng.uniform(100.0, 4500.0, (n, k)), axis=1)
    count = rng.integers(1, k + 1, n)
    freq[np.arange(k)[None, :] >= count[:, None]] = np.nan
    bw = np.where(np.isnan(freq), np.nan, rng.uniform(20.0, 900.0, (n, k)))
    f0 = np.where(rng.random(n) < 0.2, np.nan, rng.uniform(80.0, 450.0, n))
    return freq, bw, f0


@pytest.mark.parametrize("costs", [COSTS, TrackerCosts(w_skip=0.0, w_harm=0.0, miss_cost=0.5)])
@pytest.mark.parametrize("max_hz", [None, np.array([1100.0, 2800.0, 3800.0])])
def test_compiled_costs_equal_the_array_definitions(costs, max_hz):
    """The compiled kernels compute the numpy definitions (equal to rounding; same choices)."""
    freq, bw, f0 = _random_tables()
    st = state_table(freq.shape[1])
    got = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=f0, costs=costs, max_hz=max_hz)
    want = local_costs_reference(freq, bw, states=st, ref_hz=REF, f0_hz=f0, costs=costs, max_hz=max_hz)
    np.testing.assert_array_equal(np.isinf(got[0]), np.isinf(want[0]))
    np.testing.assert_allclose(got[0], want[0], rtol=1e-12, atol=1e-12)
    np.testing.assert_array_equal(got[1], want[1])
    np.testing.assert_array_equal(got[2], want[2])
    np.testing.assert_array_equal(np.argmin(got[0], axis=1), np.argmin(want[0], axis=1))
    # one frame at a time (the streaming path): row for row the batched result
    fc = FrameCoster(freq.shape[1], ref_hz=REF, costs=costs, max_hz=max_hz)
    for i in range(0, len(freq), 37):
        for a, b in zip(fc(freq[i], bw[i], f0[i]), (got[0][i], got[1][i], got[2][i])):
            np.testing.assert_array_equal(a, b)
    # a subset of the states (not the cached table), from strided input
    sub = st[::3]
    g2 = local_costs(np.asfortranarray(freq), bw, states=sub, ref_hz=REF, f0_hz=f0, costs=costs, max_hz=max_hz)
    w2 = local_costs_reference(freq, bw, states=sub, ref_hz=REF, f0_hz=f0, costs=costs, max_hz=max_hz)
    np.testing.assert_allclose(g2[0], w2[0], rtol=1e-12, atol=1e-12)
    tr = transition_costs(got[1][5], got[1][6], costs)
    np.testing.assert_allclose(tr, transition_costs_reference(got[1][5], got[1][6], costs), rtol=1e-12, atol=1e-12)


def test_compiled_median_and_smoother_equal_the_array_definitions():
    rng = np.random.default_rng(3)
    x = rng.uniform(200.0, 3000.0, (200, 3, 3))
    x[rng.random(x.shape) < 0.2] = np.nan
    for a, b, c in x:
        np.testing.assert_array_equal(median3(a, b, c), median3_reference(a, b, c))
    one, two = DisplaySmoother(alpha_min=0.3, jump=0.1), DisplaySmoother(alpha_min=0.3, jump=0.1)
    for a, b, c in x:
        want = one.step(median3_reference(a, b, c)[None, :])[0]    # 2-D input: the numpy formula
        np.testing.assert_array_equal(two.step_median(a, b, c), want)


def test_causal_tracker_step_agrees_with_the_forward_recursion_written_out():
    """Decisions equal argmin(acc + lookahead) with acc from the Viterbi recursion (numpy, by hand)."""
    freq, bw, f0 = _random_tables(120, seed=5)
    st = state_table(freq.shape[1])
    cost, sf, _ = local_costs_reference(freq, bw, states=st, ref_hz=REF, f0_hz=f0, costs=COSTS)
    tracker = CausalTracker(COSTS)
    acc = prev_sf = None
    for i in range(len(freq)):
        cn, sn = (cost[i + 1], sf[i + 1]) if i + 1 < len(freq) else (None, None)
        got = tracker.step(cost[i], sf[i], cn, sn)
        if not np.isfinite(cost[i]).any():
            assert got == (-1, -1)
            continue
        a = cost[i].copy() if acc is None else (
            np.min(acc[:, None] + transition_costs_reference(prev_sf, sf[i], COSTS), axis=0) + cost[i])
        acc, prev_sf = a - a.min(), sf[i]
        tot = acc.copy()
        nxt = -1
        if cn is not None and np.isfinite(cn).any():
            look = transition_costs_reference(sf[i], sn, COSTS) + cn[None, :]
            tot = acc + look.min(axis=1)
            nxt = int(np.argmin(look[int(np.argmin(tot))]))
        assert got == (int(np.argmin(tot)), nxt)


def test_compiled_viterbi_equals_the_array_definition():
    freq, bw, f0 = _random_tables(400, seed=7)
    st = state_table(freq.shape[1])
    cost, sf, _ = local_costs(freq, bw, states=st, ref_hz=REF, f0_hz=f0, costs=COSTS)
    start = np.zeros(len(freq), bool)
    start[[0, 50, 51, 200]] = True
    got = viterbi_segments(cost, sf, start, COSTS)
    np.testing.assert_array_equal(got, viterbi_segments_reference(cost, sf, start, COSTS))
    assert np.all(got[~np.isfinite(cost).any(axis=1)] == -1)


def test_mismatched_shapes_are_refused():
    st = state_table(6)
    cost, sf, _ = local_costs(np.array([[500.0, 1500.0, 2500.0, np.nan, np.nan, np.nan]]),
                              np.array([[80.0, 90.0, 100.0, np.nan, np.nan, np.nan]]), states=st, ref_hz=REF,
                              f0_hz=np.array([np.nan]), costs=COSTS)
    with pytest.raises(ValueError):
        CausalTracker(COSTS).step(cost[0][:-1], sf[0], None, None)
    with pytest.raises(ValueError):
        viterbi_segments(cost, sf[:, :-1], np.array([True]), COSTS)
    with pytest.raises(ValueError):
        FrameCoster(6, ref_hz=REF, costs=COSTS)(np.zeros(5), np.zeros(5), 100.0)


# Peterson & Barney (1952) women's means (F1, F2, F3 in Hz), from memory
_PB_WOMEN = {"i": (310, 2790, 3310), "ɪ": (430, 2480, 3070), "ɛ": (610, 2330, 2990), "æ": (860, 2050, 2850),
             "ɑ": (850, 1220, 2810), "ɔ": (590, 920, 2710), "ʊ": (470, 1160, 2680), "u": (370, 950, 2670),
             "ʌ": (760, 1400, 2780), "ɝ": (500, 1640, 1960)}


@pytest.mark.parametrize("seed", [0, 3])
def test_causal_track_recovers_after_abrupt_changes_between_all_vowels(seed):
    """Ten women's vowels in a random order, each switched to abruptly (Klatt synthesiser).

    After each change the causal track must settle on the new vowel: in the steady part (50 ms
    after the change on) at most 2 % of voiced frames more than 20 % off in F1 or F2. The greedy
    tracker this replaced held a wrong reading through whole vowels here (20 and 30 % of the
    steady frames off for these two orders)."""
    order = np.random.default_rng(seed).permutation(len(_PB_WOMEN))
    vowels = list(_PB_WOMEN.values())
    segs, spans, t = [Segment(duration_s=0.2, kind="silent")], [], 0.2
    for j in order:
        segs.append(Segment(duration_s=0.3, f0_start_hz=190.0, formants_hz=vowels[j]))
        spans.append((t, t + 0.3, vowels[j]))
        t += 0.3
    segs.append(Segment(duration_s=0.1, kind="silent"))
    y, _ = render(Schedule(tuple(segs), voice="woman"), rate_hz=16000, seed=seed, peak_dbfs=-6.0)
    fr = analyze(y, 16000, settings=AnalysisSettings(voice="adult_female"), causal=True).frames
    off, count = 0, 0
    for a, b, fm in spans:
        m = (fr.time_s > a + 0.05) & (fr.time_s < b - 0.0125) & fr.voiced
        with np.errstate(invalid="ignore"):
            bad = (np.abs(fr.f1_hz[m] / fm[0] - 1) > 0.2) | (np.abs(fr.f2_hz[m] / fm[1] - 1) > 0.2)
        off += int(np.sum(bad | np.isnan(fr.f2_hz[m])))
        count += int(m.sum())
    assert count > 0.8 * len(spans) * 0.2 / 0.01
    assert off <= 0.02 * count, f"{off} of {count} steady frames more than 20 % off"


def test_causal_tracker_is_safe_with_buffers_refilled_in_place():
    # a caller that keeps two buffers and refills one in place (here after skipping a frame)
    # gets the decisions of a caller that passes fresh arrays: the kept transitions are only
    # reused for equal state values (reference: the same calls on fresh copies)
    freq, bw, f0 = _random_tables(80, seed=11)
    st = state_table(freq.shape[1])
    cost, sf, _ = local_costs_reference(freq, bw, states=st, ref_hz=REF, f0_hz=f0, costs=COSTS)
    order = [i for i in range(len(freq) - 1) if i % 7 != 3]          # every seventh frame skipped
    fresh, reused = CausalTracker(COSTS), CausalTracker(COSTS)
    bufs = [(np.empty_like(cost[0]), np.empty_like(sf[0])) for _ in range(2)]
    for j, i in enumerate(order):
        want = fresh.step(cost[i].copy(), sf[i].copy(), cost[i + 1].copy(), sf[i + 1].copy())
        (ct, stt), (cn, sn) = bufs[j % 2], bufs[(j + 1) % 2]
        ct[:], stt[:], cn[:], sn[:] = cost[i], sf[i], cost[i + 1], sf[i + 1]
        assert reused.step(ct, stt, cn, sn) == want, i
