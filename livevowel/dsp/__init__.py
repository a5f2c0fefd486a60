"""Pure signal processing on numpy arrays (no devices, files or screens).

The engine's public names are importable from here (loaded on first use):
``AnalysisSettings``, ``AnalysisResult``, ``analyze``, ``StreamingAnalyzer``,
plus the record types ``Frame``, ``FrameTrack`` and ``FRAME_COLUMNS``.
"""

from __future__ import annotations

_ENGINE = ("AnalysisSettings", "AnalysisResult", "analyze", "StreamingAnalyzer", "BadSamples", "VOICES")
_TYPES = ("Frame", "FrameTrack", "FRAME_COLUMNS")

__all__ = list(_ENGINE + _TYPES)


def __getattr__(name: str):
    if name in _ENGINE:
        from livevowel.dsp import engine

        return getattr(engine, name)
    if name in _TYPES:
        from livevowel.dsp import types

        return getattr(types, name)
    raise AttributeError(f"module 'livevowel.dsp' has no attribute {name!r}")
