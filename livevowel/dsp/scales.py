"""Auditory and log frequency scales, each with its exact inverse.

All functions take and return numpy arrays (or scalars, which come back as
numpy float64 scalars). ``NaN`` passes through unchanged, so a table with
"not measured" entries can be converted in one call. Frequencies are in Hz;
negative frequencies, and scale values below the value of 0 Hz, raise
``ValueError``.

Scales
------
``bark``
    Traunmüller (1990): z = 26.81 f / (1960 + f) - 0.53, with his corrections
    z' = z + 0.15 (2 - z) for z < 2 and z' = z + 0.22 (z - 20.1) for z > 20.1.
    The inverse undoes the corrections piecewise, so the round trip is exact
    over the whole range. Unit: Bark (critical-band rate).
``erb``
    ERB-rate of Glasberg & Moore (1990): E = 21.4 log10(1 + 0.00437 f).
    Unit: ERB number ("Cams").
``mel``
    O'Shaughnessy (1987): m = 2595 log10(1 + f / 700). Unit: mel.
``log``
    Natural logarithm of f / ref_hz (ref_hz = 1 Hz by default). Unit: nepers
    re ref_hz; differences are log ratios (what Nearey-style normalisation
    works with).
``hz``
    Identity (a copy as float64), so callers can treat "no scale" uniformly.

References
----------
Traunmüller, H. (1990). Analytical expressions for the tonotopic sensory
scale. J. Acoust. Soc. Am. 88(1), 97-100.
Glasberg, B. R., & Moore, B. C. J. (1990). Derivation of auditory filter
shapes from notched-noise data. Hearing Research 47, 103-138.
O'Shaughnessy, D. (1987). Speech Communication: Human and Machine.
Addison-Wesley, p. 150.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

__all__ = [
    "hz_to_bark", "bark_to_hz",
    "hz_to_erb_rate", "erb_rate_to_hz",
    "hz_to_mel", "mel_to_hz",
    "hz_to_log", "log_to_hz",
    "hz_to_hz",
    "SCALES", "SCALE_UNITS", "scale_by_name",
]

# Traunmüller (1990) constants.
_TR_A, _TR_B, _TR_C = 26.81, 1960.0, 0.53
_TR_LOW, _TR_HIGH = 2.0, 20.1
_TR_LOW_K, _TR_HIGH_K = 0.15, 0.22


def _as_float(x, name: str) -> np.ndarray:
    arr = np.asarray(x, dtype=np.float64)
    return arr


def _check_min(arr: np.ndarray, lowest: float, name: str, unit: str) -> None:
    bad = arr < lowest  # NaN compares False: passes through
    if np.any(bad):
        worst = float(np.min(arr[bad]))
        raise ValueError(f"{name}: {worst:g} {unit} is below the lowest allowed value {lowest:g} {unit}")


def _out(arr: np.ndarray):
    return arr if arr.ndim else np.float64(arr)


def hz_to_bark(f_hz):
    """Frequency in Hz to critical-band rate in Bark (Traunmüller 1990).

    Parameters
    ----------
    f_hz : array_like
        Frequencies in Hz, >= 0 (NaN allowed).

    Returns
    -------
    ndarray
        Critical-band rate in Bark, with the low (< 2 Bark) and high
        (> 20.1 Bark) corrections applied. 1000 Hz gives about 8.53 Bark.
    """
    f = _as_float(f_hz, "f_hz")
    _check_min(f, 0.0, "hz_to_bark", "Hz")
    z = _TR_A * f / (_TR_B + f) - _TR_C
    z = np.where(z < _TR_LOW, z + _TR_LOW_K * (_TR_LOW - z), z)
    z = np.where(z > _TR_HIGH, z + _TR_HIGH_K * (z - _TR_HIGH), z)
    return _out(z)


_BARK_AT_0 = float(hz_to_bark(0.0))
# Upper limit: the uncorrected formula tends to 26.81 - 0.53 as f -> infinity.
_BARK_SUP = (_TR_A - _TR_C) + _TR_HIGH_K * ((_TR_A - _TR_C) - _TR_HIGH)


def bark_to_hz(z_bark):
    """Critical-band rate in Bark to frequency in Hz (exact inverse of :func:`hz_to_bark`).

    Parameters
    ----------
    z_bark : array_like
        Bark values from :func:`hz_to_bark`, between its value at 0 Hz
        (about -0.15 Bark) and its limit at infinite frequency (about 27.6
        Bark, exclusive). NaN allowed.

    Returns
    -------
    ndarray
        Frequencies in Hz.
    """
    z = _as_float(z_bark, "z_bark")
    _check_min(z, _BARK_AT_0 - 1e-12, "bark_to_hz", "Bark")
    if np.any(z >= _BARK_SUP):
        raise ValueError(f"bark_to_hz: values must be below {_BARK_SUP:.4f} Bark (infinite frequency)")
    # Undo the corrections: z' = 0.85 z + 0.3 (low), z' = 1.22 z - 4.422 (high).
    u = np.where(z < _TR_LOW, (z - _TR_LOW_K * _TR_LOW) / (1.0 - _TR_LOW_K), z)
    u = np.where(z > _TR_HIGH, (z + _TR_HIGH_K * _TR_HIGH) / (1.0 + _TR_HIGH_K), u)
    f = _TR_B * (u + _TR_C) / (_TR_A - _TR_C - u)
    # The 0 Hz end can come out as -1e-13 by rounding.
    f = np.where((f < 0) & (f > -1e-9), 0.0, f)
    return _out(f)


def hz_to_erb_rate(f_hz):
    """Frequency in Hz to ERB-rate (Glasberg & Moore 1990).

    E = 21.4 log10(1 + 0.00437 f). 1000 Hz gives about 15.62.

    Parameters
    ----------
    f_hz : array_like
        Frequencies in Hz, >= 0 (NaN allowed).

    Returns
    -------
    ndarray
        ERB-rate (ERB number).
    """
    f = _as_float(f_hz, "f_hz")
    _check_min(f, 0.0, "hz_to_erb_rate", "Hz")
    return _out(21.4 * np.log10(1.0 + 0.00437 * f))


def erb_rate_to_hz(e):
    """ERB-rate to frequency in Hz (exact inverse of :func:`hz_to_erb_rate`).

    Parameters
    ----------
    e : array_like
        ERB-rate values >= 0 (NaN allowed).

    Returns
    -------
    ndarray
        Frequencies in Hz.
    """
    e = _as_float(e, "e")
    _check_min(e, 0.0, "erb_rate_to_hz", "ERB")
    return _out((10.0 ** (e / 21.4) - 1.0) / 0.00437)


def hz_to_mel(f_hz):
    """Frequency in Hz to mel (O'Shaughnessy 1987).

    m = 2595 log10(1 + f / 700). 1000 Hz gives 999.99 mel (1000 by the
    design of the scale, to the rounding of the published constants).

    Parameters
    ----------
    f_hz : array_like
        Frequencies in Hz, >= 0 (NaN allowed).

    Returns
    -------
    ndarray
        Pitch in mel.
    """
    f = _as_float(f_hz, "f_hz")
    _check_min(f, 0.0, "hz_to_mel", "Hz")
    return _out(2595.0 * np.log10(1.0 + f / 700.0))


def mel_to_hz(m):
    """Mel to frequency in Hz (exact inverse of :func:`hz_to_mel`).

    Parameters
    ----------
    m : array_like
        Mel values >= 0 (NaN allowed).

    Returns
    -------
    ndarray
        Frequencies in Hz.
    """
    m = _as_float(m, "m")
    _check_min(m, 0.0, "mel_to_hz", "mel")
    return _out(700.0 * (10.0 ** (m / 2595.0) - 1.0))


def hz_to_log(f_hz, *, ref_hz: float = 1.0):
    """Frequency in Hz to natural log of f / ref_hz.

    Parameters
    ----------
    f_hz : array_like
        Frequencies in Hz, > 0 (NaN allowed).
    ref_hz : float, keyword-only
        Reference frequency in Hz (default 1 Hz).

    Returns
    -------
    ndarray
        ln(f / ref_hz), in nepers.
    """
    if not ref_hz > 0:
        raise ValueError(f"hz_to_log: ref_hz must be positive, got {ref_hz!r}")
    f = _as_float(f_hz, "f_hz")
    if np.any(f <= 0):
        raise ValueError("hz_to_log: frequencies must be positive")
    return _out(np.log(f / ref_hz))


def log_to_hz(x, *, ref_hz: float = 1.0):
    """Natural-log frequency back to Hz (exact inverse of :func:`hz_to_log`).

    Parameters
    ----------
    x : array_like
        ln(f / ref_hz) values (NaN allowed).
    ref_hz : float, keyword-only
        Reference frequency in Hz (default 1 Hz).

    Returns
    -------
    ndarray
        Frequencies in Hz.
    """
    if not ref_hz > 0:
        raise ValueError(f"log_to_hz: ref_hz must be positive, got {ref_hz!r}")
    return _out(ref_hz * np.exp(_as_float(x, "x")))


def hz_to_hz(f_hz):
    """Identity scale: frequencies in Hz as float64 (a copy)."""
    f = np.array(f_hz, dtype=np.float64)
    _check_min(f, 0.0, "hz_to_hz", "Hz")
    return _out(f)


#: scale name -> (forward from Hz, inverse to Hz)
SCALES: dict[str, tuple[Callable, Callable]] = {
    "hz": (hz_to_hz, hz_to_hz),
    "bark": (hz_to_bark, bark_to_hz),
    "erb": (hz_to_erb_rate, erb_rate_to_hz),
    "mel": (hz_to_mel, mel_to_hz),
    "log": (hz_to_log, log_to_hz),
}

#: scale name -> unit label for axes and tables
SCALE_UNITS: dict[str, str] = {"hz": "Hz", "bark": "Bark", "erb": "ERB", "mel": "mel", "log": "ln Hz"}


def scale_by_name(name: str) -> tuple[Callable, Callable]:
    """``(forward, inverse)`` for a scale name: hz, bark, erb, mel or log (case-insensitive).

    ``forward`` maps Hz to the scale, ``inverse`` maps back to Hz.
    """
    key = str(name).strip().lower()
    if key == "erb-rate" or key == "erb_rate":
        key = "erb"
    try:
        return SCALES[key]
    except KeyError:
        raise ValueError(f"unknown scale {name!r}; choose one of {', '.join(SCALES)}") from None
