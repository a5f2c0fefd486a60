"""Test helper: keep every practice screen a command builds, to look at it afterwards."""

from __future__ import annotations


def capture_screens(monkeypatch) -> list:
    """A list that fills with each :class:`~livevowel.ui.screen.PracticeScreen` made from now on."""
    from livevowel.ui import screen as screen_mod

    made: list = []
    orig = screen_mod.PracticeScreen.__init__

    def init(self, *a, **kw):
        orig(self, *a, **kw)
        made.append(self)

    monkeypatch.setattr(screen_mod.PracticeScreen, "__init__", init)
    return made
