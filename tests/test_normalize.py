"""Normalisation methods on a published table (Peterson & Barney 1952 means)."""

import numpy as np
import pytest
from scipy import stats

from livevowel.normalize import (TokenTable, bark_difference, lobanov, nearey, watt_fabricius)
from vowel_tables import PB_VOWELS, pb_table


@pytest.fixture(scope="module")
def pb():
    return pb_table()


def test_lobanov_zero_mean_unit_sd_per_speaker_and_formant(pb):
    res = lobanov(pb, formants=("f1", "f2", "f3"))
    for s in ("men", "women", "children"):
        v = res.values[pb.speaker == s]
        np.testing.assert_allclose(v.mean(axis=0), 0.0, atol=1e-12)
        np.testing.assert_allclose(v.std(axis=0, ddof=1), 1.0, atol=1e-12)


def test_lobanov_matches_scipy_zscore(pb):
    # Reference library: scipy.stats.zscore with the sample SD (ddof=1).
    res = lobanov(pb)
    m = pb.speaker == "women"
    np.testing.assert_allclose(res.column("f1")[m], stats.zscore(pb.f1[m], ddof=1), rtol=1e-12)
    np.testing.assert_allclose(res.column("f2")[m], stats.zscore(pb.f2[m], ddof=1), rtol=1e-12)


def test_lobanov_brings_groups_together(pb):
    # The point of normalising: the three groups' values for the same vowel
    # end up much closer than in Hz (scaled by the pooled spread to compare).
    raw = pb.formants(("f1", "f2"))
    res = lobanov(pb).values

    def group_gap(x):
        per_group = np.stack([x[pb.speaker == s] for s in ("men", "women", "children")])
        return np.mean(per_group.std(axis=0) / x.std(axis=0))

    assert group_gap(res) < 0.5 * group_gap(raw)


def test_nearey_shared_uses_one_constant(pb):
    res = nearey(pb, shared=True)
    logs = np.log(pb.formants(("f1", "f2")))
    for s in ("men", "women", "children"):
        m = pb.speaker == s
        g = logs[m].mean()  # mean over both formants and all vowels
        np.testing.assert_allclose(res.values[m], logs[m] - g, atol=1e-12)
        assert res.values[m].mean() == pytest.approx(0.0, abs=1e-12)
        assert np.ptp(res.params[s]["log_mean"]) == 0


def test_nearey_per_formant_zero_log_mean_per_formant(pb):
    res = nearey(pb, formants=("f1", "f2", "f3"), shared=False)
    for s in ("men", "women", "children"):
        np.testing.assert_allclose(res.values[pb.speaker == s].mean(axis=0), 0.0, atol=1e-12)


def test_nearey_shared_ratio_women_to_men(pb):
    # exp(G_women - G_men) over the 10 P&B vowels and F1, F2: the women's
    # formants are a roughly constant ratio above the men's (computed from
    # the P&B table itself, by the formula G = mean ln F).
    res = nearey(pb)
    ratio = np.exp(res.params["women"]["log_mean"][0] - res.params["men"]["log_mean"][0])
    logs = np.log(pb.formants(("f1", "f2")))
    expect = np.exp(logs[pb.speaker == "women"].mean() - logs[pb.speaker == "men"].mean())
    assert ratio == pytest.approx(expect)
    assert 1.10 < ratio < 1.25


def test_watt_fabricius_worked_values(pb):
    # Watt & Fabricius (2002) formula on P&B men: /i/ = (270, 2290), /a/ = /ɑ/ = (730, 1090),
    # /u'/ = (270, 270). S(F1) = (270+730+270)/3 = 423.33; S(F2) = (2290+1090+270)/3 = 1216.67.
    res = watt_fabricius(pb, a_vowel="ɑ")
    assert res.params["men"]["S"] == pytest.approx([423.3333, 1216.6667], abs=1e-3)
    i = (pb.speaker == "men") & (pb.vowel == "i")
    assert res.values[i][0] == pytest.approx([270 / 423.3333, 2290 / 1216.6667], rel=1e-5)
    # Modified form (Fabricius, Watt & Johnson 2009): F2 of /a/ = (2290 + 270)/2 = 1280,
    # so S(F2) = (2290 + 1280 + 270)/3 = 1280.
    mod = watt_fabricius(pb, a_vowel="ɑ", modified=True)
    assert mod.params["men"]["S"][1] == pytest.approx(1280.0)


def test_watt_fabricius_needs_corner_vowels(pb):
    with pytest.raises(ValueError, match="no /a/ token"):
        watt_fabricius(pb)  # P&B has /ɑ/, not /a/


def test_bark_difference_three_bark_criterion(pb):
    # Syrdal & Gopal (1986): Z3-Z2 < 3 Bark for front vowels, Z1-Z0 < 3 Bark for
    # high vowels. On the P&B men's means (Traunmüller Bark) this separates
    # front from back, and i, ɪ, u from the non-high vowels (/ʊ/ sits on the
    # boundary at 3.05 Bark and is left out).
    res = bark_difference(pb)
    men = pb.speaker == "men"
    z32 = dict(zip(pb.vowel[men], res.column("z3_z2")[men]))
    z10 = dict(zip(pb.vowel[men], res.column("z1_z0")[men]))
    for v in ("i", "ɪ", "ɛ", "æ"):
        assert z32[v] < 3, v
    for v in ("ɑ", "ɔ", "ʊ", "u", "ʌ"):
        assert z32[v] > 3, v
    for v in ("i", "ɪ", "u"):
        assert z10[v] < 3, v
    for v in ("ɛ", "æ", "ɑ", "ɔ", "ʌ"):
        assert z10[v] > 3, v


def test_bark_difference_without_f0_or_f3_gives_nan():
    t = TokenTable(speaker=["a", "a"], vowel=["i", "u"], f1=[300, 320], f2=[2300, 900])
    res = bark_difference(t)
    assert np.isnan(res.column("z3_z1")).all() and np.isnan(res.column("z1_z0")).all()


def test_token_table_checks_input():
    with pytest.raises(ValueError, match="shape"):
        TokenTable(speaker=["a", "b"], vowel=["i"], f1=[300, 310], f2=[2300, 2200])
    with pytest.raises(ValueError, match="positive"):
        TokenTable(speaker=["a"], vowel=["i"], f1=[-300], f2=[2300])
    with pytest.raises(ValueError, match="no f3"):
        lobanov(TokenTable(speaker=["a", "a"], vowel=["i", "u"], f1=[300, 320], f2=[2300, 900]),
                formants=("f1", "f3"))
    with pytest.raises(ValueError, match="more than 1 tokens"):
        lobanov(TokenTable(speaker=["a"], vowel=["i"], f1=[300], f2=[2300]))


def test_vowel_means_and_speakers_order(pb):
    res = nearey(pb)
    assert pb.speakers() == ("men", "women", "children")
    assert tuple(res.vowel_means()) == PB_VOWELS


def _cross_group_correct(pb, values):
    """Women's and children's P&B means matched to the men's means by nearest
    neighbour in the normalised space (each column scaled by its overall SD)."""
    sd = values.std(axis=0)
    men = values[pb.speaker == "men"]
    out = {}
    for g in ("women", "children"):
        x = values[pb.speaker == g]
        d = (((x[:, None, :] - men[None, :, :]) / sd) ** 2).sum(-1)
        out[g] = int((d.argmin(axis=1) == np.arange(len(PB_VOWELS))).sum())
    return out


def test_every_method_maps_pb_groups_onto_the_men(pb):
    # Peterson & Barney (1952) means, each group normalised on its own 10 vowels.
    # Figures (women, children correct of 10): raw Hz 7, 4; Lobanov, Nearey (both),
    # Watt & Fabricius (both) 10, 10; Bark differences (all three) 9, 9.
    raw = _cross_group_correct(pb, pb.formants(("f1", "f2")))
    assert raw == {"women": 7, "children": 4}
    results = {
        "lobanov": lobanov(pb).values,
        "nearey-shared": nearey(pb).values,
        "nearey-per-formant": nearey(pb, shared=False).values,
        "watt-fabricius": watt_fabricius(pb, a_vowel="ɑ").values,
        "watt-fabricius-modified": watt_fabricius(pb, a_vowel="ɑ", modified=True).values,
        "bark-difference": bark_difference(pb).values,
    }
    for name, vals in results.items():
        got = _cross_group_correct(pb, vals)
        assert min(got.values()) >= 9, (name, got)
        assert got["children"] > raw["children"], name
