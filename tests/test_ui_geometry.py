"""Vowel-plane geometry: (F1, F2) <-> pixel in Hz and Bark, ranges, grid ticks."""

import math

import numpy as np
import pytest

from livevowel.ui.geometry import Plane, PlaneRange, Rect, nice_ticks, range_for_outlines


def traunmuller_bark(f):
    """Traunmüller (1990), JASA 88(1) 97-100: z = 26.81 f / (1960 + f) - 0.53,
    then z + 0.15 (2 - z) below 2 Bark and z + 0.22 (z - 20.1) above 20.1 Bark.
    Written out here independently of livevowel.dsp.scales."""
    z = 26.81 * f / (1960.0 + f) - 0.53
    if z < 2:
        z = z + 0.15 * (2 - z)
    elif z > 20.1:
        z = z + 0.22 * (z - 20.1)
    return z


RNG = PlaneRange(f1_hz=(200.0, 1000.0), f2_hz=(500.0, 3000.0))
RECT = Rect(40, 100, 1000, 600)


def test_known_point_in_hz_lands_at_formula_pixel():
    p = Plane(RNG, RECT, units="hz")
    f1, f2 = 500.0, 1500.0
    # phonetic orientation: F2 grows to the left, F1 grows downwards
    x_expected = 40 + 1000 * (3000 - 1500) / (3000 - 500)   # = 640
    y_expected = 100 + 600 * (500 - 200) / (1000 - 200)     # = 325
    x, y = p.to_pixel(f1, f2)
    assert float(x) == pytest.approx(x_expected, abs=1e-9)
    assert float(y) == pytest.approx(y_expected, abs=1e-9)
    assert (x_expected, y_expected) == (640.0, 325.0)


def test_known_point_in_bark_lands_at_formula_pixel():
    p = Plane(RNG, RECT, units="bark")
    f1, f2 = 500.0, 1500.0
    b = traunmuller_bark
    x_expected = 40 + 1000 * (b(3000) - b(1500)) / (b(3000) - b(500))
    y_expected = 100 + 600 * (b(500) - b(200)) / (b(1000) - b(200))
    x, y = p.to_pixel(f1, f2)
    assert float(x) == pytest.approx(x_expected, abs=1e-6)
    assert float(y) == pytest.approx(y_expected, abs=1e-6)
    # worked value of the formula (Traunmüller 1990): 1000 Hz is about 8.53 Bark
    assert b(1000) == pytest.approx(8.527, abs=0.001)


@pytest.mark.parametrize("units", ["hz", "bark"])
def test_orientation_and_corners(units):
    p = Plane(RNG, RECT, units=units)
    x_front, _ = p.to_pixel(500, 2500)
    x_back, _ = p.to_pixel(500, 900)
    _, y_close = p.to_pixel(300, 1500)
    _, y_open = p.to_pixel(800, 1500)
    assert x_front < x_back          # front vowels (high F2) on the left
    assert y_close < y_open          # open vowels (high F1) low on the screen
    x, y = p.to_pixel(200, 3000)     # lowest F1, highest F2: top-left corner
    assert (float(x), float(y)) == pytest.approx((40, 100))
    x, y = p.to_pixel(1000, 500)     # highest F1, lowest F2: bottom-right corner
    assert (float(x), float(y)) == pytest.approx((1040, 700))


@pytest.mark.parametrize("units", ["hz", "bark"])
def test_pixel_to_hz_inverts_mapping(units):
    p = Plane(RNG, RECT, units=units)
    f1 = np.array([250.0, 400.0, 730.0, 990.0])
    f2 = np.array([600.0, 1090.0, 2290.0, 2950.0])
    x, y = p.to_pixel(f1, f2)
    g1, g2 = p.to_hz(x, y)
    np.testing.assert_allclose(g1, f1, rtol=1e-9)
    np.testing.assert_allclose(g2, f2, rtol=1e-9)


def test_nan_maps_to_nan():
    p = Plane(RNG, RECT, units="hz")
    x, y = p.to_pixel(np.nan, 1500)
    assert math.isnan(float(y))


def test_nice_ticks():
    # 1-2-2.5-5 steps ("nice numbers", Heckbert 1990); arithmetic checks
    np.testing.assert_allclose(nice_ticks(270, 940, count=7), [300, 400, 500, 600, 700, 800, 900])
    np.testing.assert_allclose(nice_ticks(600, 2800, count=8), np.arange(750, 2751, 250))
    np.testing.assert_allclose(nice_ticks(2.5, 8.3, count=6), [3, 4, 5, 6, 7, 8])
    t = nice_ticks(0.013, 0.0871, count=5)
    assert np.all(np.diff(t) > 0) and t[0] >= 0.013 and t[-1] <= 0.0871
    with pytest.raises(ValueError):
        nice_ticks(5, 5)


@pytest.mark.parametrize("units", ["hz", "bark"])
def test_range_holds_outlines_with_margin(units):
    a = np.linspace(0, 2 * np.pi, 32, endpoint=False)
    o1 = np.column_stack([300 + 30 * np.cos(a), 2300 + 150 * np.sin(a)])
    o2 = np.column_stack([750 + 60 * np.cos(a), 1100 + 90 * np.sin(a)])
    r = range_for_outlines([o1, o2], units=units, margin=0.1)
    assert r.f1_hz[0] < 270 and r.f1_hz[1] > 810
    assert r.f2_hz[0] < 1010 and r.f2_hz[1] > 2450
    # margin is about 10% of the span on each side, not more than 25%
    assert r.f1_hz[0] > 270 - 0.25 * 540
    tight = range_for_outlines([o1, o2], units=units, margin=0.0)
    assert tight.f1_hz[0] == pytest.approx(270, rel=1e-6)
    assert tight.f2_hz[1] == pytest.approx(2450, rel=1e-6)


def test_range_widens_a_single_small_region():
    a = np.linspace(0, 2 * np.pi, 16, endpoint=False)
    o = np.column_stack([500 + 5 * np.cos(a), 1500 + 5 * np.sin(a)])
    r = range_for_outlines([o], units="hz", margin=0.0)
    assert r.f1_hz[1] - r.f1_hz[0] == pytest.approx(250)
    assert r.f2_hz[1] - r.f2_hz[0] == pytest.approx(600)
