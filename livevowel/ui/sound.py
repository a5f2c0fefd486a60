"""The short, quiet tone that can accompany a hit.

Generated with numpy (a 660 Hz sine with its octave, 140 ms, raised-cosine
ends) and played through pygame's mixer at a low level. Off when the mixer
cannot start, when ``SDL_AUDIODRIVER=dummy`` (tests, headless runs) or when
the user turns it off.
"""

from __future__ import annotations

import os

import numpy as np


def tone_samples(*, rate_hz: int = 44100, freq_hz: float = 660.0, duration_s: float = 0.14,
                 volume: float = 0.15) -> np.ndarray:
    """Mono int16 samples of the hit tone.

    ``volume`` is the peak amplitude as a fraction of full scale (0.15 is
    about -16 dBFS, a sensible low level for a cue near the ear).
    """
    if not 0 <= volume <= 0.5:
        raise ValueError(f"volume must be 0..0.5 of full scale, got {volume}")
    n = int(round(duration_s * rate_hz))
    t = np.arange(n) / rate_hz
    wave = np.sin(2 * np.pi * freq_hz * t) + 0.3 * np.sin(2 * np.pi * 2 * freq_hz * t)
    ramp = min(n // 2, int(0.02 * rate_hz))
    env = np.ones(n)
    if ramp > 0:
        r = 0.5 - 0.5 * np.cos(np.pi * np.arange(ramp) / ramp)
        env[:ramp] = r
        env[n - ramp:] = r[::-1]
    wave = wave / np.max(np.abs(wave)) * env * volume
    return np.round(wave * 32767).astype(np.int16)


class HitTone:
    """Plays the hit tone if sound is available and wanted; otherwise does nothing."""

    def __init__(self, *, enabled: bool = True, volume: float = 0.15) -> None:
        self.enabled = False
        self._sound = None
        if not enabled or volume <= 0 or os.environ.get("SDL_AUDIODRIVER", "").lower() == "dummy":
            return
        try:
            import pygame

            if not pygame.mixer.get_init():
                pygame.mixer.init(frequency=44100, size=-16, channels=1, buffer=512)
            rate, _, channels = pygame.mixer.get_init()
            s = tone_samples(rate_hz=rate, volume=volume)
            if channels > 1:
                s = np.repeat(s[:, None], channels, axis=1)
            self._sound = pygame.sndarray.make_sound(np.ascontiguousarray(s))
            self.enabled = True
        except Exception:  # no audio device: silently without the cue
            self._sound = None
            self.enabled = False

    def play(self) -> None:
        if self.enabled and self._sound is not None:
            self._sound.play()
