"""Reading recordings from disk, with clear messages for bad files.

WAV, FLAC and OGG (anything libsndfile reads, via the soundfile package) at
8-96 kHz, any sample format (8/16/24/32-bit integer, float), any number of
channels. Samples come back as float64 in [-1, 1], shape ``(n, channels)``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from livevowel.errors import UserError

#: Sample rates the engine accepts, Hz.
MIN_RATE_HZ = 8000
MAX_RATE_HZ = 96000

#: Endings offered when a folder is given as input.
AUDIO_SUFFIXES = (".wav", ".flac", ".ogg", ".oga", ".aiff", ".aif")


@dataclass
class Recording:
    """Samples of one file plus what was noticed while reading it.

    Attributes
    ----------
    samples : ndarray, shape (n, channels)
        float64 in [-1, 1].
    rate_hz : float
        Sample rate in Hz.
    path : Path
        Where it was read from.
    warnings : list of str
        Things the user should know (non-finite samples replaced, clipping...).
    """

    samples: np.ndarray
    rate_hz: float
    path: Path
    warnings: list[str] = field(default_factory=list)

    @property
    def duration_s(self) -> float:
        """Length in seconds."""
        return self.samples.shape[0] / self.rate_hz


def read_audio(path: "str | Path") -> Recording:
    """Read an audio file for analysis.

    Raises
    ------
    UserError
        When the file is missing, unreadable, not audio, empty, or at a rate
        outside 8-96 kHz.
    """
    import soundfile as sf

    path = Path(path)
    if not path.exists():
        raise UserError(f"{path}: no such file; check the name or give a folder")
    if path.is_dir():
        raise UserError(f"{path}: is a folder; give the files, or use a command that takes folders")
    try:
        data, rate = sf.read(str(path), dtype="float64", always_2d=True)
    except (RuntimeError, sf.LibsndfileError, TypeError, ValueError) as exc:  # LibsndfileError subclasses RuntimeError
        detail = str(exc).split(":")[-1].strip() or "unknown format"
        raise UserError(f"{path}: not an audio file livevowel can read ({detail}); "
                        "use WAV, FLAC or OGG (e.g. convert with: sox IN -r 16000 OUT.wav)") from None
    except OSError as exc:
        raise UserError(f"{path}: cannot read ({exc.strerror})") from None
    if data.shape[0] == 0:
        raise UserError(f"{path}: the file holds no samples; record again")
    if not MIN_RATE_HZ <= rate <= MAX_RATE_HZ:
        raise UserError(f"{path}: sample rate {rate} Hz is outside {MIN_RATE_HZ}-{MAX_RATE_HZ} Hz; "
                        f"resample it first (e.g. sox IN -r 16000 OUT.wav)")
    rec = Recording(samples=data, rate_hz=float(rate), path=path)
    bad = ~np.isfinite(data)
    if bad.any():
        rec.warnings.append(f"{int(bad.sum())} samples were not finite numbers (NaN or infinite) and were set to 0")
        data[bad] = 0.0
    peak = np.abs(data).max()
    if peak >= 0.999:
        share = float(np.mean(np.abs(data) >= 0.999))
        if share > 1e-4:
            rec.warnings.append(f"{share:.2%} of samples are at full scale (clipped); formants near clipped "
                                "stretches are less reliable; record with lower input gain")
    if peak == 0.0:
        rec.warnings.append("the file is silent (all samples are zero)")
    return rec


def find_audio_files(inputs: "list[str]") -> list[Path]:
    """Expand files and folders (searched one level deep, sorted) into audio files."""
    out: list[Path] = []
    for item in inputs:
        p = Path(item)
        if p.is_dir():
            found = sorted(q for q in p.iterdir() if q.is_file() and q.suffix.lower() in AUDIO_SUFFIXES)
            if not found:
                raise UserError(f"{p}: no audio files ({', '.join(AUDIO_SUFFIXES)}) in this folder")
            out.extend(found)
        else:
            out.append(p)
    return out


def write_wav(path: "str | Path", samples: np.ndarray, rate_hz: float, *, subtype: str = "PCM_16") -> None:
    """Write a WAV file atomically (temporary file, then rename)."""
    import soundfile as sf

    from livevowel.fileio import atomic_writer

    with atomic_writer(path, mode="wb") as fh:
        sf.write(fh, np.asarray(samples), int(round(rate_hz)), subtype=subtype, format="WAV")
