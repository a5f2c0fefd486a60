"""Cascade formant synthesiser after Klatt (1980), with known ground truth.

The voice is built the way Klatt (1980, "Software for a cascade/parallel
formant synthesizer", JASA 67, 971-995) describes the cascade branch:

* **Glottal source** -- a pitch-synchronous train of KLGLOTT88 flow pulses
  (Klatt & Klatt 1990): within each glottal period the glottis is closed for
  ``(1 - OQ) T`` and open for ``OQ T``; during the open phase the flow is the
  cubic ``U(tau) = (27/4) tau^2 (1 - tau)`` (``tau`` = 0..1 across the open
  phase, peak 1 at ``tau = 2/3``), scaled by the pulse amplitude. The pulse
  is evaluated analytically at each sample time, so glottal closure instants
  fall between samples and F0 is exact at any rate (no rounding of periods to
  whole samples), up to F0 of rate/10. The kink at closure is smoothed with
  a two-point polyBLAMP (Esqueda, Valimaki & Bilbao 2016) against aliasing.
* **Perturbation** -- jitter and shimmer as independent Gaussian draws per
  period, scaled so that the *local* measures (mean absolute difference of
  consecutive periods over mean period, %; mean absolute dB ratio of
  consecutive amplitudes) equal the requested values on average; optional
  slow F0 flutter after Klatt & Klatt (1990).
* **Radiation** -- the first difference (Klatt 1980), applied to the flow
  and multiplied by the rate, i.e. the flow derivative averaged over each
  sample interval. (Applied before the cascade; for fixed formants the order
  does not matter.)
* **Aspiration / frication** -- white Gaussian noise added to the excitation.
* **Vocal tract** -- a cascade of digital resonators (Klatt 1980, eq. 1-3)::

      y[n] = A x[n] + B y[n-1] + C y[n-2]
      C = -exp(-2 pi BW T),  B = 2 exp(-pi BW T) cos(2 pi F T),  A = 1 - B - C

  F1-F3 (and B1-B3) follow the schedule; F4 and F5 are fixed per voice
  group. Coefficients are updated every ``update_s`` seconds (default 1 ms)
  on a grid fixed to sample 0, with each resonator's past outputs carried
  across the update exactly as in Klatt's direct form.

Everything is deterministic for a seed, and :class:`KlattVoice` renders a
schedule block by block such that any split of the blocks gives the same
samples as rendering the whole (the per-interval coefficients are computed
in batches at fixed positions, noise in pages at fixed positions). A 10 ms
block costs well under a millisecond (``livevowel bench --only synth``), so
it can run in an audio callback; :meth:`KlattVoice.extend` appends segments
while it plays.

Level: with ``level_db = 0`` a man's /ɑ/ at 120 Hz peaks near -6 dBFS (a
fixed, rate-independent gain; other vowels and voices differ by several dB).
:func:`synthesize_vowel` peak-normalises to -6 dBFS by default;
:func:`render` does so only when asked.

Limits (measured with this module): the source is sampled without
oversampling; some aliasing of the pulse shape remains. Energy of the
output away from the harmonics of a steady vowel, relative to the
harmonics: about -37 dB at 8 kHz (F0 120 Hz; -33 dB at 480 Hz), -58 dB at
11 kHz, below -70 dB at 16 kHz and above. Only the cascade branch is built
(no parallel branch, no nasal pole-zero pair, no higher-pole correction), so
above F5 the spectrum falls off. Aspiration is steady over each period (not
gated by the glottal opening). F0 is limited to rate/10 (and 1000 Hz),
formants to 0.45 x rate. An instant formant jump (``transition_s=0``) while
the resonators still ring can overshoot both the old and the new sound (on
151 random pairs of sounds at 8 and 16 kHz the peak in the 30 ms after a
jump was at most 28.7 times the larger steady peak, 90th percentile 2.7):
give changes a glide of a few milliseconds. Each resonator has unity gain at
0 Hz, so formants crowded near half the rate can make a steady sound peak
well above 1 (F3 3397 Hz beside the man's fixed F4 of 3500 Hz at 8 kHz
peaks near 37); scale with ``peak_dbfs`` where a set level matters.
"""

from __future__ import annotations

import bisect
import math
from array import array
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np
from scipy.signal import sosfilt

from livevowel.errors import UserError

try:  # the compiled kernel behind scipy.signal.sosfilt, without its checks
    from scipy.signal._sosfilt import _sosfilt as _sosfilt_kernel
except ImportError:  # pragma: no cover - other scipy layouts
    _sosfilt_kernel = None


def _kernel_works() -> bool:
    """True when the private kernel gives exactly what sosfilt gives."""
    if _sosfilt_kernel is None:
        return False
    sos = np.array([[0.2, 0.0, 0.0, 1.0, -1.5, 0.7]])
    x = np.linspace(-1.0, 1.0, 7)
    zi = np.array([[0.3, -0.1]])
    ref, zf = sosfilt(sos, x, zi=zi)
    buf, z = x.reshape(1, -1).copy(), zi.reshape(1, 1, 2).copy()
    try:
        _sosfilt_kernel(sos, buf, z)
    except Exception:  # pragma: no cover - changed private signature
        return False
    return bool(np.array_equal(buf[0], ref) and np.array_equal(z[0], zf))


if not _kernel_works():  # pragma: no cover
    _sosfilt_kernel = None


def _cascade(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> None:
    """Filter ``x`` (1, n) in place through ``sos``; update ``zi`` (1, s, 2)."""
    if _sosfilt_kernel is not None:
        _sosfilt_kernel(sos, x, zi)
    else:  # pragma: no cover
        y, zf = sosfilt(sos, x[0], zi=zi[0])
        x[0] = y
        zi[0] = zf


__all__ = [
    "ScheduleError",
    "VOICE_GROUPS",
    "DEFAULT_BANDWIDTHS_HZ",
    "resonator_coefficients",
    "antiresonator_coefficients",
    "klglott88_flow",
    "Segment",
    "Schedule",
    "Truth",
    "KlattVoice",
    "render",
    "synthesize_vowel",
    "add_noise",
]


class ScheduleError(UserError, ValueError):
    """A synthesis schedule or parameter that cannot be rendered."""


#: F4 and F5 (Hz) per voice group. Values of the usual order for adult male,
#: adult female and child vocal tracts (common practice; the female and child
#: values are the male ones scaled by about 1.17 and 1.3).
VOICE_GROUPS: dict[str, tuple[float, float]] = {
    "man": (3500.0, 4500.0),
    "woman": (4100.0, 5250.0),
    "child": (4600.0, 5850.0),
}

#: Default bandwidths B1..B5 in Hz (common practice for a modal voice).
DEFAULT_BANDWIDTHS_HZ: tuple[float, ...] = (60.0, 90.0, 120.0, 200.0, 250.0)

#: A higher formant (F4, F5) is left out when it is not below this fraction
#: of the sampling rate.
_MAX_FORMANT_FRACTION = 0.45

#: Fixed output gain: a man's /ɑ/ (Peterson & Barney 1952 means, F0 120 Hz,
#: level 0 dB) peaks near -6 dBFS. Measured once with this module.
_OUTPUT_GAIN = 1.0 / 7800.0

#: Formants (Hz) of a schedule that gives none (only silence).
_NEUTRAL_HZ = (500.0, 1500.0, 2500.0)

_KINDS = ("silent", "voiced", "noise")
_SILENT, _VOICED, _NOISE = 0, 1, 2

#: Level reference: voicing at level 0 dB has the excitation RMS of a
#: unit-amplitude KLGLOTT88 flow at this F0 (Hz), whatever its F0; a noise
#: segment at level L dB has the RMS voicing at level L has.
_REF_F0_HZ = 120.0

_NOISE_PAGE = 4096      # samples per page of per-sample noise
_TABLE_BATCH = 64       # update intervals per batch of the parameter table
_FLUTTER_HZ = (12.7, 7.1, 4.7)   # Klatt & Klatt (1990) flutter components (from memory)
_PERIOD_PAGE = 256      # periods per page of per-period draws


# ---------------------------------------------------------------- resonators
def resonator_coefficients(freq_hz, bw_hz, *, rate_hz: float):
    """Coefficients ``(A, B, C)`` of a Klatt (1980) digital resonator.

    ``y[n] = A x[n] + B y[n-1] + C y[n-2]`` with ``C = -exp(-2 pi BW T)``,
    ``B = 2 exp(-pi BW T) cos(2 pi F T)``, ``A = 1 - B - C`` (unity gain at
    0 Hz). As scipy filter coefficients: ``b = [A]``, ``a = [1, -B, -C]``.

    Parameters
    ----------
    freq_hz, bw_hz : float or array_like
        Resonance frequency and bandwidth in Hz (broadcast together).
    rate_hz : float
        Sampling rate in Hz.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    bw = np.asarray(bw_hz, dtype=np.float64)
    if rate_hz <= 0:
        raise ScheduleError(f"rate_hz must be positive, got {rate_hz}")
    if np.any(bw <= 0) or np.any(f < 0) or np.any(f >= rate_hz / 2):
        raise ScheduleError("resonator needs 0 <= F < rate/2 and BW > 0 (Hz)")
    t = 1.0 / rate_hz
    c = -np.exp(-2.0 * np.pi * bw * t)
    b = 2.0 * np.exp(-np.pi * bw * t) * np.cos(2.0 * np.pi * f * t)
    a = 1.0 - b - c
    return a, b, c


def antiresonator_coefficients(freq_hz, bw_hz, *, rate_hz: float):
    """Coefficients ``(A', B', C')`` of a Klatt (1980) antiresonator.

    ``y[n] = A' x[n] + B' x[n-1] + C' x[n-2]`` with ``A' = 1/A``,
    ``B' = -B/A``, ``C' = -C/A`` where ``A, B, C`` are the resonator
    coefficients for the same frequency and bandwidth: the exact inverse of
    that resonator (a zero pair, unity gain at 0 Hz). As scipy filter
    coefficients: ``b = [A', B', C']``, ``a = [1]``.
    """
    a, b, c = resonator_coefficients(freq_hz, bw_hz, rate_hz=rate_hz)
    return 1.0 / a, -b / a, -c / a


def klglott88_flow(tau) -> np.ndarray:
    """Normalised KLGLOTT88 open-phase flow ``(27/4) tau^2 (1 - tau)``.

    ``tau`` runs 0..1 over the open phase (Klatt & Klatt 1990); the pulse
    peaks at 1.0 for ``tau = 2/3`` and is 0 outside ``[0, 1)``.
    """
    tau = np.asarray(tau, dtype=np.float64)
    inside = (tau >= 0.0) & (tau < 1.0)
    return np.where(inside, 6.75 * tau * tau * (1.0 - tau), 0.0)


def _voicing_rms_per_unit(f0_hz, oq: float):
    """RMS of the flow derivative (1/s) of unit-amplitude KLGLOTT88 voicing.

    Mean square over one period of ``dU/dt`` is ``(27/4)^2 (2/15) / (OQ T^2)``.
    """
    return 6.75 * math.sqrt(2.0 / (15.0 * oq)) * np.asarray(f0_hz, dtype=np.float64)


# ------------------------------------------------------------------ schedule
@dataclass(frozen=True)
class Segment:
    """One stretch of a synthesis schedule.

    Attributes
    ----------
    duration_s : float
        Length in seconds (> 0).
    kind : str
        ``"voiced"`` (glottal pulses), ``"noise"`` (white noise through the
        formant cascade, like whisper or /h/) or ``"silent"``.
    f0_start_hz, f0_end_hz : float or None
        F0 in Hz at the start and end of the segment, linear in between
        (``f0_end_hz`` defaults to ``f0_start_hz``). Required when voiced.
    formants_hz : (F1, F2, F3) in Hz, or None
        Formant targets. ``None`` (allowed for silent and noise segments)
        holds the neighbouring segment's formants.
    bandwidths_hz : (B1, B2, B3) in Hz, or None
        Defaults to :data:`DEFAULT_BANDWIDTHS_HZ`.
    transition_s : float
        Over the last ``transition_s`` seconds of this segment the formants
        and bandwidths move to the next segment's targets (0 = jump at the
        boundary). Must not exceed ``duration_s``.
    transition : str
        ``"smooth"`` (raised cosine) or ``"linear"``.
    level_db : float
        Source level in dB (0 = the calibrated level, see module notes); the
        voicing excitation RMS does not change with F0. For
        noise segments: the RMS that voicing at this level has (any F0).
    label : str
        Free text carried into :class:`Truth` (e.g. an IPA symbol).
    """

    duration_s: float
    kind: str = "voiced"
    f0_start_hz: float | None = None
    f0_end_hz: float | None = None
    formants_hz: tuple[float, float, float] | None = None
    bandwidths_hz: tuple[float, float, float] | None = None
    transition_s: float = 0.0
    transition: str = "smooth"
    level_db: float = 0.0
    label: str = ""


@dataclass(frozen=True)
class Schedule:
    """A sequence of :class:`Segment` plus voice-wide settings.

    Attributes
    ----------
    segments : tuple of Segment
    voice : str
        Voice group for the default F4/F5: ``"man"``, ``"woman"``, ``"child"``.
    jitter_pct : float
        Local jitter in percent (mean |T_k - T_(k-1)| / mean T x 100).
    shimmer_db : float
        Local shimmer in dB (mean |20 log10(A_k / A_(k-1))|).
    aspiration_db : float or None
        White aspiration noise during voicing, RMS in dB relative to the RMS
        of the voicing excitation (flow derivative) at the current F0;
        ``None`` = none.
    open_quotient : float
        Fraction of each glottal period with the glottis open (0.3..0.9).
    f4_hz, f5_hz, b4_hz, b5_hz : float or None
        Higher formants and bandwidths; ``None`` takes the voice group's
        F4/F5 and :data:`DEFAULT_BANDWIDTHS_HZ`. A default F4/F5 at or above
        0.45 x rate is left out at that rate; an explicit one raises.
    update_s : float
        Interval of resonator coefficient updates in seconds (0.0002..0.005).
    ramp_s : float
        Voicing onset and offset ramps (raised cosine, seconds, 0..0.1) at
        the edges of each voiced stretch that borders silence or noise; the
        pulse amplitude is scaled by the ramp at the pulse's flow peak.
    flutter_pct : float
        Slow quasi-random F0 wander after Klatt & Klatt (1990, "FL"; from
        memory): ``dF0 = (FL/50) (F0/100) (sin 2 pi 12.7 t + sin 2 pi 7.1 t
        + sin 2 pi 4.7 t)`` Hz, added to the contour (and to Truth's F0);
        0..50, 0 = off.
    """

    segments: tuple[Segment, ...]
    voice: str = "man"
    jitter_pct: float = 0.0
    shimmer_db: float = 0.0
    aspiration_db: float | None = None
    open_quotient: float = 0.6
    f4_hz: float | None = None
    f5_hz: float | None = None
    b4_hz: float | None = None
    b5_hz: float | None = None
    update_s: float = 0.001
    ramp_s: float = 0.0
    flutter_pct: float = 0.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "segments", tuple(self.segments))

    @property
    def duration_s(self) -> float:
        """Total length of the schedule in seconds."""
        total = 0.0
        for s in self.segments:          # left to right, as the renderer adds them
            total += float(s.duration_s)
        return total

    def extended(self, segments: Sequence[Segment]) -> "Schedule":
        """A copy with ``segments`` appended."""
        return replace(self, segments=self.segments + tuple(segments))


def _finite(x, name: str) -> float:
    try:
        v = float(x)
    except (TypeError, ValueError):
        raise ScheduleError(f"{name} must be a number, got {x!r}") from None
    if not math.isfinite(v):
        raise ScheduleError(f"{name} must be finite, got {x!r}")
    return v


class _Plan:
    """A schedule compiled to arrays for one sampling rate (validated)."""

    def __init__(self, schedule: Schedule, rate_hz: float) -> None:
        if not isinstance(schedule, Schedule):
            raise ScheduleError("schedule must be a livevowel.dsp.synth.Schedule")
        rate_hz = _finite(rate_hz, "rate_hz")
        if not 8000.0 <= rate_hz <= 96000.0:
            raise ScheduleError(f"rate_hz must be 8000..96000 Hz, got {rate_hz:g}")
        self.rate_hz = rate_hz
        sch = schedule
        if sch.voice not in VOICE_GROUPS:
            raise ScheduleError(f"voice must be one of {', '.join(VOICE_GROUPS)}, got {sch.voice!r}")
        oq = _finite(sch.open_quotient, "open_quotient")
        if not 0.3 <= oq <= 0.9:
            raise ScheduleError(f"open_quotient must be 0.3..0.9, got {oq:g}")
        self.oq = oq
        jit = _finite(sch.jitter_pct, "jitter_pct")
        shim = _finite(sch.shimmer_db, "shimmer_db")
        if not 0.0 <= jit <= 10.0:
            raise ScheduleError(f"jitter_pct must be 0..10 %, got {jit:g}")
        if not 0.0 <= shim <= 6.0:
            raise ScheduleError(f"shimmer_db must be 0..6 dB, got {shim:g}")
        # local measure = sigma * E|e1 - e2| = sigma * 2/sqrt(pi) for iid N(0,1)
        self.jitter_sigma = jit / 100.0 * math.sqrt(math.pi) / 2.0
        self.shimmer_sigma_db = shim * math.sqrt(math.pi) / 2.0
        if sch.aspiration_db is None:
            self.aspiration_gain = 0.0
        else:
            asp = _finite(sch.aspiration_db, "aspiration_db")
            if asp > 20.0:
                raise ScheduleError(f"aspiration_db must be at most 20 dB, got {asp:g}")
            self.aspiration_gain = 10.0 ** (asp / 20.0)
        upd = _finite(sch.update_s, "update_s")
        if not 0.0002 <= upd <= 0.005:
            raise ScheduleError(f"update_s must be 0.0002..0.005 s, got {upd:g}")
        self.chunk = max(1, int(round(upd * rate_hz)))
        self.flutter = _finite(sch.flutter_pct, "flutter_pct")
        if not 0.0 <= self.flutter <= 50.0:
            raise ScheduleError(f"flutter_pct must be 0..50, got {self.flutter:g}")
        self.ramp_s = _finite(sch.ramp_s, "ramp_s")
        if not 0.0 <= self.ramp_s <= 0.1:
            raise ScheduleError(f"ramp_s must be 0..0.1 s, got {self.ramp_s:g}")

        limit = _MAX_FORMANT_FRACTION * rate_hz
        d4, d5 = VOICE_GROUPS[sch.voice]
        high_f, high_b = [], []
        for name, given, default, bname, bgiven, bdefault in (
                ("f4_hz", sch.f4_hz, d4, "b4_hz", sch.b4_hz, DEFAULT_BANDWIDTHS_HZ[3]),
                ("f5_hz", sch.f5_hz, d5, "b5_hz", sch.b5_hz, DEFAULT_BANDWIDTHS_HZ[4])):
            bw = bdefault if bgiven is None else _finite(bgiven, bname)
            if not 20.0 <= bw <= 2000.0:
                raise ScheduleError(f"{bname} must be 20..2000 Hz, got {bw:g}")
            if given is None:
                if default < limit:
                    high_f.append(default)
                    high_b.append(bw)
            else:
                f = _finite(given, name)
                if not 0.0 < f < limit:
                    raise ScheduleError(f"{name} = {f:g} Hz must be below 0.45 x rate = {limit:g} Hz")
                high_f.append(f)
                high_b.append(bw)
        self.high_f = np.array(high_f)
        self.high_b = np.array(high_b)
        self.n_sections = 3 + len(high_f)

        segs = sch.segments
        if not segs:
            raise ScheduleError("schedule has no segments; add at least one Segment")
        n = len(segs)
        kinds = np.zeros(n, dtype=np.int64)
        dur = np.zeros(n)
        f0a = np.full(n, np.nan)
        f0b = np.full(n, np.nan)
        fm = np.full((n, 3), np.nan)
        bw = np.tile(np.asarray(DEFAULT_BANDWIDTHS_HZ[:3]), (n, 1))
        trans = np.zeros(n)
        linear = np.zeros(n, dtype=bool)
        level = np.zeros(n)
        f0_max = min(1000.0, rate_hz / 10.0)
        for i, s in enumerate(segs):
            where = f"segment {i + 1}"
            if not isinstance(s, Segment):
                raise ScheduleError(f"{where}: expected a Segment, got {type(s).__name__}")
            if s.kind not in _KINDS:
                raise ScheduleError(f"{where}: kind must be voiced, noise or silent, got {s.kind!r}")
            kinds[i] = _KINDS.index(s.kind)
            dur[i] = _finite(s.duration_s, f"{where} duration_s")
            if dur[i] <= 0:
                raise ScheduleError(f"{where}: duration_s must be positive, got {dur[i]:g}")
            if s.kind == "voiced":
                if s.f0_start_hz is None:
                    raise ScheduleError(f"{where}: a voiced segment needs f0_start_hz")
                a = _finite(s.f0_start_hz, f"{where} f0_start_hz")
                b = a if s.f0_end_hz is None else _finite(s.f0_end_hz, f"{where} f0_end_hz")
                for v in (a, b):
                    if not 30.0 <= v <= f0_max:
                        raise ScheduleError(f"{where}: F0 must be 30..{f0_max:g} Hz at this rate, got {v:g}")
                f0a[i], f0b[i] = a, b
            if s.formants_hz is None:
                if s.kind == "voiced":
                    raise ScheduleError(f"{where}: a voiced segment needs formants_hz (F1, F2, F3)")
            else:
                vals = np.asarray(s.formants_hz, dtype=np.float64)
                if vals.shape != (3,) or not np.all(np.isfinite(vals)):
                    raise ScheduleError(f"{where}: formants_hz must be three numbers (F1, F2, F3) in Hz")
                if np.any(vals <= 50.0) or np.any(vals >= limit):
                    raise ScheduleError(f"{where}: formants must be 50..{limit:g} Hz (0.45 x rate), got {tuple(vals)}")
                fm[i] = vals
            if s.bandwidths_hz is not None:
                vals = np.asarray(s.bandwidths_hz, dtype=np.float64)
                if vals.shape != (3,) or not np.all(np.isfinite(vals)):
                    raise ScheduleError(f"{where}: bandwidths_hz must be three numbers (B1, B2, B3) in Hz")
                if np.any(vals < 20.0) or np.any(vals > 2000.0):
                    raise ScheduleError(f"{where}: bandwidths must be 20..2000 Hz, got {tuple(vals)}")
                bw[i] = vals
            trans[i] = _finite(s.transition_s, f"{where} transition_s")
            if not 0.0 <= trans[i] <= dur[i]:
                raise ScheduleError(f"{where}: transition_s must be 0..duration_s, got {trans[i]:g}")
            if s.transition not in ("smooth", "linear"):
                raise ScheduleError(f"{where}: transition must be smooth or linear, got {s.transition!r}")
            linear[i] = s.transition == "linear"
            level[i] = _finite(s.level_db, f"{where} level_db")
            if not -60.0 <= level[i] <= 20.0:
                raise ScheduleError(f"{where}: level_db must be -60..20 dB, got {level[i]:g}")
        has_formants = np.all(np.isfinite(fm), axis=1)
        # segments without formants hold the previous ones (or the first
        # given; a neutral tract when none is given, e.g. all silence)
        filled = np.where(has_formants.any(), fm, np.array(_NEUTRAL_HZ))
        fbw = bw.copy()
        last = int(np.argmax(has_formants))
        for i in range(n):
            if has_formants[i]:
                last = i
            elif has_formants.any():
                filled[i] = fm[last]
                fbw[i] = bw[last]
        self.kinds = kinds
        self.edges = np.concatenate([[0.0], np.cumsum(dur)])
        self.duration_s = float(self.edges[-1])
        self.n_total = int(round(self.duration_s * rate_hz))
        self.f0a, self.f0b = f0a, f0b
        self.formants = filled
        self.bandwidths = fbw
        # a transition only moves towards a next segment with its own formants
        nxt = np.concatenate([has_formants[1:], [False]])
        self.trans = np.where(nxt, trans, 0.0)
        self.linear = linear
        self.level_db = level
        self.labels = tuple(s.label for s in segs)
        voiced_idx = np.flatnonzero(kinds == _VOICED)
        self.voiced_starts = self.edges[voiced_idx]
        # voiced stretches (runs of voiced segments), for the ramps
        v = kinds == _VOICED
        run_start = v & ~np.concatenate([[False], v[:-1]])
        run_end = v & ~np.concatenate([v[1:], [False]])
        self.run_starts = self.edges[:-1][run_start].tolist()
        self.run_ends = self.edges[1:][run_end].tolist()
        # plain lists for the per-period scalar look-ups
        self._edges_l = self.edges.tolist()
        self._kinds_l = kinds.tolist()
        self._tables: dict[int, dict[str, np.ndarray]] = {}

    # -- parameter tracks (vectorised over times in seconds) ---------------
    def segment_index(self, t: np.ndarray) -> np.ndarray:
        i = np.searchsorted(self.edges, t, side="right") - 1
        return np.clip(i, 0, len(self.kinds) - 1)

    def kind_at(self, t: np.ndarray) -> np.ndarray:
        t = np.asarray(t, dtype=np.float64)
        k = self.kinds[self.segment_index(t)]
        return np.where((t >= 0.0) & (t < self.duration_s), k, _SILENT)

    def f0_at(self, t: np.ndarray) -> np.ndarray:
        t = np.asarray(t, dtype=np.float64)
        i = self.segment_index(t)
        t0, t1 = self.edges[i], self.edges[i + 1]
        w = np.clip((t - t0) / (t1 - t0), 0.0, 1.0)
        f0 = self.f0a[i] + w * (self.f0b[i] - self.f0a[i])
        if self.flutter > 0.0:
            wave = sum(np.sin(2.0 * np.pi * fr * t) for fr in _FLUTTER_HZ)
            f0 = f0 + (self.flutter / 50.0) * (f0 / 100.0) * wave
        return f0

    def _weight(self, t: np.ndarray, i: np.ndarray) -> np.ndarray:
        """Transition weight 0..1 towards segment i+1 at times t."""
        tr = self.trans[i]
        ts = self.edges[i + 1] - tr
        moving = (tr > 0) & (t > ts) & (i + 1 < len(self.kinds))
        if not np.any(moving):
            return np.zeros(len(t))
        with np.errstate(over="ignore"):   # a subnormal transition time: the step is complete (1)
            w = np.clip((t - ts) / np.where(tr > 0, tr, 1.0), 0.0, 1.0)
        w = np.where(self.linear[i], w, 0.5 - 0.5 * np.cos(np.pi * w))
        return np.where(moving, w, 0.0)

    def tract_at(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """F1-F3 and B1-B3 (each (len(t), 3), Hz) at times ``t``."""
        t = np.asarray(t, dtype=np.float64)
        i = self.segment_index(t)
        f = self.formants[i]
        b = self.bandwidths[i]
        w = self._weight(t, i)
        if np.any(w > 0):
            j = np.minimum(i + 1, len(self.kinds) - 1)
            w = w[:, None]
            f = f + w * (self.formants[j] - f)
            b = b + w * (self.bandwidths[j] - b)
        return f, b

    def level_at(self, t: np.ndarray) -> np.ndarray:
        """Source level in dB at times ``t`` (follows the transitions)."""
        t = np.asarray(t, dtype=np.float64)
        i = self.segment_index(t)
        lv = self.level_db[i]
        w = self._weight(t, i)
        j = np.minimum(i + 1, len(self.kinds) - 1)
        return lv + w * (self.level_db[j] - lv)

    # -- per-update-interval table (computed in aligned batches) -----------
    def chunk_rows(self, c0: int, c1: int) -> dict[str, np.ndarray]:
        """Parameters and coefficients of update intervals ``c0..c1-1``.

        Keys: ``f``, ``b`` (F1-F3, B1-B3, Hz), ``gain`` (source level as a
        factor), ``sos`` (m, sections, 6), ``B``, ``C`` (m, sections). Values
        are computed for whole batches of :data:`_TABLE_BATCH` intervals at
        fixed positions, so they do not depend on how a render is split.
        """
        b0, b1 = c0 // _TABLE_BATCH, (c1 - 1) // _TABLE_BATCH
        parts = [self._batch(b) for b in range(b0, b1 + 1)]
        off = c0 - b0 * _TABLE_BATCH
        if len(parts) == 1:
            return {k: v[off:off + c1 - c0] for k, v in parts[0].items()}
        return {k: np.concatenate([q[k] for q in parts])[off:off + c1 - c0] for k in parts[0]}

    def _batch(self, b: int) -> dict[str, np.ndarray]:
        got = self._tables.get(b)
        if got is not None:
            return got
        c = np.arange(b * _TABLE_BATCH, (b + 1) * _TABLE_BATCH)
        mid = (c + 0.5) * self.chunk / self.rate_hz
        f, bw = self.tract_at(mid)
        gain = 10.0 ** (self.level_at(mid) / 20.0)
        fa, ba = f, bw
        if len(self.high_f):
            fa = np.hstack([f, np.broadcast_to(self.high_f, (len(mid), len(self.high_f)))])
            ba = np.hstack([bw, np.broadcast_to(self.high_b, (len(mid), len(self.high_b)))])
        A, B, C = resonator_coefficients(fa, ba, rate_hz=self.rate_hz)
        sos = np.zeros((len(mid), self.n_sections, 6))
        sos[:, :, 0] = A
        sos[:, :, 3] = 1.0
        sos[:, :, 4] = -B
        sos[:, :, 5] = -C
        got = {"f": f, "b": bw, "gain": gain, "sos": sos, "B": B, "C": C}
        if len(self._tables) >= 16:
            self._tables.pop(next(iter(self._tables)))
        self._tables[b] = got
        return got

    # -- scalar look-ups for the glottal period loop -----------------------
    def _seg(self, s: float) -> int:
        i = bisect.bisect_right(self._edges_l, s) - 1
        return min(max(i, 0), len(self._kinds_l) - 1)

    def voiced_at_scalar(self, s: float) -> bool:
        return 0.0 <= s < self.duration_s and self._kinds_l[self._seg(s)] == _VOICED

    def f0_scalar(self, s: float) -> float:
        i = self._seg(s)
        t0, t1 = self._edges_l[i], self._edges_l[i + 1]
        w = min(max((s - t0) / (t1 - t0), 0.0), 1.0)
        a, b = float(self.f0a[i]), float(self.f0b[i])
        f0 = a + w * (b - a)
        if self.flutter > 0.0:
            wave = sum(math.sin(2.0 * math.pi * fr * s) for fr in _FLUTTER_HZ)
            f0 += (self.flutter / 50.0) * (f0 / 100.0) * wave
        return f0

    def level_scalar(self, s: float) -> float:
        return float(self.level_at(np.array([s]))[0])

    def ramp_scalar(self, s: float) -> float:
        """Onset/offset ramp factor 0..1 at time ``s`` inside a voiced stretch."""
        if self.ramp_s <= 0.0:
            return 1.0
        k = bisect.bisect_right(self.run_starts, s) - 1
        if k < 0:
            return 0.0
        x = min((s - self.run_starts[k]) / self.ramp_s, (self.run_ends[k] - s) / self.ramp_s)
        x = min(max(x, 0.0), 1.0)
        return 0.5 - 0.5 * math.cos(math.pi * x)

    def next_voiced_start(self, t: float) -> float:
        """First voiced-segment start at or after ``t`` (inf if none)."""
        k = np.searchsorted(self.voiced_starts, t, side="left")
        return float(self.voiced_starts[k]) if k < len(self.voiced_starts) else math.inf


# --------------------------------------------------------------------- truth
@dataclass
class Truth:
    """The parameters a render used, for checking an analyser against.

    ``at(times_s)`` returns the exact F0 contour and the exact (update-grid
    held) formant frequencies and bandwidths the resonators used at those
    times. ``period_starts_s``, ``periods_s`` and ``pulse_amplitudes`` list
    every glottal period rendered (its start is the previous pulse's glottal
    closure instant; jitter and shimmer included).
    """

    schedule: Schedule
    rate_hz: float
    period_starts_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    periods_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    pulse_amplitudes: np.ndarray = field(default_factory=lambda: np.zeros(0))
    _plan: _Plan | None = field(default=None, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self._plan is None:
            self._plan = _Plan(self.schedule, self.rate_hz)

    @property
    def duration_s(self) -> float:
        return self._plan.duration_s

    def at(self, times_s) -> dict[str, np.ndarray]:
        """Parameters at ``times_s`` (seconds from the start).

        Returns a dict of arrays shaped like ``times_s``: ``voiced`` (bool),
        ``f0_hz``, ``f1_hz``, ``f2_hz``, ``f3_hz``, ``b1_hz``, ``b2_hz``,
        ``b3_hz`` (Hz; NaN where not voiced) and ``kind`` (0 silent,
        1 voiced, 2 noise). F0 is the contour (with flutter, without jitter;
        the period actually used is in :attr:`periods_s`), taken at the
        exact time. For ``voiced`` and the formants a time maps to its
        nearest sample, and the formants are those of that sample's
        coefficient update interval. ``voiced`` follows the schedule: the
        last glottal pulse of a voiced stretch may end up to one period
        after it.
        """
        p = self._plan
        t = np.asarray(times_s, dtype=np.float64)
        shape = t.shape
        t = t.ravel()
        idx = np.round(t * p.rate_hz)
        ts = idx / p.rate_hz
        kind = p.kind_at(ts)
        voiced = kind == _VOICED
        chunk = np.floor(idx / p.chunk).astype(np.int64)
        f = np.full((len(t), 3), np.nan)
        b = np.full((len(t), 3), np.nan)
        inside = (chunk >= 0) & voiced
        if np.any(inside):
            c = chunk[inside]
            uniq = np.unique(c // _TABLE_BATCH)
            batches = [p._batch(int(u)) for u in uniq]
            pos = np.searchsorted(uniq, c // _TABLE_BATCH) * _TABLE_BATCH + c % _TABLE_BATCH
            f[inside] = np.concatenate([q["f"] for q in batches])[pos]
            b[inside] = np.concatenate([q["b"] for q in batches])[pos]
        f0 = p.f0_at(t)
        out = {"voiced": voiced, "kind": kind, "f0_hz": np.where(voiced, f0, np.nan)}
        for j in range(3):
            out[f"f{j + 1}_hz"] = np.where(voiced, f[:, j], np.nan)
            out[f"b{j + 1}_hz"] = np.where(voiced, b[:, j], np.nan)
        return {k: v.reshape(shape) for k, v in out.items()}

    def label_at(self, times_s) -> list[str]:
        """The segment label at each time ("" outside the schedule)."""
        p = self._plan
        t = np.atleast_1d(np.asarray(times_s, dtype=np.float64))
        i = p.segment_index(t)
        return [p.labels[k] if 0.0 <= tt < p.duration_s else "" for k, tt in zip(i, t)]


# --------------------------------------------------------------------- voice
class KlattVoice:
    """Stateful renderer: ``render(n)`` returns the next ``n`` samples.

    Any split of a schedule into blocks concatenates to exactly the samples
    of one call for the whole (the state of the source, the noise streams
    and every resonator is carried across calls). After the schedule ends it
    returns the decaying resonator tail, then zeros.

    Parameters
    ----------
    schedule : Schedule
    rate_hz : float
        Sampling rate, 8000..96000 Hz.
    seed : int
        Seed of the jitter, shimmer and noise streams.
    """

    def __init__(self, schedule: Schedule, *, rate_hz: float, seed: int = 0) -> None:
        self._plan = _Plan(schedule, rate_hz)
        self.schedule = schedule
        self.rate_hz = float(rate_hz)
        self.seed = int(seed)
        self._pos = 0
        self._u_prev = 0.0
        n = self._plan.n_sections
        self._zi = np.zeros((1, n, 2))   # DF-II transposed state per section
        self._coef_b = None          # B, C of the chunk in force
        self._coef_c = None
        self._sos = None
        # glottal periods: all rendered so far (truth) + pointer to live ones
        # compact float64 arrays (8 bytes a value; ~10 MB per hour at 120 Hz)
        self._p_start = array("d")
        self._p_len = array("d")
        self._p_amp = array("d")
        self._live = 0
        self._next_start = self._plan.next_voiced_start(0.0)
        self._noise_cache: dict[int, np.ndarray] = {}
        self._period_cache: dict[int, np.ndarray] = {}

    # -- public ------------------------------------------------------------
    @property
    def position(self) -> int:
        """Samples rendered so far."""
        return self._pos

    @property
    def n_samples(self) -> int:
        """Length of the schedule in samples (``round(duration * rate)``)."""
        return self._plan.n_total

    @property
    def finished(self) -> bool:
        """True once the whole schedule has been rendered."""
        return self._pos >= self._plan.n_total

    @property
    def truth(self) -> Truth:
        """Truth for the schedule, with the glottal periods generated so far."""
        return Truth(self.schedule, self.rate_hz,
                     np.array(self._p_start, dtype=np.float64), np.array(self._p_len, dtype=np.float64),
                     np.array(self._p_amp, dtype=np.float64),
                     _plan=self._plan)

    def extend(self, segments: Sequence[Segment]) -> None:
        """Append ``segments`` to the schedule while rendering (live use).

        The result equals rendering the extended schedule from the start when
        this is called at least one update interval plus the last segment's
        ``transition_s`` before the current end. Later than that, the last
        segment gets no transition (it has been rendered without one), and if
        rendering has already passed the end, a silent segment filling the gap
        goes first, so :attr:`truth` stays exact either way.
        """
        segments = tuple(segments)
        if not segments:
            return
        old = self.schedule
        p = self._plan
        now = self._pos / self.rate_hz
        chunk_start = (self._pos // p.chunk) * p.chunk / self.rate_hz
        segs = list(old.segments)
        last = segs[-1]
        if last.transition_s > 0 and chunk_start + p.chunk / self.rate_hz > p.duration_s - last.transition_s:
            segs[-1] = replace(last, transition_s=0.0)
        if now > p.duration_s:
            segs.append(Segment(now - p.duration_s, "silent"))
        new = replace(old, segments=tuple(segs) + segments)
        plan = _Plan(new, self.rate_hz)
        self.schedule, self._plan = new, plan
        if not math.isfinite(self._next_start):
            self._next_start = (self._p_start[-1] + self._p_len[-1]) if self._p_start else 0.0

    def render(self, n_samples: int) -> np.ndarray:
        """The next ``n_samples`` samples (float64)."""
        n = int(n_samples)
        if n != n_samples or n < 0:
            raise ScheduleError(f"n_samples must be a whole number >= 0, got {n_samples!r}")
        out = np.zeros(n)
        if n == 0:
            return out
        n0 = self._pos
        p = self._plan
        L = p.chunk
        c_first = n0 // L
        c_last = (n0 + n - 1) // L
        tab = p.chunk_rows(c_first, c_last + 1)
        x = self._excitation(n0, n, tab["gain"], c_first)
        buf = x.reshape(1, n)            # filtered in place, chunk by chunk
        sos, B, C = tab["sos"], tab["B"], tab["C"]
        for j, c in enumerate(range(c_first, c_last + 1)):
            lo = max(n0, c * L) - n0
            hi = min(n0 + n, (c + 1) * L) - n0
            if lo + n0 == c * L:         # an update interval starts here
                self._switch(sos[j], B[j], C[j])
            _cascade(self._sos, buf[:, lo:hi], self._zi)
        self._pos = n0 + n
        return buf[0] * _OUTPUT_GAIN

    # -- internals ---------------------------------------------------------
    def _switch(self, sos: np.ndarray, B: np.ndarray, C: np.ndarray) -> None:
        """New coefficients; keep each resonator's past two outputs."""
        z = self._zi[0]
        if self._coef_b is None:
            z[:] = 0.0
        else:
            # DF-II transposed state of b=[A], a=[1,-B,-C]:
            # z0 = B y[n-1] + C y[n-2], z1 = C y[n-1]
            y1 = z[:, 1] / self._coef_c
            y2 = (z[:, 0] - self._coef_b * y1) / self._coef_c
            z[:, 0] = B * y1 + C * y2
            z[:, 1] = C * y1
        self._coef_b, self._coef_c = B, C
        self._sos = sos

    def _noise(self, n0: int, n: int) -> np.ndarray:
        """White N(0,1) noise for samples n0..n0+n-1 (random access by page)."""
        first, last = n0 // _NOISE_PAGE, (n0 + n - 1) // _NOISE_PAGE
        pages = []
        for pg in range(first, last + 1):
            arr = self._noise_cache.get(pg)
            if arr is None:
                arr = np.random.default_rng([self.seed, 1, pg]).standard_normal(_NOISE_PAGE)
                self._noise_cache = {k: v for k, v in self._noise_cache.items() if k >= first}
                self._noise_cache[pg] = arr
            pages.append(arr)
        allp = np.concatenate(pages) if len(pages) > 1 else pages[0]
        off = n0 - first * _NOISE_PAGE
        return allp[off:off + n]

    def _period_draws(self, k: int) -> np.ndarray:
        """Two N(0,1) draws (jitter, shimmer) for glottal period ``k``."""
        pg = k // _PERIOD_PAGE
        arr = self._period_cache.get(pg)
        if arr is None:
            arr = np.random.default_rng([self.seed, 2, pg]).standard_normal((_PERIOD_PAGE, 2))
            self._period_cache = {pg: arr}
        return arr[k % _PERIOD_PAGE]

    def _grow_periods(self, t_end: float) -> None:
        """Generate glottal periods until one ends after ``t_end``."""
        p = self._plan
        while math.isfinite(self._next_start) and (
                not self._p_start or self._p_start[-1] + self._p_len[-1] <= t_end):
            s = self._next_start
            if not p.voiced_at_scalar(s):
                self._next_start = p.next_voiced_start(s)
                continue
            k = len(self._p_start)
            ej, es = self._period_draws(k)
            f0 = p.f0_scalar(s)
            period = (1.0 / f0) * (1.0 + p.jitter_sigma * min(max(float(ej), -3.0), 3.0))
            # flow amplitude ~ 1/F0: the excitation RMS (and output level)
            # does not depend on F0
            amp = 10.0 ** ((p.level_scalar(s)
                            + p.shimmer_sigma_db * min(max(float(es), -3.0), 3.0)) / 20.0)
            amp *= _REF_F0_HZ / f0
            amp *= p.ramp_scalar(s + period * (1.0 - p.oq / 3.0))   # at the flow peak
            self._p_start.append(s)
            self._p_len.append(period)
            self._p_amp.append(amp)
            self._next_start = s + period

    def _excitation(self, n0: int, n: int, chunk_gain: np.ndarray, c_first: int) -> np.ndarray:
        """Source samples n0..n0+n-1: radiated KLGLOTT88 voicing plus noise."""
        p = self._plan
        fs = p.rate_hz
        t = np.arange(n0, n0 + n) / fs
        t_first, t_last = n0 / fs, (n0 + n - 1) / fs
        self._grow_periods(t_last)
        # drop periods that closed more than a sample before this block
        # (a closure still shapes the sample after it, see below)
        while (self._live < len(self._p_start)
               and self._p_start[self._live] + self._p_len[self._live] + 1.0 / fs <= t_first):
            self._live += 1
        u = np.zeros(n)
        std = None
        if self._live < len(self._p_start):
            g = np.frombuffer(self._p_start[self._live:], dtype=np.float64)   # copies: no export
            T = np.frombuffer(self._p_len[self._live:], dtype=np.float64)
            amp = np.frombuffer(self._p_amp[self._live:], dtype=np.float64)
            k = np.searchsorted(g, t, side="right") - 1
            ok = k >= 0
            k[~ok] = 0
            Tk, ak = T[k], amp[k]
            x = t - g[k]
            ok &= x < Tk                 # inside a glottal period
            tau = (x - (1.0 - p.oq) * Tk) / (p.oq * Tk)
            tau = np.where(ok & (tau >= 0.0), tau, 0.0)     # open phase only
            u = ak * 6.75 * tau * tau * (1.0 - tau)        # KLGLOTT88 flow
            # Band-limit the kink at glottal closure with a two-point
            # polyBLAMP (Esqueda, Valimaki & Bilbao 2016): the flow's slope
            # jumps by S = 6.75 amp / (OQ T) there; add S Ts (1-|x|)^3 / 6
            # to the two samples less than one sample (|x|) from the closure.
            for gk, tk, ak_ in zip(g.tolist(), T.tolist(), amp.tolist()):
                c = gk + tk
                i0 = math.floor(c * fs)
                step = ak_ * 6.75 / (p.oq * tk) / fs / 6.0
                for i in (i0, i0 + 1):
                    j = i - n0
                    if 0 <= j < n:
                        dist = abs(i - c * fs)
                        if dist < 1.0:
                            u[j] += step * (1.0 - dist) ** 3
            if p.aspiration_gain > 0.0:
                std = np.where(ok, p.aspiration_gain * ak * _voicing_rms_per_unit(1.0 / Tk, p.oq), 0.0)
        e = np.empty(n)
        e[0] = u[0] - self._u_prev
        e[1:] = u[1:] - u[:-1]
        e *= fs
        self._u_prev = float(u[-1])
        s0, s1 = p._seg(t_first), p._seg(t_last)
        if t_first < p.duration_s and _NOISE in p._kinds_l[s0:s1 + 1]:
            noisy = p.kind_at(t) == _NOISE
            gain = chunk_gain[np.arange(n0, n0 + n) // p.chunk - c_first]
            level = gain * _voicing_rms_per_unit(_REF_F0_HZ, p.oq)
            std = np.where(noisy, level, 0.0 if std is None else std)
        if std is not None:
            e += std * self._noise(n0, n)
        return e


# ------------------------------------------------------------ whole signals
def render(schedule: Schedule, *, rate_hz: float, seed: int = 0,
           peak_dbfs: float | None = None) -> tuple[np.ndarray, Truth]:
    """Render a whole schedule.

    Parameters
    ----------
    schedule : Schedule
    rate_hz : float
        Sampling rate in Hz (8000..96000).
    seed : int
        Seed of jitter, shimmer and noise.
    peak_dbfs : float or None
        Scale so the peak is at this level in dB re 1.0; ``None`` keeps the
        calibrated level (identical to :class:`KlattVoice` blocks).

    Returns
    -------
    signal : ndarray, float64, ``round(duration_s * rate_hz)`` samples
    truth : Truth
    """
    voice = KlattVoice(schedule, rate_hz=rate_hz, seed=seed)
    y = voice.render(voice.n_samples)
    if peak_dbfs is not None:
        y = _normalise(y, peak_dbfs)
    return y, voice.truth


def _normalise(y: np.ndarray, peak_dbfs: float) -> np.ndarray:
    peak = float(np.max(np.abs(y))) if len(y) else 0.0
    if peak == 0.0:
        return y
    return y * (10.0 ** (_finite(peak_dbfs, "peak_dbfs") / 20.0) / peak)


def synthesize_vowel(*, formants_hz: Sequence[float], bandwidths_hz: Sequence[float] | None = None,
                     f0_hz: "float | tuple[float, float]", duration_s: float, rate_hz: float,
                     jitter_pct: float = 0.0, shimmer_db: float = 0.0,
                     aspiration_db: float | None = None, voice: str = "man",
                     open_quotient: float = 0.6, seed: int = 0,
                     peak_dbfs: float | None = -6.0) -> np.ndarray:
    """A steady vowel from the Klatt (1980) cascade.

    Parameters
    ----------
    formants_hz : sequence of 3 to 5 floats
        F1, F2, F3 (and optionally F4, F5) in Hz.
    bandwidths_hz : sequence of floats, optional
        B1.. in Hz, as many as ``formants_hz`` (default
        :data:`DEFAULT_BANDWIDTHS_HZ`).
    f0_hz : float or (start, end)
        F0 in Hz, or a linear contour from start to end.
    duration_s : float
        Seconds.
    rate_hz : float
        Sampling rate in Hz (8000..96000).
    jitter_pct, shimmer_db, aspiration_db, voice, open_quotient :
        As in :class:`Schedule`.
    seed : int
    peak_dbfs : float or None
        Peak level in dB re 1.0 (default -6); ``None`` for the calibrated
        level.

    Returns
    -------
    ndarray, float64, ``round(duration_s * rate_hz)`` samples.
    """
    fm = [ _finite(v, "formants_hz") for v in formants_hz]
    if not 3 <= len(fm) <= 5:
        raise ScheduleError(f"formants_hz needs 3 to 5 values (F1, F2, F3[, F4, F5]), got {len(fm)}")
    bws = None if bandwidths_hz is None else [_finite(v, "bandwidths_hz") for v in bandwidths_hz]
    if bws is not None and len(bws) != len(fm):
        raise ScheduleError(f"bandwidths_hz needs {len(fm)} values to match formants_hz, got {len(bws)}")
    if np.ndim(f0_hz) == 0:
        f0a = f0b = f0_hz
    else:
        if len(f0_hz) != 2:
            raise ScheduleError("f0_hz must be a number or a (start, end) pair in Hz")
        f0a, f0b = f0_hz
    extra = {}
    if len(fm) >= 4:
        extra["f4_hz"] = fm[3]
        if bws is not None:
            extra["b4_hz"] = bws[3]
    if len(fm) == 5:
        extra["f5_hz"] = fm[4]
        if bws is not None:
            extra["b5_hz"] = bws[4]
    seg = Segment(duration_s=duration_s, kind="voiced", f0_start_hz=f0a, f0_end_hz=f0b,
                  formants_hz=tuple(fm[:3]), bandwidths_hz=None if bws is None else tuple(bws[:3]))
    sch = Schedule((seg,), voice=voice, jitter_pct=jitter_pct, shimmer_db=shimmer_db,
                   aspiration_db=aspiration_db, open_quotient=open_quotient, **extra)
    y, _ = render(sch, rate_hz=rate_hz, seed=seed, peak_dbfs=peak_dbfs)
    return y


def add_noise(signal, *, snr_db: float, seed: int = 0, mask=None) -> np.ndarray:
    """``signal`` plus white Gaussian noise at ``snr_db``.

    The signal power is the mean square over ``mask`` (boolean, same length;
    e.g. ``truth.at(t)["voiced"]``) or, by default, over the active part:
    frames of 160 samples whose mean square is within 30 dB of the loudest.
    Noise power = signal power / 10^(snr_db / 10).

    Returns a new float64 array.
    """
    x = np.asarray(signal, dtype=np.float64)
    if x.ndim != 1 or len(x) == 0:
        raise ScheduleError("add_noise needs a non-empty 1-D signal")
    snr = _finite(snr_db, "snr_db")
    if mask is None:
        hop = 160 if len(x) >= 160 else len(x)
        nfr = int(math.ceil(len(x) / hop))
        pad = np.zeros(nfr * hop)
        pad[:len(x)] = x
        ms = np.mean(pad.reshape(nfr, hop) ** 2, axis=1)
        active = ms >= ms.max() * 1e-3
        m = np.repeat(active, hop)[:len(x)]
    else:
        m = np.asarray(mask, dtype=bool)
        if m.shape != x.shape:
            raise ScheduleError(f"mask shape {m.shape} does not match signal shape {x.shape}")
    if not np.any(m):
        raise ScheduleError("add_noise: the mask selects no samples")
    power = float(np.mean(x[m] ** 2))
    if power == 0.0:
        raise ScheduleError("add_noise: the signal is silent; SNR is undefined")
    noise = np.random.default_rng([int(seed), 3]).standard_normal(len(x))
    return x + noise * math.sqrt(power / 10.0 ** (snr / 10.0))
