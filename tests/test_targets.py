"""Target sets: shipped files against their cited tables, validation, regions, CLI."""

import math

import numpy as np
import pytest
from scipy.spatial import distance as spd

from livevowel.cli import main
from livevowel.dsp.scales import bark_to_hz
from livevowel.errors import UserError
from livevowel.targets import (BOUNDARY_SCORE, closeness_from_distance, load_target_set, shipped_sets,
                               targets_dir)
from vowel_tables import PB1952, PB_VOWELS

# --- shipped sets ---------------------------------------------------------------

#: set -> {target id: (F1, F2[, F3])} with the source of each number.
CITED = {
    # Hillenbrand et al. (1995) Table V, means for men (from memory).
    "gae-men": {"fleece": (342, 2322, 3000), "lot": (768, 1333, 2522), "goose": (378, 997, 2343),
                "nurse": (474, 1379, 1710)},
    # Hillenbrand et al. (1995) Table V, means for women (from memory).
    "gae-women": {"fleece": (437, 2761, 3372), "lot": (936, 1551, 2815), "goose": (459, 1105, 2735)},
    # Hillenbrand et al. (1995) Table V, means for children (from memory).
    "gae-children": {"fleece": (452, 3081, 3702), "lot": (1002, 1688, 2950), "goose": (494, 1345, 2988)},
    # Deterding (1997), men, citation forms (from memory, low confidence).
    "ssbe-men": {"fleece": (280, 2249), "thought": (415, 828), "goose": (316, 1191), "start": (646, 1155)},
    # Bradlow (1995), Spanish vowels of male speakers (from memory).
    "spanish-men": {"i": (286, 2147), "a": (638, 1353), "u": (322, 992)},
}


def test_expected_sets_are_shipped():
    names = set(shipped_sets())
    assert {"gae-men", "gae-women", "gae-children", "gae-pb-men", "gae-pb-women", "gae-pb-children",
            "ssbe-men", "spanish-men"} <= names
    assert all(p.parent == targets_dir() for p in shipped_sets().values())


@pytest.mark.parametrize("name", sorted(CITED))
def test_shipped_values_match_cited_table(name):
    ts = load_target_set(name)
    assert ts.from_memory  # every shipped set was entered from memory and must say so
    for tid, vals in CITED[name].items():
        t = ts.get(tid)
        got = (t.f1_hz, t.f2_hz, t.f3_hz)[: len(vals)]
        assert got == pytest.approx(vals), (name, tid)


@pytest.mark.parametrize("group,name", [("men", "gae-pb-men"), ("women", "gae-pb-women"),
                                        ("children", "gae-pb-children")])
def test_pb_sets_match_table_ii(group, name):
    # Peterson & Barney (1952) Table II (from memory), all ten vowels.
    ts = load_target_set(name)
    for i, ipa in enumerate(PB_VOWELS):
        t = ts.get(ipa)
        assert (t.f1_hz, t.f2_hz, t.f3_hz) == (PB1952[group]["f1"][i], PB1952[group]["f2"][i],
                                               PB1952[group]["f3"][i])


def test_every_shipped_set_passes_check(capsys):
    files = [str(p) for p in shipped_sets().values()]
    assert main(["targets", "check", *files]) == 0
    out = capsys.readouterr().out
    assert out.count(": ok (") == len(files)


def test_shipped_sets_state_sources_and_assumed_spread():
    for name in shipped_sets():
        ts = load_target_set(name)
        assert "(19" in ts.source or "(20" in ts.source, name  # a dated citation
        # No shipped set has SDs copied from its source yet: the spread must be flagged.
        assert all(t.spread_kind == "default" for t in ts.targets), name
        assert ts.spread_assumption and "ASSUMED" in ts.spread_assumption, name


# --- validation -------------------------------------------------------------------

GOOD = """\
title: Test set
accent: a made-up accent for tests
group: any
units: Hz
source:
  citation: "Nobody (2000). Not a real table."
  from_memory: false
default_hit_size_sd: 1.5
targets:
  - id: fleece
    ipa: i
    words: [heed]
    lexical_set: FLEECE
    f1: 300
    f2: 2300
    f3: 3000
    sd: {f1: 30, f2: 150, correlation: 0.2}
  - id: lot
    ipa: ɑ
    words: [hod, pot]
    f1: 750
    f2: 1100
    ellipse: {semi_axes: [120, 60], angle_deg: 30}
    hit_size_sd: 2.0
  - id: goose
    ipa: u
    words: [who'd]
    f1: 320
    f2: 900
    polygon: [[260, 800], [380, 800], [400, 1000], [260, 1050]]
"""


def write(tmp_path, text, name="set.yaml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_good_file_loads(tmp_path):
    ts = load_target_set(str(write(tmp_path, GOOD)))
    assert ts.id == "set" and ts.ids == ("fleece", "lot", "goose")
    assert ts.get("fleece").sd_hz == pytest.approx((30, 150))
    assert ts.get("fleece").correlation == pytest.approx(0.2)
    assert ts.get("FLEECE") is ts.get("fleece") and ts.get("ɑ") is ts.get("lot")
    assert ts.get("fleece").hit_size_sd == 1.5 and ts.get("lot").hit_size_sd == 2.0


@pytest.mark.parametrize("old,new,needles", [
    ("units: Hz", "units: kHz", ["'units'", "'kHz' is not a known unit"]),
    ("group: any", "group: adults", ["'group'", "not a speaker group"]),
    ("    f2: 2300\n", "    f2: 250\n", ["target 'fleece'", "'f2'", "plausible F2 range 400-3800 Hz"]),
    ("    f1: 750\n", "    f1: 1500\n", ["target 'lot'", "'f1'", "plausible F1 range 150-1400 Hz"]),
    ("    f1: 750\n", "    f1: 140\n", ["target 'lot'", "'f1'", "plausible F1"]),
    ("    f1: 300\n    f2: 2300\n", "    f1: 900\n    f2: 800\n", ["target 'fleece'", "'f2'", "must be above F1"]),
    ("    f3: 3000\n", "    f3: 2200\n", ["target 'fleece'", "'f3'", "must be above F2"]),
    ("    f1: 320\n", "    f1: 1000\n", ["target 'goose'", "'f2'", "must be above F1"]),
    ("    lexical_set: FLEECE\n", "    lexical_set: FLEECE\n    colour: red\n",
     ["target 'fleece'", "'colour'", "unknown key"]),
    ("title: Test set\n", "title: Test set\nauthor: me\n", ["'author'", "unknown key"]),
    ("    ipa: u\n", "", ["target 'goose'", "'ipa'", "missing value"]),
    ("    f1: 320\n", "    f1:\n", ["target 'goose'", "'f1'", "missing value"]),
    ("  from_memory: false\n", "", ["'source.from_memory'", "missing value"]),
    ("  - id: lot\n", "  - id: fleece\n", ["target 'fleece'", "'id'", "duplicate id"]),
    ("    f2: 1100\n", "    f2: 1100\n    f2: 1200\n", ["line", "'f2' appears twice"]),
    ("    f2: 1100\n", "    f2: fast\n", ["target 'lot'", "'f2'", "expected a number"]),
    ("    sd: {f1: 30, f2: 150, correlation: 0.2}\n", "",
     ["target 'fleece'", "no spread"]),
    ("    hit_size_sd: 2.0\n", "    hit_size_sd: 2.0\n    sd: {f1: 30, f2: 40}\n",
     ["target 'lot'", "only one of sd, ellipse or polygon"]),
    ("[[260, 800], [380, 800], [400, 1000], [260, 1050]]", "[[260, 800], [260, 1050], [380, 800], [400, 1000]]",
     ["target 'goose'", "'polygon'", "once around the centre"]),
    ("correlation: 0.2", "correlation: 1.5", ["target 'fleece'", "'sd.correlation'", "at most"]),
    ("targets:\n", "targets: []\nx:\n", ["unknown key"]),
])
def test_validation_messages_name_file_target_and_key(tmp_path, old, new, needles):
    assert old in GOOD
    p = write(tmp_path, GOOD.replace(old, new, 1), "broken.yaml")
    with pytest.raises(UserError) as ei:
        load_target_set(str(p))
    msg = str(ei.value)
    assert str(p) in msg
    for needle in needles:
        assert needle in msg, (needle, msg)


def test_not_yaml_and_empty_and_unknown_name(tmp_path):
    with pytest.raises(UserError, match="not valid YAML"):
        load_target_set(str(write(tmp_path, "title: [unclosed\n")))
    with pytest.raises(UserError, match="empty"):
        load_target_set(str(write(tmp_path, "", "empty.yaml")))
    with pytest.raises(UserError, match="not a shipped set .*gae-men.* and no such file"):
        load_target_set("no-such-set")


def test_bark_units_convert_to_hz(tmp_path):
    text = GOOD.replace("units: Hz", "units: Bark").replace(
        "    f1: 300\n    f2: 2300\n    f3: 3000\n    sd: {f1: 30, f2: 150, correlation: 0.2}\n",
        "    f1: 3.0\n    f2: 13.8\n    sd: {f1: 0.3, f2: 0.5}\n")
    # keep only the first target (the others are in Hz numbers)
    text = text.split("  - id: lot")[0]
    ts = load_target_set(str(write(tmp_path, text)))
    t = ts.get("fleece")
    assert ts.units == "Bark"
    # Centre: Traunmüller (1990) inverse, exactly.
    assert t.f1_hz == pytest.approx(float(bark_to_hz(3.0)))
    assert t.f2_hz == pytest.approx(float(bark_to_hz(13.8)))
    # Spread: through the local slope dHz/dBark of the scale at the centre.
    slope1 = (bark_to_hz(3.001) - bark_to_hz(2.999)) / 0.002
    assert t.sd_hz[0] == pytest.approx(0.3 * slope1, rel=1e-4)
    # A Bark value that is implausible in Hz is reported with both numbers.
    bad = text.replace("f2: 13.8", "f2: 3.1")
    with pytest.raises(UserError, match=r"3.1 Bark \(\d+ Hz\) is outside the plausible F2 range"):
        load_target_set(str(write(tmp_path, bad, "bad.yaml")))


# --- regions ------------------------------------------------------------------------

@pytest.fixture()
def good(tmp_path):
    return load_target_set(str(write(tmp_path, GOOD)))


def test_distance_is_mahalanobis_like_scipy(good):
    t = good.get("fleece")
    vi = np.linalg.inv(t.cov_hz)
    rng = np.random.default_rng(1)
    pts = rng.normal([300, 2300], [60, 300], size=(20, 2))
    for p in pts:
        ref = spd.mahalanobis(p, [300, 2300], vi)  # scipy reference
        assert t.distance(p[0], p[1]) == pytest.approx(ref, rel=1e-12)
    np.testing.assert_allclose(t.distance(pts[:, 0], pts[:, 1]),
                               [spd.mahalanobis(p, [300, 2300], vi) for p in pts], rtol=1e-12)


def test_hit_test_and_score_on_the_boundary(good):
    t = good.get("fleece")  # hit size 1.5 SD
    edge = t.outline_hz(16)
    d = t.distance(edge[:, 0], edge[:, 1])
    np.testing.assert_allclose(d, 1.5, rtol=1e-9)
    np.testing.assert_allclose(t.closeness(edge[:, 0], edge[:, 1]), BOUNDARY_SCORE, rtol=1e-9)
    c = t.centre_hz
    inner = c + 0.99 * (edge - c)
    outer = c + 1.01 * (edge - c)
    assert t.contains(inner[:, 0], inner[:, 1]).all()
    assert not t.contains(outer[:, 0], outer[:, 1]).any()
    assert t.closeness(300, 2300) == 100.0
    assert t.contains(float("nan"), 2300) is False
    assert math.isnan(t.closeness(float("nan"), 2300))


def test_closeness_formula_values():
    # 100 * 2 ** (-(d/h)**2): centre 100, edge 50, twice the hit size 6.25.
    assert closeness_from_distance(0.0, 1.5) == 100.0
    assert closeness_from_distance(1.5, 1.5) == pytest.approx(50.0)
    assert closeness_from_distance(3.0, 1.5) == pytest.approx(6.25)
    s = closeness_from_distance(np.linspace(0, 5, 50), 1.5)
    assert np.all(np.diff(s) < 0)


def test_explicit_ellipse_is_the_hit_region(good):
    t = good.get("lot")  # semi-axes 120, 60 at 30 degrees, hit size 2.0
    ang = math.radians(30)
    tip1 = (750 + 120 * math.cos(ang), 1100 + 120 * math.sin(ang))
    tip2 = (750 - 60 * math.sin(ang), 1100 + 60 * math.cos(ang))
    assert t.distance(*tip1) == pytest.approx(2.0)
    assert t.distance(*tip2) == pytest.approx(2.0)
    assert t.spread_kind == "ellipse"


def test_polygon_region(good):
    t = good.get("goose")  # hit size 1.5 (the set default)
    poly = t.polygon_hz
    np.testing.assert_allclose(t.distance(poly[:, 0], poly[:, 1]), 1.5, rtol=1e-9)
    mid = (poly + np.roll(poly, -1, axis=0)) / 2  # edge midpoints are on the boundary too
    np.testing.assert_allclose(t.distance(mid[:, 0], mid[:, 1]), 1.5, rtol=1e-9)
    assert t.contains(320, 900) and t.contains(300, 1000)
    assert not t.contains(250, 900) and not t.contains(320, 1100)
    out = t.outline_hz(40)
    np.testing.assert_allclose(t.distance(out[:, 0], out[:, 1]), 1.5, rtol=1e-9)
    big = t.outline_hz(40, size_sd=3.0)
    np.testing.assert_allclose(t.distance(big[:, 0], big[:, 1]), 3.0, rtol=1e-9)


def test_polygon_covariance_of_an_elliptical_polygon(tmp_path):
    # A 360-gon on the ellipse of semi-axes (k*s1, k*s2) must give back cov = diag(s1^2, s2^2):
    # the area moment of a uniform ellipse about its centre is (k s)^2 / 4 (common practice).
    s1, s2, k = 40.0, 150.0, 1.5
    th = np.linspace(0, 2 * np.pi, 360, endpoint=False)
    pts = [[round(500 + k * s1 * math.cos(a), 6), round(1500 + k * s2 * math.sin(a), 6)] for a in th]
    text = GOOD.split("  - id: fleece")[0] + (
        "  - id: x\n    ipa: ə\n    words: [a]\n    f1: 500\n    f2: 1500\n"
        f"    polygon: {pts}\n")
    t = load_target_set(str(write(tmp_path, text))).get("x")
    np.testing.assert_allclose(t.sd_hz, (s1, s2), rtol=1e-3)
    assert abs(t.correlation) < 1e-6


def test_nearest_and_classify(good):
    t, d = good.nearest(310, 2250)
    assert t.id == "fleece" and d == pytest.approx(good.get("fleece").distance(310, 2250))
    idx, dist = good.classify(np.array([310, 740, 330, np.nan]), np.array([2250, 1120, 950, 1000]))
    assert list(idx) == [0, 1, 2, -1]
    assert np.isnan(dist[-1])
    with pytest.raises(ValueError, match="finite"):
        good.nearest(float("nan"), 1000)
    with pytest.raises(UserError, match="no target 'trap'"):
        good.get("trap")


def test_set_distances_agree_with_each_target(good):
    rng = np.random.default_rng(7)
    f1, f2 = rng.uniform(200, 900, 30), rng.uniform(700, 2600, 30)
    d = good.distances(f1, f2)
    for j, t in enumerate(good.targets):
        np.testing.assert_allclose(d[:, j], t.distance(f1, f2), rtol=1e-12)
        for a, b in zip(f1[:5], f2[:5]):  # scalar fast path gives the same numbers
            assert t.distance(float(a), float(b)) == pytest.approx(t.distance(np.array([a]), np.array([b]))[0])
    idx, _ = good.classify(f1, f2)
    assert [good.nearest(a, b)[0].id for a, b in zip(f1, f2)] == [good.targets[i].id for i in idx]


def test_mapped_scales_centre_spread_and_polygon(good):
    m = good.mapped((1.2, 1.1, 1.05), id="mapped")
    a, b = good.get("fleece"), m.get("fleece")
    assert (b.f1_hz, b.f2_hz, b.f3_hz) == pytest.approx((360, 2530, 3150))
    assert b.sd_hz == pytest.approx((36, 165)) and b.correlation == pytest.approx(a.correlation)
    np.testing.assert_allclose(m.get("goose").polygon_hz, good.get("goose").polygon_hz * [1.2, 1.1])
    # Distances are invariant when the point moves with the mapping.
    assert b.distance(320 * 1.2, 2400 * 1.1) == pytest.approx(a.distance(320, 2400))


# --- command line -----------------------------------------------------------------------

def test_cli_list_show_check(tmp_path, capsys):
    assert main(["targets", "list"]) == 0
    out = capsys.readouterr().out
    assert "gae-women" in out and "adult_female" in out and "NAME" in out
    assert main(["targets", "show", "gae-men"]) == 0
    out = capsys.readouterr().out
    assert "Hillenbrand" in out and "from memory" in out
    header = next(line for line in out.splitlines() if line.startswith("ID"))
    for col in ("IPA", "WORDS", "F1 Hz", "F2 Hz", "F3 Hz", "SPREAD", "HIT SD"):
        assert col in header
    row = next(line for line in out.splitlines() if line.startswith("fleece"))
    assert "heed" in row and "342" in row and "2322" in row and "3000" in row
    assert main(["targets", "show", "spanish-men", "--scale", "bark"]) == 0
    assert "F1 Bark" in capsys.readouterr().out
    bad = write(tmp_path, GOOD.replace("units: Hz", "units: kHz"), "bad.yaml")
    good = write(tmp_path, GOOD, "good.yaml")
    assert main(["targets", "check", str(good), str(bad)]) == 2
    cap = capsys.readouterr()
    assert "good.yaml: ok (3 targets" in cap.out
    assert "bad.yaml: key 'units'" in cap.err and "Traceback" not in cap.err
    assert main(["targets", "show", "nope"]) == 2
    assert "no target set 'nope'" in capsys.readouterr().err


def test_find_ignores_length_marks_when_unambiguous():
    ts = load_target_set("ssbe-men")
    assert ts.get("i").id == "fleece" and ts.get("iː").id == "fleece" and ts.get("ɜ").id == "nurse"
    assert ts.find("ə") is None


def test_cli_show_with_profile(tmp_path, capsys):
    from livevowel.profile import CalibrationToken, SpeakerProfile

    toks = [CalibrationToken("i", 310, 2790), CalibrationToken("ɑ", 850, 1220), CalibrationToken("u", 370, 950)]
    path = SpeakerProfile.calibrate("W9", toks, "gae-pb-men", voice_group="adult_female").save(tmp_path / "w9.yaml")
    assert main(["targets", "show", "gae-pb-men", "--profile", str(path)]) == 0
    out = capsys.readouterr().out
    assert "mapped to speaker W9" in out and "nearey-shared" in out
    row = next(line for line in out.splitlines() if line.startswith("fleece"))
    assert "314" in row  # 270 Hz x 1.1615 (shared factor of the three P&B corner vowels)


def test_add_targets_option():
    import argparse

    from livevowel.cli.targets import add_targets_option

    p = argparse.ArgumentParser()
    add_targets_option(p, default="gae-men")
    args = p.parse_args([])
    assert load_target_set(args.targets).id == "gae-men"
    assert p.parse_args(["--targets", "x.yaml"]).targets == "x.yaml"
