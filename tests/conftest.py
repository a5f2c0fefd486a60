"""Shared test set-up: no screen, no sound card, no user files touched."""

import os

import pytest

os.environ.setdefault("SDL_VIDEODRIVER", "dummy")
os.environ.setdefault("SDL_AUDIODRIVER", "dummy")
os.environ.setdefault("MPLBACKEND", "Agg")


@pytest.fixture(autouse=True)
def _isolated_user_dirs(tmp_path, monkeypatch):
    """Point the user config and data folders at a fresh temporary folder."""
    monkeypatch.setenv("LIVEVOWEL_CONFIG", str(tmp_path / "user-config" / "config.yaml"))
    monkeypatch.setenv("LIVEVOWEL_DATA", str(tmp_path / "user-data"))
