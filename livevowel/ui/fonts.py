"""Finding a font that has the IPA vowel symbols, and caching rendered text.

pygame's built-in font (freesansbold) has no glyphs for most IPA vowels
(ɑ ɛ ɪ ʊ ʌ ɔ ɝ ə come out as empty boxes), so the screen looks for DejaVu
Sans, which has them, in this order:

1. the file named by the environment variable ``LIVEVOWEL_FONT``,
2. the Debian/Ubuntu package ``fonts-dejavu-core``
   (``/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf``),
3. the copy bundled with matplotlib (``mpl-data/fonts/ttf/DejaVuSans.ttf``),
4. common system fonts with IPA coverage on macOS and Windows,
5. pygame's default font (IPA symbols will be boxes; a warning says so).
"""

from __future__ import annotations

import importlib.util
import os
from collections import OrderedDict
from pathlib import Path

#: The IPA vowel symbols the screen must be able to show.
IPA_PROBE = "ɑɛɪʊʌæɔɝə"


def _matplotlib_fonts() -> Path | None:
    spec = importlib.util.find_spec("matplotlib")
    if spec is None or not spec.submodule_search_locations:
        return None
    return Path(list(spec.submodule_search_locations)[0]) / "mpl-data" / "fonts" / "ttf"


def candidate_paths(bold: bool = False) -> list[Path]:
    """Font files to try, best first (see the module docstring)."""
    name = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
    out: list[Path] = []
    env = os.environ.get("LIVEVOWEL_FONT")
    if env:
        out.append(Path(env))
    out.append(Path("/usr/share/fonts/truetype/dejavu") / name)
    mpl = _matplotlib_fonts()
    if mpl is not None:
        out.append(mpl / name)
    out += [Path("/System/Library/Fonts/Supplemental/Arial Unicode.ttf"),
            Path("/Library/Fonts/Arial Unicode.ttf"),
            Path("C:/Windows/Fonts/segoeuib.ttf" if bold else "C:/Windows/Fonts/segoeui.ttf")]
    return out


def find_font(bold: bool = False) -> Path | None:
    """The first existing candidate font file, or None (use pygame's default)."""
    for p in candidate_paths(bold):
        if p.is_file():
            return p
    return None


def renders_glyphs(font, text: str = IPA_PROBE) -> bool:
    """True when every character of ``text`` renders differently from a missing glyph.

    A missing glyph is drawn as the font's ".notdef" box; comparing against a
    private-use code point (U+E000, never assigned) finds it.
    """
    import pygame

    missing = pygame.image.tobytes(font.render("\ue000", True, (0, 0, 0), (255, 255, 255)), "RGB")
    for ch in text:
        if pygame.image.tobytes(font.render(ch, True, (0, 0, 0), (255, 255, 255)), "RGB") == missing:
            return False
    return True


class FontBook:
    """pygame fonts by pixel size, plus a small cache of rendered text surfaces."""

    def __init__(self, *, max_cached: int = 512) -> None:
        import pygame

        if not pygame.font.get_init():
            pygame.font.init()
        self.regular_path = find_font(False)
        self.bold_path = find_font(True) or self.regular_path
        self._fonts: dict[tuple[int, bool], object] = {}
        self._text: OrderedDict = OrderedDict()
        self._max = max_cached
        self.has_ipa = renders_glyphs(self.font(24))

    @property
    def description(self) -> str:
        """Which font file is in use (for logs and reports)."""
        return str(self.regular_path) if self.regular_path else "pygame default font (no IPA glyphs)"

    def font(self, size: int, bold: bool = False):
        import pygame

        size = max(6, int(round(size)))
        key = (size, bold)
        f = self._fonts.get(key)
        if f is None:
            path = self.bold_path if bold else self.regular_path
            f = pygame.font.Font(str(path) if path else None, size)
            self._fonts[key] = f
        return f

    def text(self, text: str, size: int, color, *, bold: bool = False):
        """A rendered (anti-aliased, transparent) text surface, cached."""
        key = (text, int(round(size)), tuple(color), bold)
        s = self._text.get(key)
        if s is not None:
            self._text.move_to_end(key)
            return s
        s = self.font(size, bold).render(text, True, color)
        self._text[key] = s
        if len(self._text) > self._max:
            self._text.popitem(last=False)
        return s
