"""Colours and type sizes of the practice screen.

Hues come from the colour-blind-safe palette of Okabe & Ito (2008), "Color
Universal Design (CUD): how to make figures and presentations that are
friendly to colorblind people" (the eight-colour set, also in Wong 2011,
Nature Methods 8:441). Each hue has one job on the screen:

* blue (#0072B2) -- the current target,
* vermillion (#D55E00) -- the voice dot and its trail,
* bluish green (#009E73) -- a hit (pulse, hit counter),
* orange (#E69F00) -- warnings (clipping, noisy input, input lost),
* sky blue / yellow -- the same jobs on the dark and high-contrast themes.

Other regions stay in a quiet neutral ink so the current target stands out
and the screen is calm to look at for a long time.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

RGB = tuple[int, int, int]

#: Okabe & Ito (2008) colour-universal-design palette, by their names.
OKABE_ITO: dict[str, RGB] = {
    "black": (0, 0, 0),
    "orange": (230, 159, 0),
    "sky_blue": (86, 180, 233),
    "bluish_green": (0, 158, 115),
    "yellow": (240, 228, 66),
    "blue": (0, 114, 178),
    "vermillion": (213, 94, 0),
    "reddish_purple": (204, 121, 167),
}


@dataclass(frozen=True)
class Theme:
    """Everything the renderer needs to know about colour and text size."""

    name: str
    background: RGB
    plot: RGB            # plot area fill
    grid: RGB
    axis_text: RGB
    text: RGB
    muted_text: RGB
    region_line: RGB     # other targets
    region_fill_alpha: int
    current: RGB         # the current target
    current_fill_alpha: int
    dot: RGB
    hit: RGB
    warn: RGB
    strip: RGB           # status strip background
    meter_back: RGB
    meter_fill: RGB
    overlay: tuple[int, int, int, int]
    text_scale: float = 1.0
    line_scale: float = 1.0


LIGHT = Theme(
    name="light",
    background=(236, 234, 229),
    plot=(248, 247, 244),
    grid=(218, 215, 208),
    axis_text=(95, 95, 95),
    text=(30, 30, 30),
    muted_text=(105, 105, 105),
    region_line=(120, 120, 125),
    region_fill_alpha=22,
    current=OKABE_ITO["blue"],
    current_fill_alpha=55,
    dot=OKABE_ITO["vermillion"],
    hit=OKABE_ITO["bluish_green"],
    warn=OKABE_ITO["orange"],
    strip=(225, 222, 215),
    meter_back=(205, 202, 195),
    meter_fill=(90, 90, 95),
    overlay=(250, 250, 248, 240),
)

DARK = Theme(
    name="dark",
    background=(28, 31, 36),
    plot=(36, 40, 46),
    grid=(58, 63, 71),
    axis_text=(160, 165, 172),
    text=(232, 232, 232),
    muted_text=(160, 165, 172),
    region_line=(140, 146, 155),
    region_fill_alpha=26,
    current=OKABE_ITO["sky_blue"],
    current_fill_alpha=60,
    dot=OKABE_ITO["orange"],
    hit=OKABE_ITO["bluish_green"],
    warn=OKABE_ITO["yellow"],
    strip=(22, 24, 28),
    meter_back=(55, 60, 68),
    meter_fill=(170, 175, 182),
    overlay=(28, 31, 36, 240),
)

#: High contrast: black ground, white lines, saturated palette hues, heavier lines.
CONTRAST = Theme(
    name="contrast",
    background=(0, 0, 0),
    plot=(0, 0, 0),
    grid=(110, 110, 110),
    axis_text=(255, 255, 255),
    text=(255, 255, 255),
    muted_text=(230, 230, 230),
    region_line=(255, 255, 255),
    region_fill_alpha=0,
    current=OKABE_ITO["yellow"],
    current_fill_alpha=70,
    dot=OKABE_ITO["sky_blue"],
    hit=OKABE_ITO["bluish_green"],
    warn=OKABE_ITO["orange"],
    strip=(0, 0, 0),
    meter_back=(90, 90, 90),
    meter_fill=(255, 255, 255),
    overlay=(0, 0, 0, 245),
    line_scale=1.6,
)

THEMES: dict[str, Theme] = {t.name: t for t in (LIGHT, DARK, CONTRAST)}

#: Multiplier of every text size in large-text mode.
LARGE_TEXT_SCALE = 1.4


def get_theme(name: str, *, large_text: bool = False) -> Theme:
    """The theme called ``name`` (see :data:`THEMES`), optionally with large text."""
    try:
        t = THEMES[name]
    except KeyError:
        raise ValueError(f"unknown theme {name!r}; known: {', '.join(THEMES)}") from None
    return replace(t, text_scale=LARGE_TEXT_SCALE) if large_text else t


def next_theme(name: str) -> str:
    """The theme after ``name`` in the toggle order."""
    names = list(THEMES)
    return names[(names.index(name) + 1) % len(names)] if name in names else names[0]
