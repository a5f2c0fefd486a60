"""Test helper: feed a signal to a StreamingAnalyzer in blocks of given sizes (cycled)."""

from __future__ import annotations

from livevowel.dsp.engine import StreamingAnalyzer
from livevowel.dsp.types import FrameTrack


def stream_in_blocks(x, rate_hz, settings, sizes) -> tuple[FrameTrack, StreamingAnalyzer]:
    """All frames (blocks, then flush) and the analyser, for blocks of ``sizes[0], sizes[1], ...`` samples."""
    sa = StreamingAnalyzer(rate_hz, settings=settings)
    parts, i, j = [], 0, 0
    while i < len(x):
        n = sizes[j % len(sizes)]
        parts.append(sa.process(x[i:i + n]))
        i += n
        j += 1
    parts.append(sa.flush())
    return FrameTrack.concat(parts), sa
