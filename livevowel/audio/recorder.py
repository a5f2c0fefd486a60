"""Streaming a session's captured audio to a WAV file, atomically.

Samples go to a temporary file beside the target as they arrive (memory stays
flat however long the session); :meth:`WavRecorder.close` renames it into
place, :meth:`WavRecorder.abort` removes it.
"""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

import numpy as np

from livevowel.fileio import atomic_writer

#: Longest stretch of silence written for an input gap, seconds.
MAX_GAP_FILL_S = 600.0


class WavRecorder:
    """Write mono audio to ``path`` as 16-bit WAV while a session runs.

    Parameters
    ----------
    path : str or Path
        Destination; its folder must exist.
    rate_hz : float
        Sample rate of the samples that will be written, Hz.
    subtype : str, keyword-only
        libsndfile subtype, default "PCM_16".
    """

    def __init__(self, path: "str | os.PathLike", rate_hz: float, *, subtype: str = "PCM_16") -> None:
        import soundfile as sf

        self.path = Path(path)
        self.rate_hz = float(rate_hz)
        self.samples_written = 0
        self._stack = contextlib.ExitStack()
        fh = self._stack.enter_context(atomic_writer(self.path, mode="wb"))
        self._sf = sf.SoundFile(fh, mode="w", samplerate=int(round(rate_hz)), channels=1, subtype=subtype,
                                format="WAV")
        self._closed = False

    def write(self, samples: np.ndarray) -> None:
        """Append mono samples (1-D, floats in [-1, 1])."""
        x = np.asarray(samples, dtype=np.float32).reshape(-1)
        self._sf.write(x)
        self.samples_written += x.shape[0]

    def write_silence(self, seconds: float) -> None:
        """Append zeros for an input gap (capped at :data:`MAX_GAP_FILL_S`)."""
        n = int(round(min(max(seconds, 0.0), MAX_GAP_FILL_S) * self.rate_hz))
        chunk = np.zeros(min(n, int(self.rate_hz)), dtype=np.float32)
        while n > 0:
            k = min(n, chunk.shape[0])
            self.write(chunk[:k])
            n -= k

    @property
    def duration_s(self) -> float:
        return self.samples_written / self.rate_hz

    def close(self) -> None:
        """Finish the file and move it into place (idempotent)."""
        if self._closed:
            return
        self._closed = True
        self._sf.close()
        self._stack.close()

    def abort(self) -> None:
        """Discard the file (idempotent)."""
        if self._closed:
            return
        self._closed = True
        with contextlib.suppress(Exception):
            self._sf.close()
        err = RuntimeError("recording aborted")
        self._stack.__exit__(type(err), err, None)
