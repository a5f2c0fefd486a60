"""The pygame practice screen: plane geometry, themes, drawing and the loop.

* :mod:`livevowel.ui.geometry` -- (F1, F2) <-> pixel in Hz or Bark, ranges, ticks (pure);
* :mod:`livevowel.ui.theme` -- colour themes (Okabe & Ito 2008 palette), large text;
* :mod:`livevowel.ui.fonts` -- a font with IPA glyphs, text cache;
* :mod:`livevowel.ui.draw` -- drawing primitives;
* :mod:`livevowel.ui.screen` -- :class:`PracticeScreen`, the reusable component;
* :mod:`livevowel.ui.loop` -- window, 60 fps loop, first-start caution, screenshot.

Hit and hold rules live in :mod:`livevowel.feedback` (no pygame).
"""
