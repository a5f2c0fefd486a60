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


#: Offset (full scale 1.0) above which a file is said to carry a DC offset
#: (0.01: -40 dB re full scale; common practice for a 'noticeable' offset).
DC_OFFSET_WARN = 0.01


def _dc_offset(data: np.ndarray, rate: float) -> float:
    """Largest |mean| over channels of the quietest tenth of 10 ms blocks (where a recording's
    baseline shows; the mean of the loud ones is the waveform's own asymmetry, e.g. clipping),
    counted only where it exceeds those blocks' own spread (0 otherwise)."""
    blk = max(int(rate // 100), 1)
    nb = data.shape[0] // blk
    if nb == 0:
        return float(np.abs(data.mean(axis=0)).max())
    b = data[: nb * blk].reshape(nb, blk, data.shape[1])
    means, spread = b.mean(axis=1), b.std(axis=1)
    quiet = np.argsort(spread.max(axis=1))[: max(nb // 10, 1)]
    offset = np.abs(np.median(means[quiet], axis=0))
    return float(np.max(np.where(offset > np.median(spread[quiet], axis=0), offset, 0.0)))


def read_audio(path: "str | Path") -> Recording:
    """Read an audio file for analysis.

    ``Recording.warnings`` notes NaN/infinite samples (set to 0), a DC offset
    and channels that cancel in the mono mix; clipping and silence are left to
    the engine, which notes them for any input.

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
    # clipping and silence: the engine reports both for any input (files, devices)
    offset = _dc_offset(data, rate)
    if offset > DC_OFFSET_WARN:
        rec.warnings.append(f"a DC offset of {offset:.3f} of full scale; formants are measured with it removed, "
                            "but level_db includes it; remove it (a high-pass filter) for true levels")
    if data.shape[1] > 1:
        chan_ms = float(np.mean(data ** 2))
        mix_ms = float(np.mean(data.mean(axis=1) ** 2))
        if chan_ms > 0 and mix_ms < 0.01 * chan_ms:
            rec.warnings.append("the channels cancel in the mono mix (opposite polarity?); "
                                "extract one channel (e.g. sox IN OUT.wav remix 1) and analyse that")
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
