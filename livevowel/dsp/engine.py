"""The formant analysis engine: samples in, one :class:`~livevowel.dsp.types.Frame` per hop out.

Two ways in, one analysis:

* :func:`analyze` -- a whole signal. Offline (``causal=False``) frames are
  computed in batches and the F1/F2/F3 assignment is a dynamic-programming
  (Viterbi) path over each voiced stretch. ``causal=True`` runs exactly the
  streaming analyser over the whole signal.
* :class:`StreamingAnalyzer` -- blocks of any size, state kept between them.
  Concatenating its outputs over any block split plus :meth:`flush` gives the
  same frames, bit for bit, as ``analyze(..., causal=True)``.

Stages (both paths)

1. *Input*: 1-D or ``(n, channels)`` (channels averaged); integers scaled to
   +-1 (int16 / 32768 etc.); NaN or infinite samples raise
   :class:`BadSamples` (a ``ValueError`` that the CLI prints as a one-line
   error) -- the engine never guesses what a broken sample meant.
2. *Resampling* to the analysis rate ``2 x ceiling`` with
   :func:`scipy.signal.resample_poly` (streaming: the same filter, causal,
   :class:`~livevowel.dsp.resample.StreamResampler`). An input whose Nyquist
   frequency is below the ceiling is analysed at its own rate with the
   ceiling capped (a warning says so; 8 kHz telephone audio gets 4 kHz).
3. *Frames* (:mod:`livevowel.dsp.framing`): window ``window_s`` (25 ms),
   hop ``hop_s`` (10 ms) rounded to whole samples; mean removed (DC),
   pre-emphasis from ``pre_emphasis_hz``, Gaussian taper. Frame time = window
   centre in input time.
4. *Per-frame measures*: level (dB re full scale, as
   :func:`~livevowel.dsp.pitch.frame_level_db`), F0
   and aperiodicity (YIN, de Cheveigné & Kawahara 2002, on a window of two
   periods of ``f0_min_hz`` centred on the same point), voicing with
   hysteresis (:func:`voicing_hysteresis`), LPC of order ``2 x formants + 2``
   (five formants below the voice's nominal ceiling; fewer when capped; + 4
   instead of + 2 for men, see ``SOURCE_POLE_PAIRS``) by
   ``method``, formant candidates from the roots of each frame's filter
   (:func:`~livevowel.dsp.lpc.formant_candidates`), and the frame's harmonic
   evidence (:func:`~livevowel.dsp.dap.harmonic_evidence`).
5. *Tracking* (:mod:`livevowel.dsp.tracking`): candidates -> F1/F2/F3 with
   costs for bandwidth, distance from the voice's reference formants,
   harmonic attraction and frame-to-frame change.
6. *Smoothing*: offline, running median of five then a 3-point Hanning
   window along the track within runs of measured frames
   (:func:`~livevowel.dsp.tracking.median5_hanning`, Rabiner, Sambur &
   Schmidt 1975); causal, median of (previous, current, provisional next)
   and an adaptive one-pole filter that resets on jumps.
7. *Gaps*: unvoiced runs up to ``hold_s`` (50 ms) keep the tracker state and
   report the last formants (``voiced`` False, confidence 0); longer runs
   reset it and report NaN.

Voice and ceiling (common practice, from memory): adult_male 5000 Hz,
adult_female 5500 Hz, child 8000 Hz. ``voice="auto"`` decides from F0 and
the formants together (:func:`voice_from_frames`,
:mod:`livevowel.dsp.voicegroup`): each group's Peterson & Barney (1952)
vowel means (F0, F1..F3) are matched, frame by frame, against the F0 and
the formant candidates of the adult_female plan, and the group that fits
best wins; F0 alone (:func:`voice_from_f0`) takes women above ~250 Hz for
children. Offline the whole file's voiced frames are used.
Causally, the analyser starts as adult_female and settles once ``auto_settle_s``
(0.5 s) of voiced frames has been seen, then keeps that voice for the rest of
the stream; until then the other candidate voices only resample and keep
their samples, so the switch needs no re-analysis (the decision is made at a
fixed frame, so it is the same for every block split). Once settled on
another voice, its chain measures the formants with the F0 of the primary
(adult_female) chain, which also gives level and voicing; offline ``auto``
does the same with the F0 of the first pass.

Harmonic attraction (high F0): plain autocorrelation LPC is pulled towards
harmonics when F0 is high (the spectrum is sampled only every F0 Hz). The
default ``method="dap"`` fits the all-pole model to the harmonic powers
only (discrete all-pole modelling, El-Jaroudi & Makhoul 1991;
:mod:`livevowel.dsp.dap`), using the frame's F0 (YIN with its dip-skipping rule);
harmonics near the local noise floor are down-weighted. Frames without an
F0 use autocorrelation LPC. The tracker also penalises candidates that are
narrow and sit on a harmonic ``k x F0`` (``w_harm``) and skipping strong
candidates (``w_skip``). ``tests/test_engine_accuracy.py`` compares it with
plain autocorrelation LPC on the same frames. Stabilised weighted linear
prediction (Magi et al. 2009; Alku et al. 2013) is available as
``method="weighted"`` but did worse than DAP on the project's synthetic
vowels with the Gaussian-tapered frames used here.

F1 at or below F0 (e.g. women's /i/, 310 Hz, at F0 350-400 Hz; men's
/i u/ in falsetto): the harmonic magnitudes barely tell F1 = 310 Hz from
460 Hz there (the H1/H2 ratio changes by < 1 dB), and DAP puts F1 between
the first two harmonics, 25-75 % high. Where DAP's lowest candidate lies
below ``closed_phase_below`` (1.3) x F0, multi-cycle closed-phase covariance
LPC of the frame (Wong, Markel & Gray 1979; :mod:`livevowel.dsp.closedphase`)
supplies that candidate instead, if its own lowest resonance lies between
``CLOSED_PHASE_ABOVE`` (0.5) and 1.3 x F0 and is either lower than DAP's
(DAP's error there is upwards) or comes from a near-exact fit (normalised
error below ``CLOSED_PHASE_CLEAN_ERROR``, 1e-3: in noise the closed-phase
F1 itself errs upwards, and then only corrects DAP downwards). The
information is in the free decay of the tract between glottal closures,
not in the harmonic levels. Same compiled kernel in both paths. Measured
with ``livevowel.benchmarks.dsp.accuracy(quick=False)`` (Peterson & Barney
1952 vowels from memory, project synthesiser, open quotient 0.6), F0
300-400 Hz, DAP alone -> with it: median F1 error / frames > 20 % off,
clean: women 4.21 / 6.7 -> 2.93 / 0.0 %, men 6.53 / 26.7 -> 4.36 / 13.3 %,
children 3.98 / 0.0 -> 3.50 / 0.0 %; in 20 dB white noise: women 4.21 /
8.6 -> 4.21 / 4.4 %, men 6.15 / 19.6 -> 6.21 / 15.6 %, children 4.23 / 2.8
-> 4.36 / 2.8 % (on three other seed sets: women +0.04..+0.11 and children
+0.05..+0.08 points of median, men -0.02..-0.21; frames > 20 % off women
-2.4..-4.2, men -4.4..-4.9 points, children 0..+0.3); men's F2 > 20 % off
in noise 2.4 -> 3.2 %; F0 100-250 Hz rows unchanged or better (men clean
2.27 -> 2.08 %). Cost where it runs: about 0.045 ms of CPU per frame
(median; p99 0.075 ms; order 12-14, 2-core machine); streaming hops on
vowels at F0 350-400 Hz stayed under 0.75 ms at p99 with it (0.3-0.45 ms
without, depending on the machine's load).

Known limits: F1 midway
between two widely spaced harmonics (e.g. 470 Hz at F0 = 300 Hz) is still
pulled up to ~20 % towards the stronger one. The closed-phase F1 needs a
glottal cycle that really closes and a quiet signal: its own reading is
within 1 % on the synthesiser at open quotient 0.6, 5-15 % low at 0.8 (a
short closed phase), and more than 20 % off (mostly high) in a third of
the frames at 30 dB SNR (the rule above keeps the engine's F1 from
following it upwards). Measured on the same vowels at F0 300-400 Hz
(median F1 error / frames > 20 % off, DAP alone -> with it): other open
quotients 0.4-0.8 and aspiration noise (-20, -10 dB) better for both
groups or within 0.11 point of median (women at open quotient 0.7: 2.74 /
3.4 -> 2.85 / 3.2 %; at 0.4: 14.2 / 31.7 -> 3.1 / 21.6 %); behind a 100 Hz
high-pass channel the same gain as without; but reverberation fills the
closed phase with earlier excitation, which the fit takes for the tract
(exponential tail of 50 ms; direct-to-reverberant ratio about +3.5 dB:
women 5.00 / 6.1 -> 5.67 / 6.5 %, men 7.99 / 20.8 -> 7.93 / 14.2 %; about
-8 dB: women 7.55 / 14.1 -> 8.08 / 16.5 %, men 9.31 / 24.8 -> 9.80 / 24.8 %),
and so does a phase-distorting channel (two resonant all-pass sections at
500 and 2000 Hz, women: 4.28 / 6.8 -> 4.65 / 10.7 %); the fit's own error
does not flag those frames. A wrong F0 misplaces the closed phases.

Harmonic locking above 1.3 x F0: DAP also reads F1 on 2 x F0 where F1 lies
between the first harmonics and the harmonic levels do not tell them apart
(men's /ɔ/, F1 570 and F2 840 Hz, at F0 350-400 Hz: F1 and F2 merge on 2 x
F0; /ʊ/, F1 440 Hz, at F0 300 Hz; a pressed voice, whose weak first
harmonic moves a low F1 onto the second at F0 170-240 Hz). Where DAP's
lowest candidate lies on a harmonic below ``CLOSED_PHASE_UPPER`` (2.2) x F0,
a near-exact closed-phase fit that disagrees with it replaces all its
candidates (measured: see ``CLOSED_PHASE_UPPER``; ``livevowel bench --only
conditions`` prints the engine with and without the closed-phase step under
other voices, noise, room and channel). Between harmonics (1.3-1.8 x
F0) DAP can also read F1 high with F2 and F3 right (men's /ɝ/, F1 490 Hz,
at F0 350 Hz: 603 Hz); there a fit exact to 60 dB (``CLOSED_PHASE_EXACT_ERROR``)
that reads F2 and F3 where DAP does gives F1 alone (``CLOSED_PHASE_AGREE``).
In noise nothing changes: the fit is never exact enough there, and a real
microphone's noise floor (40-60 dB down) keeps the between-harmonics case
out of use; it serves noise-free signals such as the benchmarks' vowels.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields, replace
from typing import Any

import numpy as np

from livevowel.dsp import framing
from livevowel.dsp._jit import jit
from livevowel.dsp.closedphase import CLOSED_FRACTION, MAX_SHIFT_FRACTION, _closed_phase_kernel
from livevowel.dsp.dap import HARMONIC_SEARCH, _harmonic_dap_kernel, _window_power
from livevowel.dsp.lpc import METHODS as LPC_METHODS
from livevowel.dsp.lpc import (_autocorrelation_lpc_kernel, _candidates_kernel, candidates_fallback,
                               formant_candidates, lpc)
from livevowel.dsp.pitch import LEVEL_FLOOR_DB as _LEVEL_FLOOR_DB
from livevowel.dsp.pitch import (YIN_SKIP_FACTOR, _lags, _yin_kernel, voicing_hysteresis, yin,
                                 yin_frame_length)
from livevowel.dsp.resample import StreamResampler, resample
from livevowel.dsp.tracking import (CausalTracker, DisplaySmoother, FrameCoster, TrackerCosts, local_costs,
                                    median5_hanning, state_table, viterbi_segments)
from livevowel.dsp.types import Frame, FrameTrack
from livevowel.dsp.voicegroup import add_frame_cost, voice_from_costs, voice_from_frames
from livevowel.errors import UserError

__all__ = [
    "VOICES",
    "NOMINAL_CEILING_HZ",
    "AnalysisSettings",
    "AnalysisResult",
    "BadSamples",
    "analyze",
    "StreamingAnalyzer",
    "warm_up",
    "voice_from_f0",
    "voice_from_frames",
]

#: Formant methods: the LPC methods of :mod:`livevowel.dsp.lpc`, discrete
#: all-pole modelling of the harmonics (``"dap"``, :mod:`livevowel.dsp.dap`) and
#: ``"hybrid"`` (autocorrelation LPC below ``dap_above_hz``, DAP above).
METHODS: tuple[str, ...] = LPC_METHODS + ("dap", "hybrid")

#: Speaker groups the engine knows.
VOICES: tuple[str, ...] = ("adult_male", "adult_female", "child", "auto")

#: Formant ceiling per voice, Hz (common practice, from memory).
NOMINAL_CEILING_HZ: dict[str, float] = {"adult_male": 5000.0, "adult_female": 5500.0, "child": 8000.0}

#: Reference F1..F3 per voice, Hz: the geometric middle of the range of
#: the Peterson & Barney (1952) vowel means of each group (e.g. men's F1
#: 270..730 Hz -> 444 Hz; values from memory). A weak pull only: it settles
#: which candidate is which when the others costs are equal.
REFERENCE_HZ: dict[str, tuple[float, float, float]] = {
    "adult_male": (444.0, 1387.0, 2255.0),
    "adult_female": (516.0, 1602.0, 2547.0),
    "child": (617.0, 1842.0, 2838.0),
}

#: Number of formants assumed below the nominal ceiling (LPC order = 2 n + 2 x
#: ``SOURCE_POLE_PAIRS``).
FORMANTS_BELOW_CEILING = 5

#: Pole pairs beyond the formants, per voice (the glottal source's spectral
#: shape, and in noise the floor the weak high harmonics sink into). Men get
#: two: measured on the Peterson & Barney (1952) men's vowels (from memory)
#: from the project synthesiser at F0 100-160 Hz (three seed sets), order
#: 12 -> 14 moves the median F1 error from 0.9 % to 1.35-1.55 % clean but
#: from 1.65-1.75 % to 1.2-1.3 % in 20 dB white noise (F2: 0.2 -> 0.5 %
#: clean, 0.55-0.6 -> 0.5-0.55 % noisy). With a 5000 Hz band there are
#: 30-50 harmonics at those F0s, enough for the 15 parameters; at higher F0
#: ``DAP_HARMONICS_PER_PARAMETER`` lowers the order again.
SOURCE_POLE_PAIRS: dict[str, int] = {"adult_male": 2, "adult_female": 1, "child": 1}

#: Harmonics per model parameter the DAP fit keeps (``harmonics_per_parameter``
#: of :func:`livevowel.dsp.dap.dap`): the order of a frame is lowered until it
#: has at least this many. Women and children: 1.4, the default of
#: ``dap.HARMONICS_PER_PARAMETER``. Men 2.0: with order 14 and 1.5, men's
#: vowels at F0 170-240 Hz (20-29 harmonics) measured 4.3 % median F1 error;
#: with 2.0 (orders 12, 10, 10 there; see dap.MAX_ORDER_DROP) 2.5 % (order
#: 12 throughout: 3.4 %).
DAP_HARMONICS_PER_PARAMETER: dict[str, float] = {"adult_male": 2.0, "adult_female": 1.4, "child": 1.4}

#: F0 boundaries (Hz) of :func:`voice_from_f0` (between group means of
#: Peterson & Barney 1952: men ~130, women ~220, children ~260 Hz, from memory).
#: ``voice="auto"`` itself decides with :func:`voice_from_frames`, from F0 and
#: formants together (F0 alone classes many women as children).
AUTO_F0_MALE_BELOW_HZ = 165.0
AUTO_F0_FEMALE_BELOW_HZ = 250.0

#: Lowest closed-phase F1 (x F0) that may replace DAP's lowest candidate (see
#: ``AnalysisSettings.closed_phase_below``): Peterson & Barney's (1952)
#: lowest F1, men's /i/ 270 Hz (from memory), is 0.68 x a falsetto F0 of
#: 400 Hz; readings far below F0 are spurious poles of a poorly placed
#: closed phase.
CLOSED_PHASE_ABOVE = 0.5
#: A closed-phase F1 above DAP's lowest candidate is taken only where the
#: fit's normalised prediction error on its closed-phase samples is below
#: this (the closed phases are predicted to 30 dB: a clean signal); a lower
#: one is taken at any error, since DAP reads F1 below F0 too high.
CLOSED_PHASE_CLEAN_ERROR = 1e-3
#: Harmonic locking (DAP's F1 on 2 x F0 where F1 lies between the first
#: harmonics, or F1 and F2 merged there: men's /ɔ/ at F0 350-400 Hz, a pressed
#: voice whose first harmonic is weak): where DAP's lowest candidate lies at
#: or above ``closed_phase_below`` but below ``CLOSED_PHASE_UPPER`` x F0, and
#: within ``CLOSED_PHASE_ON_HARMONIC`` x F0 of a harmonic, the closed-phase fit
#: is asked too; a near-exact fit (``CLOSED_PHASE_CLEAN_ERROR``) whose F1
#: differs from DAP's by more than ``CLOSED_PHASE_DIFFER`` (relative) replaces
#: all of DAP's candidates. Measured on the Peterson & Barney (1952) vowels
#: (from memory) from the project synthesiser (``livevowel bench --only dsp``
#: and ``--only conditions``), without -> with, frames with F1 or F2 more than
#: 20 % off at F0 300-400 Hz: clean men 12 -> 2 % (the accuracy table's F1
#: 13.3 -> 3.3 %, F2 6.7 -> 0 %, median F1 4.36 -> 2.53 %); pressed voice
#: (open quotient 0.4) men 40 -> 17 %, women 22 -> 8 %, children 28 -> 5 %,
#: and at F0 100-250 Hz men 12 -> 0 %, women 6 -> 3 %, children 3 -> 0 %;
#: aspiration noise men 22 -> 16 %, children 9 -> 6 %; reverberant tail men
#: 22 -> 17 %, women 18 -> 16 %, children 32 -> 33 %; phase-distorting channel
#: men 26 -> 18 %, children 3 -> 4 %; every other row of both tables (white
#: noise at 20 and 30 dB included: the fit is never that exact there)
#: unchanged. On other F0s (290, 325, 375 Hz) the same picture, but the
#: phase-distorting channel costs children 0 -> 6 %. Within 0.1 x F0 of a
#: harmonic instead of 0.2: smaller gains (pressed women 22 -> 19 %) and no
#: row worse; within 0.3: clean men 0 %, but the channel costs women 11 -> 19
#: % and children 3 -> 9 %. Without the harmonic condition, and counting a
#: disagreement in F2 too, the channel's all-pass poles came in as formants
#: (women 11 -> 28 %, children 3 -> 27 %).
CLOSED_PHASE_UPPER = 2.2
CLOSED_PHASE_ON_HARMONIC = 0.2
CLOSED_PHASE_DIFFER = 0.1
#: Between harmonics (DAP's lowest candidate at or above ``closed_phase_below``
#: and below ``CLOSED_PHASE_UPPER`` x F0, but not within
#: ``CLOSED_PHASE_ON_HARMONIC`` x F0 of a harmonic: 1.3-1.8 x F0 by default) DAP
#: has not merged F1 and F2 but may still read F1 high (men's /ɝ/, F1 490 Hz, at
#: F0 350 Hz: 603 Hz, 1.72 x F0, with F2 and F3 right). There the fit gives F1
#: alone, and only where its normalised error is below
#: ``CLOSED_PHASE_EXACT_ERROR`` (closed phases predicted to 60 dB: white noise 60
#: dB down already measures 2.6e-6), its F1 differs from DAP's by more than
#: ``CLOSED_PHASE_DIFFER``, lies below DAP's F2, and its second and third
#: resonances lie within ``CLOSED_PHASE_AGREE`` (relative) of DAP's F2 and F3 (F3
#: where DAP has one); 0 turns the case off. Measured on the signals of
#: ``livevowel bench --only dsp`` and ``--only conditions``, this constant 0 ->
#: 0.1, frames with F1 or F2 more than 20 % off at F0 300-400 Hz: clean men 3.3 ->
#: 0 % (median F1 2.53 -> 1.81 %); pressed voice men 17.2 -> 6.9 %, women 8.4 ->
#: 6.3 %, children 5.4 -> 3.3 %, and women at F0 100-250 Hz 3.0 -> 1.4 %; 100 Hz
#: low cut men 2.1 -> 0 %; every other row of both tables unchanged (20 and 30 dB
#: noise, aspiration, breathy voice, reverberant tail and the phase-distorting
#: channel included; some medians move by under 0.5 point, breathy children 4.83
#: -> 4.87 %). On other F0s (290, 325, 375 Hz): pressed men 18.2 -> 4.8 %, women
#: 13.3 -> 10.0 %, children 3.3 -> 0 %, clean women 3.6 -> 3.3 %, breathy children
#: 1.4 -> 1.5 %, the rest unchanged. Tried first: the same with the fit's error
#: below ``CLOSED_PHASE_CLEAN_ERROR`` and F2 agreement only -- breathy voices (the
#: fit's F1 15 % low at errors 2e-5 to 3e-4) and the phase-distorting channel (F1
#: moved onto 2 x F0) then lost 2-7 points (breathy women 3.4 -> 6.0 %, the
#: channel's women 11.4 -> 18.4 %); with the 60 dB error but no F3 check, the
#: channel cost children's /u/ at F0 300 Hz 0 -> 33 % (a fit with a broad F1 and a
#: spurious third resonance at 1.9 kHz).
CLOSED_PHASE_AGREE = 0.1
CLOSED_PHASE_EXACT_ERROR = 1e-6

#: Confidence: F1 or F2 within this fraction of F0 of a harmonic counts as on it. A
#: fit with too few harmonics measured above the noise puts its resonances on
#: harmonics (see ``livevowel.dsp.dap.EVIDENCE_NONE``); such a frame's confidence
#: is scaled by its harmonic evidence, so the practice screen shows no dot rather
#: than a wrong one. Measured on the accuracy benchmark's vowels in white noise at
#: 20 dB SNR (Peterson & Barney 1952 means, from memory; the "What the practice
#: screen shows" table of ``livevowel bench --only dsp``), live-path frames the
#: screen shows (confidence >= 0.4) that are more than 20 % off: men F0 300-400 Hz
#: 17.2 -> 11.1 %, children 3.2 -> 2.3 %, women 1.8 -> 1.9 %; frames shown
#: 93.2 -> 76.4 %, 94.6 -> 90.0 %, 88.3 -> 85.5 %; F0 100-250 Hz and clean
#: rows moved by at most 0.2 points.
ON_HARMONIC = 0.06
_AUTO_DEFAULT = "adult_female"
_DAP_NFFT = 1024           # FFT length of DAP's harmonic spectrum (at least; longer frames get more)
#: Offline analysis: at most this many threads by default (``AnalysisSettings.threads=0``) ...
MAX_THREADS = 2
#: ... each with at least this many frames (smaller batches are not worth a thread).
MIN_FRAMES_PER_THREAD = 200
#: Offline analysis measures frames in parts of at most this many (bounded memory; 10 s of audio per part).
FEATURE_CHUNK_FRAMES = 1000
_AUTO_OFFLINE_FRAMES = 150    # offline auto: voiced frames the decision looks at, evenly spaced (3x the live path's 0.5 s)
_GATE_MARGIN_DB = 6.0      # voicing_hysteresis default margin_db, used by both paths

#: Ringing at the end of a voiced stretch: when the glottis stops, the tract's resonances ring
#: on for a few milliseconds, periodic at F1, and YIN reads F1 as F0 (a man's vowel ending on
#: F0 105 -> 401 Hz with F1 388 Hz, in a CMU ARCTIC sentence; every vowel end of the project
#: synthesiser, e.g. 179 -> 500 Hz for F1 500 Hz). A voiced frame whose F0 is more than
#: ``RING_JUMP`` x that of the voiced frame just before it (``RING_WITHIN``) while its level is
#: more than ``RING_DROP_DB`` below that frame's is such ringing, not voice, and is reported unvoiced, as
#: are the frames after it while they stay that high and that quiet (the gate's own state
#: runs on). Measured on that sentence (arctic_a0007 as shipped with pysptk, 4 s, 13 voiced
#: stretches): 1 of the 13 ends had such a frame, and no other frame matched the rule; on the
#: synthesiser's vowels at F0 120, 200 and 350 Hz (F1 500 Hz) the ringing ends (F0 501-502 Hz
#: after 108-315 Hz) are gone, offline and live. 1.5 rather than 1.7 catches F0 315 -> 502 Hz.
#: Not caught: ringing that starts a voiced stretch (after a stop or a gap of more than
#: ``RING_WITHIN`` frames), where there is no voice frame to measure it against.
RING_JUMP = 1.5
RING_DROP_DB = 3.0
#: ... measured against the last voiced frame with an F0 at most this many frames back (the
#: source fading out: YIN finds no F0 in the frames between, or the gate closes for one).
RING_WITHIN = 2


def _ringing_step(state: tuple | None, k: int, voiced: bool, f0: float, level_db: float) -> tuple[bool, tuple | None]:
    """One frame of the ringing rule (see ``RING_JUMP``): ``(voiced, state)`` after frame ``k``.

    ``state`` is None, ``("voice", k, f0, level)`` (the last frame reported voiced with an F0)
    or ``("ring", k, f0, level)`` (the last ringing frame, and the voice frame it is measured
    against); either lapses ``RING_WITHIN`` frames after its frame ``k``. Unvoiced frames change
    nothing, so the batch path may pass voiced frames only."""
    if state is not None and k - state[1] > RING_WITHIN:
        state = None
    if not voiced:
        return False, state
    if state is not None and state[0] == "ring":
        if not (f0 <= RING_JUMP * state[2]) and level_db < state[3] - RING_DROP_DB:   # a NaN F0 rings on too
            return False, ("ring", k, state[2], state[3])
        state = None
    elif state is not None and f0 > RING_JUMP * state[2] and level_db < state[3] - RING_DROP_DB:
        return False, ("ring", k, state[2], state[3])
    return True, (("voice", k, f0, level_db) if math.isfinite(f0) else state)


def _drop_ringing(voiced: np.ndarray, f0_hz: np.ndarray, level_db: np.ndarray) -> np.ndarray:
    """:func:`_ringing_step` over a whole file's frames: the voiced flags with ringing frames cleared."""
    out = voiced.copy()
    state = None
    for k in np.flatnonzero(voiced):
        out[k], state = _ringing_step(state, int(k), True, float(f0_hz[k]), float(level_db[k]))
    return out
_LOWEST_RATE_HZ = 8000
_HIGHEST_RATE_HZ = 192000


class BadSamples(UserError, ValueError):
    """The input holds samples the engine cannot analyse (NaN, infinite, wrong type)."""


def voice_from_f0(median_f0_hz: float) -> str:
    """Voice group for a median F0 (Hz) alone, by the ``AUTO_F0_*`` bounds.

    Not what ``voice="auto"`` uses (see :func:`voice_from_frames`); kept for
    callers that have nothing but an F0.
    """
    if not np.isfinite(median_f0_hz):
        return _AUTO_DEFAULT
    if median_f0_hz < AUTO_F0_MALE_BELOW_HZ:
        return "adult_male"
    if median_f0_hz < AUTO_F0_FEMALE_BELOW_HZ:
        return "adult_female"
    return "child"


# ---------------------------------------------------------------------------
# settings


@dataclass(frozen=True, kw_only=True)
class AnalysisSettings:
    """Engine settings (keyword-only, immutable). Units in the names.

    Attributes
    ----------
    voice : {"adult_male", "adult_female", "child", "auto"}
        Speaker group; sets the formant ceiling and the reference formants.
    ceiling_hz : float or None
        Formant ceiling in Hz; None follows ``voice``.
    window_s, hop_s : float
        Analysis window and hop in seconds.
    pre_emphasis_hz : float
        Pre-emphasis corner in Hz (0 = off).
    taper : {"gaussian", "hann", "hamming"}
        Window shape (see :mod:`livevowel.dsp.framing`).
    method : {"dap", "autocorrelation", "burg", "weighted", "hybrid"}
        ``"dap"`` (default): discrete all-pole fit to the harmonic powers
        (El-Jaroudi & Makhoul 1991, :mod:`livevowel.dsp.dap`) where F0 is
        known, autocorrelation LPC elsewhere; the others as in
        :mod:`livevowel.dsp.lpc`; ``"hybrid"``: autocorrelation below
        ``dap_above_hz`` F0, DAP above.
    dap_above_hz : float
        Hybrid only: F0 (Hz) from which DAP is used.
    dap_iterations : int
        Fixed-point iterations of the DAP fit.
    closed_phase_below : float
        DAP only: where the fit's lowest candidate lies below this multiple
        of F0, closed-phase covariance LPC of the frame
        (:mod:`livevowel.dsp.closedphase`, Wong, Markel & Gray 1979) gives
        that candidate instead, if its own lowest resonance lies between
        ``CLOSED_PHASE_ABOVE`` and this multiple of F0 and is lower than
        DAP's or from a near-exact fit (``CLOSED_PHASE_CLEAN_ERROR``).
        0 turns it off.
        See the module notes (harmonic attraction) for the measurements.
    f0_min_hz, f0_max_hz : float
        F0 search range in Hz.
    yin_threshold : float
        YIN absolute threshold.
    yin_skip_margin : float
        ``skip_margin`` of :func:`~livevowel.dsp.pitch.yin`'s dip rule: a dip
        below the threshold is passed over when its CMND value exceeds 2 x
        the deepest dip's value plus this (and the fallback takes the first dip within this of
        the deepest). 0.04 rather than yin's 0.05: in 20 dB noise a strong
        second harmonic (children's /ɛ/, F1 690 Hz at F0 350 Hz) makes a dip
        of ~0.07 at half the period while the period's own dip is ~0.015,
        which 0.05 kept (octave-high F0). Measured on the Peterson & Barney
        (1952) vowels (from memory) from the project synthesiser, three groups,
        F0 100-400 Hz, clean and 20 dB SNR, three seed sets: frames with F0
        more than 10 % off 68/66/70 (0.05) -> 32/38/41 (0.04).
    threads : int
        Offline :func:`analyze` only: threads that share the per-frame work of
        a long input (the compiled kernels release the GIL; every frame is
        computed on its own, so the result does not depend on the split).
        0: as many as the machine has cores, at most ``MAX_THREADS``; 1: none.
    voicing_on, voicing_off : float
        Aperiodicity below which voicing turns on / above which it turns off.
    voicing_floor_db : float
        Level (dB re full scale) below which a frame cannot turn voicing on.
    voicing_relative_db, voicing_peak_decay_db_per_s : float
        Frames more than this many dB below the recent peak level are
        unvoiced; the peak falls this fast (dB/s). See :func:`relative_level`.
    max_bandwidth_hz : float
        Candidates wider than this are not formants (Hz).
    hold_s : float
        Unvoiced gaps up to this long keep the track (seconds).
    smoother_alpha : float
        Smallest one-pole coefficient of the causal display smoother (0..1].
    smoother_jump : float
        Relative change that passes the smoother at once (0.15 = 15 %).
    auto_settle_s : float
        Voiced time after which causal ``voice="auto"`` settles (seconds).
    w_freq, w_bw, w_harm, w_trans, miss_cost, w_skip : float
        Tracking cost weights (see :mod:`livevowel.dsp.tracking`).
    """

    voice: str = "auto"
    ceiling_hz: float | None = None
    window_s: float = 0.025
    hop_s: float = 0.010
    pre_emphasis_hz: float = 50.0
    taper: str = "gaussian"
    method: str = "dap"
    dap_above_hz: float = 160.0
    dap_iterations: int = 20
    closed_phase_below: float = 1.3
    f0_min_hz: float = 60.0
    f0_max_hz: float = 700.0
    yin_threshold: float = 0.1
    yin_skip_margin: float = 0.04
    threads: int = 0
    voicing_on: float = 0.25
    voicing_off: float = 0.4
    voicing_floor_db: float = -50.0
    voicing_relative_db: float = 30.0
    voicing_peak_decay_db_per_s: float = 20.0
    max_bandwidth_hz: float = 700.0
    hold_s: float = 0.05
    smoother_alpha: float = 0.4
    smoother_jump: float = 0.15
    auto_settle_s: float = 0.5
    # tracking weights: defaults are the tracker's own (one place to change them)
    w_freq: float = TrackerCosts.w_freq
    w_bw: float = TrackerCosts.w_bw
    w_harm: float = TrackerCosts.w_harm
    w_trans: float = TrackerCosts.w_trans
    miss_cost: float = TrackerCosts.miss_cost
    w_skip: float = TrackerCosts.w_skip

    def __post_init__(self) -> None:
        def bad(msg: str) -> None:
            raise ValueError(f"AnalysisSettings: {msg}")

        if self.voice not in VOICES:
            bad(f"voice {self.voice!r} is not one of {', '.join(VOICES)}")
        if self.ceiling_hz is not None and not (1000.0 <= float(self.ceiling_hz) <= 20000.0):
            bad(f"ceiling_hz {self.ceiling_hz} is outside 1000..20000 Hz")
        if not (0.005 <= self.window_s <= 0.2):
            bad(f"window_s {self.window_s} is outside 0.005..0.2 s")
        if not (0.001 <= self.hop_s <= self.window_s * 4):
            bad(f"hop_s {self.hop_s} must be at least 0.001 s and at most 4 windows")
        if self.pre_emphasis_hz < 0:
            bad("pre_emphasis_hz must be >= 0")
        if self.taper not in framing.WINDOWS:
            bad(f"taper {self.taper!r} is not one of {', '.join(framing.WINDOWS)}")
        if self.method not in METHODS:
            bad(f"method {self.method!r} is not one of {', '.join(METHODS)}")
        if not (self.closed_phase_below == 0 or CLOSED_PHASE_ABOVE < self.closed_phase_below <= 4):
            bad(f"closed_phase_below {self.closed_phase_below} must be 0 (off) or in "
                f"{CLOSED_PHASE_ABOVE:g}..4 (a multiple of F0)")
        if not (isinstance(self.threads, (int, np.integer)) and 0 <= self.threads <= 64):
            bad(f"threads {self.threads!r} must be a whole number 0..64 (0: as many as cores)")
        if not (0 < self.f0_min_hz < self.f0_max_hz):
            bad("need 0 < f0_min_hz < f0_max_hz")
        if not (0 < self.voicing_on <= self.voicing_off):
            bad("need 0 < voicing_on <= voicing_off")
        if not (0 < self.yin_threshold < 1):
            bad("yin_threshold must be between 0 and 1")
        if not (0 <= self.yin_skip_margin < 1):
            bad("yin_skip_margin must be in 0..1")
        if self.hold_s < 0 or self.auto_settle_s < 0:
            bad("hold_s and auto_settle_s must be >= 0")
        if not (0 < self.smoother_alpha <= 1) or not self.smoother_jump > 0:
            bad("need 0 < smoother_alpha <= 1 and smoother_jump > 0")

    @classmethod
    def from_config(cls, settings: Any) -> "AnalysisSettings":
        """Build from a :class:`livevowel.config.Settings` (its ``analysis`` section).

        Keys ending in ``_ms`` are converted to seconds; keys the dataclass
        does not know are ignored (they belong to other layers).
        """
        sec = dict(settings["analysis"])
        aliases = {"transition_cost": "w_trans", "bandwidth_cost": "w_bw", "reference_cost": "w_freq",
                   "harmonic_cost": "w_harm", "skip_cost": "w_skip"}
        sec = {aliases.get(k, k): v for k, v in sec.items()}
        kw: dict[str, Any] = {}
        names = {f.name for f in fields(cls)}
        for key, value in sec.items():
            if key.endswith("_ms") and key[:-3] + "_s" in names:
                kw[key[:-3] + "_s"] = float(value) / 1000.0
            elif key in names:
                kw[key] = value
        try:
            return cls(**kw)
        except ValueError as exc:
            raise UserError(f"analysis settings: {exc}") from None

    def costs(self) -> TrackerCosts:
        return TrackerCosts(w_freq=self.w_freq, w_bw=self.w_bw, w_harm=self.w_harm, w_trans=self.w_trans,
                            miss_cost=self.miss_cost, w_skip=self.w_skip)


@dataclass
class AnalysisResult:
    """What :func:`analyze` returns.

    Attributes
    ----------
    frames : FrameTrack
    analysis_rate_hz : float
        Rate the formants were measured at (2 x ceiling, or the input rate when capped).
    ceiling_hz : float
    voice : str
        The voice used (the decided one when the setting was ``"auto"``; for
        causal auto, the voice it settled on).
    order : int
        LPC order.
    method : str
    input_rate_hz : float
    warnings : list of str
    """

    frames: FrameTrack
    analysis_rate_hz: float
    ceiling_hz: float
    voice: str
    order: int
    method: str
    input_rate_hz: float
    warnings: list[str] = field(default_factory=list)


# ---------------------------------------------------------------------------
# input handling


def _check_rate(rate_hz: Any) -> int:
    try:
        r = float(rate_hz)
    except (TypeError, ValueError):
        raise BadSamples(f"sampling rate must be a number in Hz, got {rate_hz!r}") from None
    if not np.isfinite(r) or r != int(r):
        raise BadSamples(f"sampling rate must be a whole number of Hz, got {rate_hz!r}")
    if not (_LOWEST_RATE_HZ <= r <= _HIGHEST_RATE_HZ):
        raise BadSamples(f"sampling rate {r:g} Hz is outside {_LOWEST_RATE_HZ}..{_HIGHEST_RATE_HZ} Hz; "
                         "resample the recording first")
    return int(r)


def to_mono_float(samples: Any, *, where: str = "input") -> np.ndarray:
    """1-D float64 samples in full-scale units from 1-D or ``(n, channels)`` input.

    Integers are scaled to +-1 by their type's range (``int16 / 32768``;
    unsigned types are centred first); channels are averaged.

    Raises
    ------
    BadSamples
        Non-numeric data, more than two dimensions, or NaN/infinite samples.
    """
    x = np.asarray(samples)
    if x.dtype.kind not in "fiu":
        raise BadSamples(f"{where}: samples must be numbers (int or float), got dtype {x.dtype}")
    if x.ndim == 1 and x.dtype.kind == "f":
        y1 = x.astype(np.float64)                  # the common case (a mono float block): one copy
        if not np.isfinite(y1).all():
            bad = np.flatnonzero(~np.isfinite(y1))
            raise BadSamples(f"{where}: {len(bad)} sample(s) are NaN or infinite (first at index {bad[0]}); "
                             "repair or trim the recording")
        return y1
    if x.ndim == 2:
        pass
    elif x.ndim == 1:
        x = x[:, None]
    elif x.ndim == 0:
        x = x.reshape(1, 1)
    else:
        raise BadSamples(f"{where}: samples must be 1-D or (n, channels), got shape {x.shape}")
    if x.dtype.kind == "i":
        scale = float(2 ** (8 * x.dtype.itemsize - 1))
        y = x.astype(np.float64) / scale
    elif x.dtype.kind == "u":
        half = float(2 ** (8 * x.dtype.itemsize - 1))
        y = (x.astype(np.float64) - half) / half
    else:
        y = x.astype(np.float64)
        if not np.all(np.isfinite(y)):
            bad = np.flatnonzero(~np.all(np.isfinite(y), axis=1))
            raise BadSamples(f"{where}: {len(bad)} sample(s) are NaN or infinite (first at index {bad[0]}); "
                             "repair or trim the recording")
    if y.shape[1] == 1:
        return y[:, 0].copy()
    return y.mean(axis=1)


# ---------------------------------------------------------------------------
# analysis plan for one ceiling


@dataclass(frozen=True)
class _Plan:
    voice: str
    ceiling_hz: float
    rate_hz: int
    order: int
    hop: int
    n: int
    n_pitch: int
    ext: int          # pitch window samples beyond the formant window on each side
    coef: float
    taper: np.ndarray = field(repr=False)
    ref_hz: np.ndarray = field(repr=False)
    min_hz: float = 90.0
    tau_min: int = 2          # YIN lag range (samples) and integration window
    tau_max: int = 3
    yin_w: int = 1
    nfft: int = 1024          # DAP's harmonic spectrum
    wspec: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    harmonics_per_parameter: float = 1.4   # DAP order limit, see DAP_HARMONICS_PER_PARAMETER
    voice_ceiling_hz: float = 0.0          # the ceiling before an input rate capped it (0: ceiling_hz)

    @property
    def max_hz(self) -> np.ndarray:
        """Highest plausible F1, F2, F3 (Hz): 0.25, 0.55 and 0.8 of the voice's ceiling.

        Above every Peterson & Barney (1952) group mean (from memory; e.g.
        women's /i/ F2 2790 Hz < 0.55 x 5500 Hz), so only spurious readings
        are ruled out. The voice's ceiling is the one before a low input
        rate capped it: a man's /i/ (F2 2290 Hz) on 8 kHz telephone audio
        (ceiling 4000 Hz, 0.55 x 4000 = 2200 Hz) was otherwise never read.
        """
        return np.array([0.25, 0.55, 0.8]) * max(self.ceiling_hz, self.voice_ceiling_hz)

    @property
    def need_after(self) -> int:
        """Samples needed past a frame's start: window plus pitch extension."""
        return self.n + self.ext


def _make_plan(s: AnalysisSettings, voice: str, input_rate: int) -> tuple[_Plan, list[str]]:
    warns: list[str] = []
    nominal = NOMINAL_CEILING_HZ[voice]
    ceiling = float(s.ceiling_hz) if s.ceiling_hz is not None else nominal
    rate = int(round(2 * ceiling))
    voice_ceiling = ceiling
    if rate > input_rate:
        rate = input_rate
        capped = rate / 2.0
        warns.append(f"input rate {input_rate} Hz limits the formant ceiling to {capped:g} Hz "
                     f"(the {voice.replace('_', ' ')} voice wants {ceiling:g} Hz); high formants may be missed")
        ceiling = capped
    ref = np.array(REFERENCE_HZ[voice])
    if s.ceiling_hz is not None:
        ref = ref * (ceiling / nominal)
    n_form = max(3, int(round(FORMANTS_BELOW_CEILING * ceiling / nominal)))
    order = 2 * n_form + 2 * SOURCE_POLE_PAIRS[voice]
    hop = max(1, int(round(s.hop_s * rate)))
    n = max(order + 2, int(round(s.window_s * rate)))
    f0_max = min(s.f0_max_hz, rate / 4.0)
    n_pitch = yin_frame_length(rate_hz=rate, f0_min_hz=s.f0_min_hz, f0_max_hz=f0_max)
    if (n_pitch - n) % 2:
        n_pitch += 1
    ext = max(0, (n_pitch - n) // 2)
    n_pitch = n + 2 * ext
    _, tau_min, tau_max = _lags(rate, s.f0_min_hz, f0_max)
    taper = framing.taper(s.taper, n)
    nfft = max(_DAP_NFFT, 1 << int(np.ceil(np.log2(n))))
    plan = _Plan(voice=voice, ceiling_hz=ceiling, rate_hz=rate, order=order, hop=hop, n=n, n_pitch=n_pitch,
                 ext=ext, coef=framing.pre_emphasis_coefficient(s.pre_emphasis_hz, rate),
                 taper=taper, ref_hz=ref, tau_min=tau_min, tau_max=tau_max, yin_w=n_pitch - tau_max - 1,
                 nfft=nfft, wspec=_window_power(taper, nfft),
                 harmonics_per_parameter=DAP_HARMONICS_PER_PARAMETER[voice], voice_ceiling_hz=voice_ceiling)
    return plan, warns


def _pitch(rows: np.ndarray, plan: _Plan, s: AnalysisSettings) -> tuple[np.ndarray, np.ndarray]:
    """YIN F0 and aperiodicity (de Cheveigné & Kawahara 2002) over the plan's F0 range.

    No separate octave check: YIN's dip rule (``skip_factor``, see
    :func:`~livevowel.dsp.pitch.yin`) already skips the early dip that a
    strong second harmonic makes (F1 near 2 F0). An octave-down test that
    halved F0 when the CMND at twice the lag was below half the chosen dip
    used to follow here; on jittered high voices it fired on true periods
    (the CMND at the period is only 0.03-0.08 there, and at twice the period
    it is as often lower as higher): measured on the Peterson & Barney (1952)
    women's vowels (from memory) from the project synthesiser at F0 350 and
    400 Hz, 26 % and 43 % of voiced frames got half the F0 (YIN alone: 2 % and
    0.3 %), and DAP then fitted a wrong harmonic grid.
    """
    f0_max = min(s.f0_max_hz, plan.rate_hz / 4.0)
    return yin(rows, rate_hz=plan.rate_hz, f0_min_hz=s.f0_min_hz, f0_max_hz=f0_max,
               threshold=s.yin_threshold, fallback=True, skip_factor=YIN_SKIP_FACTOR, skip_margin=s.yin_skip_margin)


def relative_level(level_db: np.ndarray, s: AnalysisSettings, peak_db: float | None) -> tuple[np.ndarray, float | None]:
    """Levels as the voicing gate sees them: frames far below the recent peak count as silent.

    A peak follower (instant rise, fall ``voicing_peak_decay_db_per_s``)
    tracks the loudest recent frame; a frame more than
    ``voicing_relative_db`` below it is passed to the gate as -200 dB, so a
    formant filter still ringing after the voice stopped, or room noise
    between words, is not taken as voicing. Sequential (causal) and the same
    recursion in both paths. Returns the gate levels and the final peak.
    """
    lv = np.asarray(level_db, dtype=np.float64)
    out = lv.copy()
    decay = s.voicing_peak_decay_db_per_s * s.hop_s
    for i in range(len(lv)):
        peak_db = lv[i] if peak_db is None else max(float(lv[i]), peak_db - decay)
        if lv[i] < peak_db - s.voicing_relative_db:
            out[i] = -200.0
    return out, peak_db


def _features(plan: _Plan, s: AnalysisSettings, x: np.ndarray, base: int, ks: np.ndarray, *,
              pitch: bool, formants: bool = True, f0_hz: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """Measures of frames ``ks`` from samples ``x`` whose first element is sample ``base``.

    ``f0_hz`` (without ``pitch``): F0 of these frames measured by another
    chain (the primary one of an auto voice), used for DAP instead of running
    YIN again at this plan's rate.

    Samples outside ``x`` read as zero. Returns level_db, f0_hz, aper (when
    ``pitch``), cand_f, cand_b (n, order // 2) and evidence (n,; see
    :func:`_formant_rows`) when ``formants``.
    """
    ks = np.asarray(ks, dtype=np.int64)
    n_k = len(ks)
    out: dict[str, np.ndarray] = {}
    if n_k == 0:
        k2 = plan.order // 2
        out.update(level_db=np.zeros(0), f0_hz=np.zeros(0), aper=np.zeros(0),
                   cand_f=np.zeros((0, k2)), cand_b=np.zeros((0, k2)), evidence=np.zeros(0))
        return out
    starts = ks * plan.hop
    lo = int(starts[0]) - plan.ext - 1
    hi = int(starts[-1]) + plan.n + plan.ext
    seg = np.zeros(hi - lo)
    a, b = max(lo, base), min(hi, base + len(x))
    if b > a:
        seg[a - lo: b - lo] = x[a - base: b - base]
    if n_k == 1:
        return _features_one(plan, s, seg, pitch=pitch, formants=formants, f0_hz=f0_hz)
    view = np.lib.stride_tricks.sliding_window_view(seg, plan.n_pitch + 1)
    rows = view[starts - lo - plan.ext - 1]               # (n_k, n_pitch + 1), row start = frame start - ext - 1
    # the per-frame steps run in compiled loops over the rows (no GIL held, so
    # threads share the work), calling the kernels of the one-frame path
    if pitch:
        level, f0p, aper = np.empty(n_k), np.empty(n_k), np.empty(n_k)
        _level_pitch_rows_kernel(rows, plan.ext, plan.n, float(plan.rate_hz), plan.tau_min, plan.tau_max,
                                 plan.yin_w, float(s.yin_threshold), YIN_SKIP_FACTOR, float(s.yin_skip_margin),
                                 _quiet_db(s), level, f0p, aper)
        out["level_db"], out["f0_hz"], out["aper"] = level, f0p, aper
    if not formants:
        return out
    if "f0_hz" in out:
        f0 = out["f0_hz"]
    elif f0_hz is not None:
        f0 = np.asarray(f0_hz, dtype=np.float64)
    elif s.method in ("dap", "hybrid"):
        f0, _ = _pitch(rows[:, 1:], plan, s)
    else:
        f0 = np.full(n_k, np.nan)              # not read: no harmonics are fitted
    out["cand_f"], out["cand_b"], out["evidence"] = _formant_rows(plan, s, rows, f0)
    return out


def _formant_rows(plan: _Plan, s: AnalysisSettings, rows: np.ndarray,
                  f0: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Formant candidates (n, order // 2) and harmonic evidence (n,) of frames laid out as
    :func:`_features`' ``rows``, F0 ``f0`` (Hz, NaN: none); the batch and the one-frame paths.

    DAP (or hybrid) frames with an F0 get DAP of their harmonics, then the
    closed-phase F1 check; the others autocorrelation LPC (other methods:
    :func:`~livevowel.dsp.lpc.lpc`). Evidence is 1 where no harmonics were fitted.
    """
    n_k = rows.shape[0]
    max_hz = plan.rate_hz / 2.0 - plan.min_hz
    k2 = plan.order // 2
    evidence = np.ones(n_k)
    if s.method not in ("dap", "hybrid", "autocorrelation"):
        cond = framing.condition_frames(rows[:, plan.ext: plan.ext + plan.n + 1], coef=plan.coef, window=plan.taper)
        coeffs = lpc(cond, order=plan.order, method=s.method, window=None, rate_hz=plan.rate_hz)
        cf, cb = formant_candidates(coeffs, rate_hz=plan.rate_hz, min_hz=plan.min_hz,
                                    max_hz=max_hz, max_bandwidth_hz=s.max_bandwidth_hz)
        return cf, cb, evidence
    f0 = np.require(f0, np.float64, "CW")
    # frames without F0 (and every frame of method "autocorrelation") get autocorrelation LPC
    use = (np.isfinite(f0) & (f0 >= (s.dap_above_hz if s.method == "hybrid" else 0.0))
           if s.method != "autocorrelation" else np.zeros(n_k, dtype=np.bool_))
    sel = np.flatnonzero(use)
    cond = np.empty((n_k, plan.n))
    _condition_rows_kernel(rows, plan.ext, plan.n, plan.coef, plan.taper, cond)
    spec = np.fft.rfft(cond[sel], plan.nfft, axis=1) if len(sel) else np.zeros((0, plan.nfft // 2 + 1), complex)
    coeffs = np.empty((n_k, plan.order + 1))
    cf, cb = np.full((n_k, k2), np.nan), np.full((n_k, k2), np.nan)
    done = np.ones(n_k, dtype=np.bool_)
    _formant_rows_kernel(cond, spec, sel, f0, plan.rate_hz / plan.nfft, float(max_hz), HARMONIC_SEARCH,
                         plan.wspec, plan.order, float(plan.rate_hz), int(s.dap_iterations),
                         float(plan.harmonics_per_parameter), float(plan.min_hz), _max_bw(s), coeffs, cf, cb, done,
                         evidence)
    candidates_fallback(coeffs, done, cf, cb, rate_hz=plan.rate_hz, min_hz=plan.min_hz, max_hz=max_hz,
                        max_bandwidth_hz=s.max_bandwidth_hz)
    if s.closed_phase_below > 0 and len(sel):
        _closed_phase_rows_kernel(rows, plan.ext, plan.n, f0, use, plan.coef, plan.taper, float(plan.rate_hz),
                                  plan.order, float(s.closed_phase_below), float(CLOSED_PHASE_CLEAN_ERROR),
                                  float(plan.min_hz), float(max_hz), _max_bw(s), float(CLOSED_PHASE_UPPER),
                                  float(CLOSED_PHASE_ON_HARMONIC), float(CLOSED_PHASE_DIFFER),
                                  float(CLOSED_PHASE_AGREE), float(CLOSED_PHASE_EXACT_ERROR), cf, cb)
    return cf, cb, evidence


def _features_one(plan: _Plan, s: AnalysisSettings, seg: np.ndarray, *, pitch: bool, formants: bool,
                  f0_hz: np.ndarray | None) -> dict[str, np.ndarray]:
    """:func:`_features` of one frame (the streaming case): level and F0 in one compiled
    call, then :func:`_formant_rows` of the one row. ``seg`` is the frame's row
    (``n_pitch + 1`` samples, starting one sample before the pitch window)."""
    out: dict[str, np.ndarray] = {}
    need_f0 = s.method in ("dap", "hybrid") and formants
    f0 = math.nan
    if pitch or (need_f0 and f0_hz is None):
        dp = np.empty(plan.tau_max + 2)
        sf = YIN_SKIP_FACTOR
        level, f0, ap = _level_pitch_kernel(seg, plan.ext, plan.n, float(plan.rate_hz), plan.tau_min, plan.tau_max,
                                            plan.yin_w, float(s.yin_threshold), sf, float(s.yin_skip_margin), dp,
                                            _quiet_db(s))
        if pitch:
            out["level_db"] = np.array([level])
            out["f0_hz"] = np.array([f0])
            out["aper"] = np.array([ap])
    if not formants:
        return out
    if f0_hz is not None and not pitch:
        f0 = float(np.asarray(f0_hz, dtype=np.float64).reshape(-1)[0])
    out["cand_f"], out["cand_b"], out["evidence"] = _formant_rows(plan, s, seg[np.newaxis, :], np.array([f0]))
    return out


#: Warning of an input whose every frame is digital silence (both paths).
SILENCE_WARNING = "the input is silent (digital silence throughout); every frame is unvoiced"


def _clip_warning(share: float) -> str:
    """Warning of an input with ``share`` (0..1) of its samples at full scale (both paths)."""
    return (f"{100 * share:.2f} % of samples are at full scale (clipping); formants near clipped stretches "
            "are less reliable; record with lower input gain")


def _quiet_db(s: AnalysisSettings) -> float:
    """Level (dBFS) below which a frame is unvoiced on level alone (both paths' voicing rule)."""
    return float(s.voicing_floor_db - _GATE_MARGIN_DB)


def _max_bw(s: AnalysisSettings) -> float:
    return math.inf if s.max_bandwidth_hz is None else float(s.max_bandwidth_hz)


@jit
def _level_pitch_rows_kernel(rows, ext, n, rate, tau_min, tau_max, w, threshold, skip_factor, skip_margin, quiet_db,
                             level, f0, aper):  # pragma: no cover - compiled
    """:func:`_level_pitch_kernel` for every row (the rows laid out as the one-frame path's ``seg``)."""
    dp = np.empty(tau_max + 2)
    for i in range(rows.shape[0]):
        level[i], f0[i], aper[i] = _level_pitch_kernel(rows[i], ext, n, rate, tau_min, tau_max, w, threshold,
                                                       skip_factor, skip_margin, dp, quiet_db)


@jit
def _condition_rows_kernel(rows, ext, n, coef, taper, out):  # pragma: no cover - compiled
    """:func:`_condition_kernel` for every row into ``out`` (n_rows, n)."""
    for i in range(rows.shape[0]):
        _condition_kernel(rows[i], ext, n, coef, taper, out[i])


@jit
def _formant_rows_kernel(cond, spec, sel, f0, df, max_hz, search, wspec, p, rate, iterations, hpp, min_hz, max_bw,
                         coeffs, cand_f, cand_b, done, evidence):  # pragma: no cover - compiled
    """Inverse filter and formant candidates of every conditioned row ``cond[i]``, as the one-frame path.

    Rows listed in ``sel`` (ascending; ``spec[q]`` is the spectrum of row
    ``sel[q]``) get DAP of their harmonics at F0 ``f0[i]``, the others
    autocorrelation LPC. ``coeffs[i]`` receives the filter; ``done[i]`` is
    False where the roots did not converge (the caller falls back to
    eigenvalues); ``evidence[i]`` the harmonic evidence of a DAP row
    (:func:`~livevowel.dsp.dap.harmonic_evidence`; other rows are left as given)."""
    z = np.empty(p, dtype=np.complex128)
    power = np.empty(spec.shape[1])
    q = 0
    for i in range(cond.shape[0]):
        a = coeffs[i]
        if q < sel.shape[0] and sel[q] == i:
            m = int(math.floor(max_hz / f0[i])) if f0[i] > 0 else 0
            if m >= 1:
                for j in range(power.shape[0]):
                    v = spec[q, j]
                    power[j] = v.real * v.real + v.imag * v.imag
                evidence[i] = _harmonic_dap_kernel(power, f0[i], df, m, search, True, wspec, p, rate, iterations,
                                                   hpp, a)
            else:
                # no harmonic below the top: DAP of no harmonics is A(z) = 1
                a[:] = 0.0
                a[0] = 1.0
                evidence[i] = 0.0
            q += 1
        else:
            _autocorrelation_lpc_kernel(cond[i], p, a)
        done[i] = _candidates_kernel(a, rate, min_hz, max_hz, max_bw, cand_f[i], cand_b[i], z)


@jit
def _closed_phase_rows_kernel(rows, ext, n, f0, use, coef, taper, rate, p, below, clean, min_hz, max_hz, max_bw,
                              upper, harm, differ, agree, exact, cand_f, cand_b):  # pragma: no cover - compiled
    """:func:`_closed_phase_f1_kernel` for every row ``i`` with ``use[i]``, on the frame's ``n + 1``
    samples from ``ext`` (one call for a batch)."""
    for i in range(rows.shape[0]):
        if use[i]:
            _closed_phase_f1_kernel(rows[i, ext: ext + n + 1], coef, taper, f0[i], rate, p, below, clean, min_hz,
                                    max_hz, max_bw, upper, harm, differ, agree, exact, cand_f[i], cand_b[i])


@jit
def _closed_phase_f1_kernel(row, coef, taper, f0, rate, p, below, clean, min_hz, max_hz, max_bw,
                            upper, harm, differ, agree, exact, cand_f, cand_b):  # pragma: no cover - compiled
    """Closed-phase F1 for one frame's DAP candidates (``cand_f, cand_b``, ascending, NaN-padded; in place).

    Where the lowest candidate lies below ``below x F0``: closed-phase
    covariance LPC of order ``p`` (:func:`livevowel.dsp.closedphase.closed_phase_lpc`)
    on the frame's ``n + 1`` raw samples ``row`` (mean removed and
    pre-emphasised as in :func:`_condition_kernel`, not tapered); its lowest
    resonance replaces that candidate (frequency and bandwidth) when it lies
    in ``CLOSED_PHASE_ABOVE x F0 .. below x F0`` and is below it or the fit's
    normalised error is below ``clean``. Where the lowest candidate lies
    below ``upper x F0`` instead, within ``harm x F0`` of a harmonic: the fit's
    candidates replace all of these when its error is below ``clean``, its
    lowest resonance lies in ``CLOSED_PHASE_ABOVE x F0 .. upper x F0`` and
    differs from the lowest candidate by more than ``differ`` of itself
    (see ``CLOSED_PHASE_UPPER``). Where it lies below ``upper x F0`` between
    harmonics: the fit's lowest resonance replaces the lowest candidate alone
    when its error is below ``exact``, it lies in that range, differs by
    more than ``differ``, lies below the second candidate, and the fit's
    second and third resonances lie within ``agree`` of the second and
    (where there is one) third candidate; ``agree`` 0 turns this case off
    (see ``CLOSED_PHASE_AGREE``). Returns whether it replaced any.
    """
    if not (math.isfinite(f0) and f0 > 0):
        return False
    low = cand_f[0] < below * f0
    q = cand_f[0] / f0
    on_h = q < upper and abs(q - round(q)) <= harm
    between = not low and not on_h and q < upper and agree > 0
    if not (low or on_h or between):
        return False
    n = row.shape[0] - 1
    y = np.empty(n)
    _emphasis_kernel(row, 0, n, coef, y)
    a = np.empty(p + 1)
    err = _closed_phase_kernel(y, taper, f0, rate, p, CLOSED_FRACTION, MAX_SHIFT_FRACTION, a)
    if not err < (math.inf if low else exact if between else clean):
        return False                    # (checked before the roots are found)
    k = cand_f.shape[0]
    fc = np.full(max(k, p // 2), np.nan)
    bc = np.full(max(k, p // 2), np.nan)
    z = np.empty(p, dtype=np.complex128)
    if not _candidates_kernel(a, rate, min_hz, max_hz, max_bw, fc, bc, z):
        return False
    f = fc[0]
    if not low:
        # DAP's lowest candidate above below x F0 (and under upper x F0): only a fit exact to the
        # error checked above whose F1 differs from DAP's may change DAP's candidates ...
        if not (CLOSED_PHASE_ABOVE * f0 <= f < upper * f0 and abs(f - cand_f[0]) > differ * f):
            return False
        if on_h:        # ... on a harmonic all of them (F1 and F2 may have merged there)
            for j in range(k):
                cand_f[j] = fc[j]
                cand_b[j] = bc[j]
            return True
        # between harmonics DAP has not merged F1 and F2: its F2 stands, and a fit
        # that reads F2 elsewhere is not trusted for F1 either
        if not (k > 1 and f < cand_f[1] and abs(fc[1] - cand_f[1]) <= agree * cand_f[1]):
            return False
        if k > 2 and math.isfinite(cand_f[2]) and not abs(fc[2] - cand_f[2]) <= agree * cand_f[2]:
            return False
    elif not (CLOSED_PHASE_ABOVE * f0 <= f < below * f0 and (f < cand_f[0] or err < clean)):
        return False
    cand_f[0] = f
    cand_b[0] = bc[0]
    i = 0
    while i + 1 < k and cand_f[i + 1] < cand_f[i]:      # keep ascending (NaN compares False)
        cand_f[i], cand_f[i + 1] = cand_f[i + 1], cand_f[i]
        cand_b[i], cand_b[i + 1] = cand_b[i + 1], cand_b[i]
        i += 1
    return True




@jit
def _level_pitch_kernel(seg, ext, n, rate, tau_min, tau_max, w, threshold, skip_factor, skip_margin, dp,
                        quiet_db):  # pragma: no cover
    """Level (dBFS) of the formant window, then YIN (fallback on) over the pitch window, as :func:`_pitch`.

    Below ``quiet_db`` (the level at which voicing turns off whatever the
    periodicity) YIN is skipped: F0 and aperiodicity are NaN, and the voicing
    decision is the one YIN's values would have given."""
    ms = 0.0
    for j in range(n):
        v = seg[ext + 1 + j]
        ms += v * v
    ms /= n
    level = 10.0 * math.log10(ms) if ms > 0 else -np.inf
    level = max(level, _LEVEL_FLOOR_DB)
    if level < quiet_db:
        return level, np.nan, np.nan
    f, a = _yin_kernel(seg[1:], rate, tau_min, tau_max, w, threshold, True, skip_factor, skip_margin, dp)
    return level, f, a


@jit
def _condition_kernel(seg, ext, n, coef, taper, out):  # pragma: no cover - compiled
    """:func:`framing.condition_frames` of the frame in ``seg`` (its ``n + 1`` samples from ``ext``)."""
    _emphasis_kernel(seg, ext, n, coef, out)
    for j in range(n):
        out[j] *= taper[j]


@jit
def _emphasis_kernel(seg, ext, n, coef, out):  # pragma: no cover - compiled
    """The frame in ``seg`` (its ``n + 1`` samples from ``ext``) with its mean removed and
    pre-emphasised, untapered, into ``out`` (n)."""
    mean = 0.0
    for j in range(n + 1):
        mean += seg[ext + j]
    mean /= n + 1
    for j in range(n):
        out[j] = (seg[ext + 1 + j] - mean) - coef * (seg[ext + j] - mean)


def _confidence(f: np.ndarray, b: np.ndarray, raw: np.ndarray, aper: np.ndarray, level_db: np.ndarray,
                floor_db: float, evidence: np.ndarray, f0: np.ndarray) -> np.ndarray:
    """0..1 per frame from bandwidths, stability of the track, periodicity and level; times the
    frame's harmonic evidence (:func:`~livevowel.dsp.dap.harmonic_evidence`, 1 for LPC frames)
    where F1 or F2 lies on a harmonic of ``f0`` (see ``ON_HARMONIC``)."""
    with np.errstate(invalid="ignore", divide="ignore", all="ignore"):
        bw = np.where(np.isfinite(b[:, :2]), b[:, :2], 1000.0)
        c_bw = np.exp(-np.mean(bw, axis=1) / 400.0)
        dev = np.abs(np.log(f[:, :2] / raw[:, :2]))
        dev = np.where(np.isfinite(dev), dev, 1.0)
        c_stab = np.exp(-np.sum(dev, axis=1) / 0.1)
        c_ap = np.clip(1.0 - np.nan_to_num(aper, nan=1.0) / 0.45, 0.0, 1.0)
        c_lv = np.clip((level_db - floor_db) / 20.0, 0.0, 1.0)
        c_f3 = np.where(np.isfinite(f[:, 2]), 1.0, 0.8)
        q = f[:, :2] / np.asarray(f0, dtype=np.float64)[:, None]
        k = np.round(q)
        on = np.any((k >= 1) & (np.abs(q - k) < ON_HARMONIC), axis=1)
        c = np.sqrt(c_bw * c_stab) * c_ap * c_lv * c_f3 * np.where(on, evidence, 1.0)
    ok = np.isfinite(f[:, 0]) & np.isfinite(f[:, 1])
    return np.where(ok, np.clip(c, 0.0, 1.0), 0.0)


def _confidence_one(f: np.ndarray, b: np.ndarray, raw: np.ndarray, aper: float, level_db: float,
                    floor_db: float, evidence: float, f0: float) -> float:
    """:func:`_confidence` of one frame on Python floats (the streaming case)."""
    f1, f2, f3 = float(f[0]), float(f[1]), float(f[2])
    if not (math.isfinite(f1) and math.isfinite(f2)):
        return 0.0
    b1, b2 = float(b[0]), float(b[1])
    b1 = b1 if math.isfinite(b1) else 1000.0
    b2 = b2 if math.isfinite(b2) else 1000.0
    c_bw = math.exp(-((b1 + b2) / 2.0) / 400.0)
    dev = 0.0
    for fi, ri in ((f1, float(raw[0])), (f2, float(raw[1]))):
        q = fi / ri if ri != 0 else math.inf
        d = abs(math.log(q)) if (math.isfinite(q) and q > 0) else math.nan
        dev += d if math.isfinite(d) else 1.0
    c_stab = math.exp(-dev / 0.1)
    ap = 1.0 if math.isnan(aper) else float(aper)
    c_ap = min(max(1.0 - ap / 0.45, 0.0), 1.0)
    c_lv = min(max((float(level_db) - floor_db) / 20.0, 0.0), 1.0)
    c_f3 = 1.0 if math.isfinite(f3) else 0.8
    on = False
    if math.isfinite(f0) and f0 > 0:
        for fj in (f1, f2):
            q = fj / f0
            k = round(q)
            on = on or (k >= 1 and abs(q - k) < ON_HARMONIC)
    c = math.sqrt(c_bw * c_stab) * c_ap * c_lv * c_f3 * (float(evidence) if on else 1.0)
    return min(max(c, 0.0), 1.0) if math.isfinite(c) else 0.0


# ---------------------------------------------------------------------------
# offline path


def _prepare(samples: Any, rate_hz: Any, settings: AnalysisSettings | None) -> tuple[np.ndarray, int, AnalysisSettings]:
    rate = _check_rate(rate_hz)
    s = settings if settings is not None else AnalysisSettings()
    if not isinstance(s, AnalysisSettings):
        raise TypeError(f"settings must be an AnalysisSettings, got {type(s).__name__}")
    return to_mono_float(samples), rate, s


def _thread_count(s: AnalysisSettings, n_frames: int) -> int:
    import os

    want = int(s.threads) if s.threads else min(MAX_THREADS, os.cpu_count() or 1)
    return max(1, min(want, n_frames // MIN_FRAMES_PER_THREAD))


def _features_threads(plan: _Plan, s: AnalysisSettings, x: np.ndarray, base: int, ks: np.ndarray, *,
                      threads: int, f0_hz: np.ndarray | None = None, **kw: Any) -> dict[str, np.ndarray]:
    """:func:`_features` of ``ks`` in parts of at most ``FEATURE_CHUNK_FRAMES``
    frames, ``threads`` parts at a time (offline analysis).

    Every frame is measured on its own (no state passes between frames in a
    batch), so the parts joined are the whole batch's result, bit for bit.
    The parts bound the working memory (a part's rows and spectra, about
    30 MB) whatever the file's length."""
    ks = np.asarray(ks, dtype=np.int64)
    n_parts = -(-len(ks) // FEATURE_CHUNK_FRAMES)
    n_parts = max(threads, -(-n_parts // threads) * threads)    # a multiple of the threads: none idles at the end
    if len(ks) < 2 * MIN_FRAMES_PER_THREAD:
        n_parts = 1
    if n_parts <= 1:
        return _features(plan, s, x, base, ks, f0_hz=f0_hz, **kw)
    cuts = np.linspace(0, len(ks), n_parts + 1).round().astype(np.int64)
    parts = [(ks[a:b], None if f0_hz is None else np.asarray(f0_hz)[a:b]) for a, b in zip(cuts[:-1], cuts[1:])]

    def run(part: tuple) -> dict[str, np.ndarray]:
        return _features(plan, s, x, base, part[0], f0_hz=part[1], **kw)

    if threads <= 1:
        got = [run(p) for p in parts]
    else:
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max_workers=threads) as pool:
            got = list(pool.map(run, parts))
    return {k: np.concatenate([g[k] for g in got]) for k in got[0]}


def analyze(samples: Any, rate_hz: float, *, settings: AnalysisSettings | None = None,
            causal: bool = False) -> AnalysisResult:
    """Analyse a whole signal.

    Parameters
    ----------
    samples : array, shape (n,) or (n, channels)
        Int or float samples (float in full-scale units, +-1).
    rate_hz : float
        Sampling rate in Hz, a whole number in 8000..192000.
    settings : AnalysisSettings, keyword-only
        Default ``AnalysisSettings()``.
    causal : bool
        False: batch analysis with Viterbi tracking over the whole file.
        True: exactly what :class:`StreamingAnalyzer` produces (frame-by-frame
        tracking, one hop of lookahead, display smoothing).

    Returns
    -------
    AnalysisResult

    Raises
    ------
    BadSamples
        NaN/infinite samples, unusable dtype or shape, rate out of range.
    """
    x, rate, s = _prepare(samples, rate_hz, settings)
    if causal:
        sa = StreamingAnalyzer(rate, settings=s)
        track = FrameTrack.concat([sa.process(x), sa.flush()])
        return AnalysisResult(frames=track, analysis_rate_hz=float(sa.analysis_rate_hz), ceiling_hz=sa.ceiling_hz,
                              voice=sa.voice, order=sa.order, method=s.method, input_rate_hz=float(rate),
                              warnings=list(sa.warnings))
    warns: list[str] = []
    voice0 = s.voice if s.voice != "auto" else _AUTO_DEFAULT
    plan, w0 = _make_plan(s, voice0, rate)
    warns += w0
    xa = resample(x, in_rate_hz=rate, out_rate_hz=plan.rate_hz)
    n_frames = framing.frame_count(len(xa), frame_len=plan.n, hop=plan.hop)
    if n_frames == 0:
        warns.append(f"input of {len(x)} samples is shorter than one {1e3 * s.window_s:g} ms window; no frames")
    ks = np.arange(n_frames)
    threads = _thread_count(s, n_frames)
    # first pass: F0, level and voicing (the adult_female plan for auto); formant
    # candidates follow for voiced frames only (the tracker reads no others)
    feat = _features_threads(plan, s, xa, 0, ks, threads=threads, pitch=True, formants=False)
    gate_level, _ = relative_level(feat["level_db"], s, None)
    voiced, _ = voicing_hysteresis(feat["aper"], gate_level, on_threshold=s.voicing_on,
                                   off_threshold=s.voicing_off, floor_db=s.voicing_floor_db,
                                   margin_db=_GATE_MARGIN_DB)
    voiced = _drop_ringing(voiced, feat["f0_hz"], feat["level_db"])
    if n_frames and np.all(feat["level_db"] <= -119.0):
        warns.append(SILENCE_WARNING)
    vidx = np.flatnonzero(voiced)
    k2 = plan.order // 2
    cand_f = np.full((n_frames, k2), np.nan)
    cand_b = np.full((n_frames, k2), np.nan)
    evidence = np.ones(n_frames)

    def measure(pl: _Plan, xx: np.ndarray, frames: np.ndarray, cf: np.ndarray, cb: np.ndarray,
                ev: np.ndarray) -> None:
        if len(frames):
            got = _features_threads(pl, s, xx, 0, frames, threads=threads, pitch=False, f0_hz=feat["f0_hz"][frames])
            cf[frames], cb[frames], ev[frames] = got["cand_f"], got["cand_b"], got["evidence"]

    voice = voice0
    fplan = plan
    if s.voice == "auto":
        # decide from the whole file's voiced frames (at most _AUTO_OFFLINE_FRAMES, evenly spaced)
        use = vidx[np.isfinite(feat["f0_hz"][vidx])]
        if len(use) > _AUTO_OFFLINE_FRAMES:
            use = use[np.linspace(0, len(use) - 1, _AUTO_OFFLINE_FRAMES).round().astype(np.int64)]
        measure(plan, xa, use, cand_f, cand_b, evidence)
        voice = voice_from_frames(feat["f0_hz"][use], cand_f[use], default=_AUTO_DEFAULT)
        if voice == voice0:
            measure(plan, xa, np.setdiff1d(vidx, use, assume_unique=True), cand_f, cand_b, evidence)
        else:
            fplan, w = _make_plan(s, voice, rate)
            # the provisional plan's notes (its ceiling) no longer apply
            warns = [m for m in warns if m not in w0] + [m for m in w if m not in warns]
            xb = resample(x, in_rate_hz=rate, out_rate_hz=fplan.rate_hz)
            n2 = framing.frame_count(len(xb), frame_len=fplan.n, hop=fplan.hop)
            k2 = fplan.order // 2
            cand_f = np.full((n_frames, k2), np.nan)
            cand_b = np.full((n_frames, k2), np.nan)
            evidence = np.ones(n_frames)
            measure(fplan, xb, vidx[vidx < n2], cand_f, cand_b, evidence)
    else:
        measure(plan, xa, vidx, cand_f, cand_b, evidence)
    feat["cand_f"], feat["cand_b"], feat["evidence"] = cand_f, cand_b, evidence
    times = framing.frame_times(n_frames, frame_len=plan.n, hop=plan.hop, rate_hz=plan.rate_hz)
    track = _offline_track(feat, voiced, times, fplan, s)
    # clipping note
    if len(x) and np.max(np.abs(x)) >= 0.999:
        frac = float(np.mean(np.abs(x) >= 0.999))
        if frac > 1e-4:
            warns.append(_clip_warning(frac))
    return AnalysisResult(frames=track, analysis_rate_hz=float(fplan.rate_hz), ceiling_hz=fplan.ceiling_hz,
                          voice=voice, order=fplan.order, method=s.method, input_rate_hz=float(rate),
                          warnings=warns)


def _offline_track(feat: dict, voiced: np.ndarray, times: np.ndarray, plan: _Plan,
                   s: AnalysisSettings) -> FrameTrack:
    n = len(times)
    costs = s.costs()
    k = feat["cand_f"].shape[1]
    states = state_table(k)
    f0 = np.where(voiced, feat["f0_hz"], np.nan)
    idx = np.flatnonzero(voiced)
    raw_f = np.full((n, 3), np.nan)
    raw_b = np.full((n, 3), np.nan)
    hold_frames = int(math.floor(s.hold_s / (plan.hop / plan.rate_hz) + 1e-9))
    if len(idx):
        cost, sf, sb = local_costs(feat["cand_f"][idx], feat["cand_b"][idx], states=states, ref_hz=plan.ref_hz,
                                   f0_hz=f0[idx], costs=costs, max_hz=plan.max_hz)
        gaps = np.diff(idx) - 1
        seg_start = np.concatenate([[True], gaps > hold_frames])
        best = viterbi_segments(cost, sf, seg_start, costs)
        ok = best >= 0
        raw_f[idx[ok]] = sf[np.flatnonzero(ok), best[ok]]
        raw_b[idx[ok]] = sb[np.flatnonzero(ok), best[ok]]
    # median of five then Hanning of three along the track, within runs of measured frames
    sm = median5_hanning(raw_f)
    conf = _confidence(sm, raw_b, raw_f, feat["aper"], feat["level_db"], s.voicing_floor_db, feat["evidence"],
                       np.where(voiced, feat["f0_hz"], np.nan))
    out_f = sm.copy()
    out_b = raw_b.copy()
    # hold short gaps (unvoiced frames, or voiced ones with no formant reading),
    # as the causal path does
    have = np.isfinite(sm[:, 0])
    pos = np.arange(n)
    last = np.maximum.accumulate(np.where(have, pos, -1)) if n else pos   # last measured frame so far
    held = ~have & (last >= 0) & (pos - last <= hold_frames)
    out_f[held] = sm[last[held]]
    out_b[held] = raw_b[last[held]]
    conf = np.where(voiced, conf, 0.0)
    return FrameTrack(time_s=times, voiced=voiced, f0_hz=np.where(voiced, feat["f0_hz"], np.nan),
                      f1_hz=out_f[:, 0], f2_hz=out_f[:, 1], f3_hz=out_f[:, 2], b1_hz=out_b[:, 0],
                      b2_hz=out_b[:, 1], b3_hz=out_b[:, 2], level_db=feat["level_db"], confidence=conf)


# ---------------------------------------------------------------------------
# streaming path


class _ChainStream:
    """Resampler, sample buffer and per-frame measures for one analysis plan."""

    def __init__(self, plan: _Plan, input_rate: int, s: AnalysisSettings, *, pitch: bool) -> None:
        self.plan = plan
        self.s = s
        self.pitch = pitch
        self.formants = True     # False: F0 and level only (primary chain of a settled auto voice)
        self.idle = False        # True: keep samples from frame k on but measure nothing (unsettled auto voice)
        self.lazy = False        # True: frames measured on request with another chain's F0 (settled auto voice)
        self._raw: list[np.ndarray] = []   # idle: input blocks not resampled yet (done in batches)
        self._raw_n = 0
        self._raw_limit = max(1, input_rate // 20)
        self.rs = StreamResampler(input_rate, plan.rate_hz)
        self.buf = np.zeros(0)
        self.base = 0            # absolute analysis-rate index of buf[0]
        self.n_a = 0             # analysis samples received
        self.k = 0               # next frame to compute
        self.total: int | None = None

    def _append(self, y: np.ndarray) -> None:
        if len(y):
            self.buf = np.concatenate([self.buf, y])
            self.n_a += len(y)

    def _frames_ready(self) -> list[dict]:
        out = []
        p = self.plan
        while not (self.idle or self.lazy) and self.available(self.k):
            f = _features(p, self.s, self.buf, self.base, np.array([self.k]), pitch=self.pitch,
                          formants=self.formants)
            item = {key: v[0] for key, v in f.items()}
            item["k"] = self.k
            out.append(item)
            self.k += 1
        self._trim()
        return out

    def available(self, k: int) -> bool:
        """Whether frame k can be measured from the samples received so far."""
        p = self.plan
        start = k * p.hop
        if self.total is not None:
            return start + p.n <= self.total
        return start + p.need_after <= self.n_a

    def measure(self, k: int, f0_hz: float) -> dict:
        """Lazy mode: candidates of frame k (>= self.k, available) with F0 from elsewhere."""
        f = _features(self.plan, self.s, self.buf, self.base, np.array([k]), pitch=False,
                      f0_hz=np.array([f0_hz]))
        item = {key: v[0] for key, v in f.items()}
        item["k"] = k
        self.k = k + 1
        self._trim()
        return item

    def _trim(self) -> None:
        # drop samples no longer needed
        p = self.plan
        keep_from = self.k * p.hop - p.ext - 1
        if keep_from > self.base:
            cut = min(keep_from - self.base, len(self.buf))
            self.buf = self.buf[cut:]
            self.base += cut

    def push(self, x: np.ndarray) -> list[dict]:
        if self.idle:
            # nothing is measured yet: resample in batches of about 50 ms (the
            # resampler's output does not depend on how its input is split)
            self._raw.append(x)
            self._raw_n += len(x)
            if self._raw_n >= self._raw_limit:
                self.drain()
            return []
        self._append(self.rs.process(x))
        return self._frames_ready()

    def drain(self) -> None:
        """Resample the input held back while idle."""
        if self._raw:
            x = np.concatenate(self._raw) if len(self._raw) > 1 else self._raw[0]
            self._raw, self._raw_n = [], 0
            self._append(self.rs.process(x))
            self._trim()

    def finish(self) -> list[dict]:
        self.drain()
        self._append(self.rs.flush())
        self.total = self.n_a
        return self._frames_ready()


class StreamingAnalyzer:
    """Causal analysis of a stream of blocks (see the module notes).

    Parameters
    ----------
    input_rate_hz : float
        Sampling rate of the blocks, Hz (whole number, 8000..192000).
    settings : AnalysisSettings, keyword-only

    Attributes
    ----------
    delay_s : dict
        Algorithmic delay per stage in seconds: ``resampler`` (FIR delay),
        ``resampler_block`` (outputs are made in groups of 8), ``window``
        (half the longest window: a frame's time is its centre),
        ``lookahead`` (one hop, for the tracker and the median),
        ``smoother`` (small-signal lag of the one-pole stage; 0 for moves
        larger than ``smoother_jump``), ``total``.
    warnings : list of str
        Notes about the input (capped ceiling, silence, ...).
    voice, ceiling_hz, analysis_rate_hz, order
        Of the plan in use (for ``voice="auto"``, the settled one once settled).

    Notes
    -----
    Frames are measured one at a time with the same array shapes whatever
    the block size, so the output is identical for every block split.
    """

    def __init__(self, input_rate_hz: float, *, settings: AnalysisSettings | None = None) -> None:
        self.input_rate_hz = _check_rate(input_rate_hz)
        self.settings = s = settings if settings is not None else AnalysisSettings()
        if not isinstance(s, AnalysisSettings):
            raise TypeError(f"settings must be an AnalysisSettings, got {type(s).__name__}")
        self.warnings: list[str] = []
        self.auto = s.voice == "auto"
        voices = ["adult_female", "adult_male", "child"] if self.auto else [s.voice]
        self.plans: dict[str, _Plan] = {}
        for v in voices:
            plan, w = _make_plan(s, v, self.input_rate_hz)
            self.plans[v] = plan
            if v == voices[0]:
                self.warnings += w
        self.primary = voices[0]
        self.chains = {v: _ChainStream(self.plans[v], self.input_rate_hz, s, pitch=(v == self.primary))
                       for v in voices}
        # the other voices of an unsettled auto voice only keep their resampled
        # samples; the one chosen measures from the frame after the decision
        for v in voices[1:]:
            self.chains[v].idle = True
        self.active = self.primary
        self.settled = not self.auto
        self._pending: dict[str, dict[int, dict]] = {v: {} for v in voices}
        self._k = 0                         # next frame to assemble
        self._voiced_f0: list[float] = []
        self._group_cost = np.zeros(3)              # voicegroup costs of those frames so far
        self._settle_frames = int(math.ceil(s.auto_settle_s / s.hop_s - 1e-9))
        pplan = self.plans[self.primary]
        self._hop_s = pplan.hop / pplan.rate_hz
        self._hold_frames = int(math.floor(s.hold_s / self._hop_s + 1e-9))
        self._gate_state = False
        self._ring: tuple | None = None     # state of the ringing rule (_ringing_step)
        self._peak_db: float | None = None
        self._costs = s.costs()
        self._tracker = CausalTracker(self._costs)
        self._smoother = DisplaySmoother(alpha_min=s.smoother_alpha, jump=s.smoother_jump)
        self._costers: dict[str, FrameCoster] = {}   # voice -> one-frame local costs of its plan
        self._nan3 = np.full(3, np.nan)     # never written (writeable: one kernel signature)
        self._queue: list[dict] = []        # assembled frames awaiting their lookahead
        self._prev_raw = self._nan3
        self._last_out: dict | None = None
        self._gap = 0
        self._flushed = False
        self._silent_frames = 0
        self._frames_out = 0
        self._clip_samples = 0
        self._n_in = 0
        self._warned_clip = False

    # -- properties --------------------------------------------------------
    @property
    def voice(self) -> str:
        return self.active

    @property
    def plan(self) -> _Plan:
        return self.plans[self.active]

    @property
    def ceiling_hz(self) -> float:
        return self.plan.ceiling_hz

    @property
    def analysis_rate_hz(self) -> int:
        return self.plan.rate_hz

    @property
    def order(self) -> int:
        return self.plan.order

    @property
    def delay_s(self) -> dict[str, float]:
        plans = list(self.plans.values())
        rs = max(ch.rs.delay_s for ch in self.chains.values())
        blk = max((ch.rs.group - 1) / ch.plan.rate_hz if not ch.rs.identity else 0.0 for ch in self.chains.values())
        win = max(((p.n_pitch - 1) / 2.0 + 1) / p.rate_hz for p in plans)
        look = self._hop_s
        a = self.settings.smoother_alpha
        sm = (1.0 - a) / a * self._hop_s
        d = {"resampler": rs, "resampler_block": blk, "window": win, "lookahead": look, "smoother": sm}
        d["total"] = sum(d.values())
        return d

    # -- processing ----------------------------------------------------------
    def process(self, block: Any) -> FrameTrack:
        """Feed a block (1-D or ``(n, channels)``, int or float); return the frames completed."""
        if self._flushed:
            raise RuntimeError("StreamingAnalyzer.process called after flush(); make a new analyser")
        x = to_mono_float(block, where="block")
        self._n_in += len(x)
        self._clip_samples += int(np.count_nonzero(np.abs(x) >= 0.999))
        self._push(lambda ch: ch.push(x))
        return self._assemble(final=False)

    def _push(self, fn) -> None:
        for v, ch in self.chains.items():
            for item in fn(ch):
                if item["k"] >= self._k:
                    self._pending[v][item["k"]] = item

    def flush(self) -> FrameTrack:
        """End of input: return the remaining frames. The analyser cannot be reused."""
        if self._flushed:
            return FrameTrack.empty()
        self._flushed = True
        self._push(lambda ch: ch.finish())
        out = self._assemble(final=True)
        if self._frames_out == 0:
            self.warnings.append(f"input of {self._n_in} samples is shorter than one "
                                 f"{1e3 * self.settings.window_s:g} ms window; no frames")
        elif self._silent_frames == self._frames_out:
            self.warnings.append(SILENCE_WARNING)
        if self._n_in and self._clip_samples / self._n_in > 1e-4:
            self.warnings.append(_clip_warning(self._clip_samples / self._n_in))
        return out

    def _assemble(self, *, final: bool) -> FrameTrack:
        outs: list[Frame] = []
        while True:
            k = self._k
            prim = self._pending[self.primary]
            if k not in prim:
                break
            if self.active == self.primary:
                p = prim.pop(k)
                cand = p
            else:
                # settled on another voice: its chain measures frame k with the primary's F0
                ch = self.chains[self.active]
                avail = ch.available(k)
                if not avail and not final:
                    break                  # the active voice's samples for frame k are not in yet
                p = prim.pop(k)
                cand = ch.measure(k, float(p["f0_hz"])) if avail else None
            for v, d in self._pending.items():
                if v not in (self.primary, self.active):
                    d.pop(k, None)
            self._queue.append(self._make_record(k, p, cand))
            self._k += 1
            if not self.settled:
                for ch in self.chains.values():
                    if ch.idle:
                        ch.k = self._k
            while len(self._queue) >= 2:
                outs.append(self._finalize(self._queue.pop(0), self._queue[0]))
        if final:
            while self._queue:
                nxt = self._queue[1] if len(self._queue) > 1 else None
                outs.append(self._finalize(self._queue.pop(0), nxt))
        return FrameTrack.from_frames(outs)

    def _make_record(self, k: int, p: dict, cand: dict | None) -> dict:
        s = self.settings
        # relative_level and voicing_hysteresis (default margin) for one frame, on scalars
        lv = float(p["level_db"])
        decay = s.voicing_peak_decay_db_per_s * s.hop_s
        self._peak_db = lv if self._peak_db is None else max(lv, self._peak_db - decay)
        gate_lv = -200.0 if lv < self._peak_db - s.voicing_relative_db else lv
        ap = float(p["aper"])
        if math.isnan(ap):
            ap = math.inf
        turn_off = ap > s.voicing_off or gate_lv < s.voicing_floor_db - _GATE_MARGIN_DB or math.isnan(gate_lv)
        turn_on = ap < s.voicing_on and gate_lv > s.voicing_floor_db and not turn_off
        if turn_on or turn_off:
            self._gate_state = turn_on
        voiced, self._ring = _ringing_step(self._ring, k, self._gate_state, float(p["f0_hz"]), lv)
        f0 = float(p["f0_hz"]) if voiced else float("nan")
        plan = self.plans[self.active]     # candidates of this frame come from the voice active now
        # causal auto voice: settle at a fixed frame; the switch applies from the next frame
        if not self.settled and voiced and np.isfinite(f0):
            self._voiced_f0.append(f0)
            # group costs add up frame by frame (the same sums as voice_from_frames over these frames)
            add_frame_cost(self._group_cost, f0, cand["cand_f"] if cand is not None
                           else np.full(self.plans[self.primary].order // 2, np.nan))
            if len(self._voiced_f0) >= self._settle_frames:
                self._settle(voice_from_costs(self._group_cost), k)
        rec = {"k": k, "voiced": voiced, "f0": f0, "aper": float(p["aper"]), "level": float(p["level_db"]),
               "time": (k * self.plans[self.primary].hop + (self.plans[self.primary].n - 1) / 2.0)
               / self.plans[self.primary].rate_hz, "cost": None, "sf": None, "sb": None, "evidence": 1.0}
        if voiced and cand is not None:
            coster = self._costers.get(plan.voice)
            if coster is None:
                coster = self._costers[plan.voice] = FrameCoster(plan.order // 2, ref_hz=plan.ref_hz,
                                                                 costs=self._costs, max_hz=plan.max_hz)
            # = local_costs(cand_f[None], cand_b[None], states=state_table(order // 2), ...)[row 0]
            rec["cost"], rec["sf"], rec["sb"] = coster(cand["cand_f"], cand["cand_b"], f0)
            rec["evidence"] = float(cand["evidence"])
        return rec

    def _settle(self, voice: str, k: int) -> None:
        self.settled = True
        if voice != self.active:
            self.active = voice
            ch = self.chains[voice]
            ch.drain()
            ch.idle = False
            ch.lazy = True
            ch.k = k + 1
        # stop measuring the voices not chosen (the primary keeps F0 and level)
        for v in list(self.chains):
            if v not in (self.primary, self.active):
                del self.chains[v]
                del self._pending[v]
        self.chains[self.primary].formants = self.active == self.primary

    def _finalize(self, rec: dict, nxt: dict | None) -> Frame:
        s = self.settings
        nan3 = self._nan3
        raw_f, raw_b, prov = nan3, nan3, nan3
        if rec["cost"] is not None:
            cn = sn = None
            if nxt is not None and nxt["cost"] is not None:
                cn, sn = nxt["cost"], nxt["sf"]
            st, pst = self._tracker.step(rec["cost"], rec["sf"], cn, sn)
            if st >= 0:
                raw_f, raw_b = rec["sf"][st], rec["sb"][st]
                if pst >= 0 and sn is not None:
                    prov = sn[pst]
        if math.isfinite(raw_f[0]):
            # median of three (previous, current, provisional next), then the adaptive one-pole
            out_f = self._smoother.step_median(self._prev_raw, raw_f, prov)
            self._prev_raw = raw_f
            self._gap = 0
            conf = _confidence_one(out_f.tolist(), raw_b.tolist(), raw_f.tolist(), rec["aper"], rec["level"],
                                   s.voicing_floor_db, rec["evidence"], rec["f0"])
            out_b = raw_b
            self._last_out = {"f": out_f, "b": out_b}
        else:
            self._gap += 1
            self._prev_raw = nan3
            conf = 0.0
            if self._last_out is not None and self._gap <= self._hold_frames:
                out_f, out_b = self._last_out["f"], self._last_out["b"]
            else:
                out_f, out_b = nan3, nan3
                if self._gap > self._hold_frames:
                    self._tracker.reset()
                    self._smoother.reset()
                    self._last_out = None
        if not rec["voiced"]:
            conf = 0.0
        if rec["level"] <= -119.0 and not rec["voiced"]:
            self._silent_frames += 1
        self._frames_out += 1
        return Frame(time_s=float(rec["time"]), voiced=bool(rec["voiced"]), f0_hz=float(rec["f0"]),
                     f1_hz=float(out_f[0]), f2_hz=float(out_f[1]), f3_hz=float(out_f[2]),
                     b1_hz=float(out_b[0]), b2_hz=float(out_b[1]), b3_hz=float(out_b[2]),
                     level_db=float(rec["level"]), confidence=conf)


def warm_up(settings: AnalysisSettings | None = None) -> None:
    """Compile (first run) or load (later runs) the engine's compiled kernels, once per process.

    Analyses 0.8 s of a synthetic vowel (Klatt synthesiser, F0 200 Hz; long
    enough for ``voice="auto"`` to settle) between silence and faint noise, as
    a stream and as a whole file, so every kernel is ready before live
    capture starts. Measured on a 2-core machine: about 0.4 s for the first
    call in a process when the kernels are cached on disk (loading them), and
    about half a minute on the first run after installing (compiling; see
    :func:`livevowel.dsp._jit.kernels_cached`). Later calls in the same
    process with the same voice setting return at once.
    """
    key = (settings if settings is not None else AnalysisSettings()).voice
    if key in _WARMED:
        return
    first = not _WARMED
    from livevowel.dsp.synth import synthesize_vowel

    rate = 16000
    v = synthesize_vowel(formants_hz=(600.0, 1600.0, 2600.0), f0_hz=200.0, duration_s=0.8, rate_hz=rate)
    # silence and faint noise as well: frames without F0 take other paths
    noise = 1e-4 * np.random.default_rng(0).standard_normal(rate // 10)
    x = np.concatenate([np.zeros(rate // 10), v, noise])
    s = settings if settings is not None else AnalysisSettings()
    # auto may settle on any voice: ready each one's plan (tables of its order) as well
    voices = [s.voice] + (list(NOMINAL_CEILING_HZ) if s.voice == "auto" else [])
    for voice in voices:
        sv = replace(s, voice=voice)
        sa = StreamingAnalyzer(rate, settings=sv)
        sa.process(x)
        sa.flush()
        analyze(x[:2400], rate, settings=sv)
        _WARMED.add(voice)
    _WARMED.add(key)
    if first:
        # once per process: the batch array functions the engine does not call (its
        # loops call the one-frame kernels), so that no kernel compiles later
        from livevowel.dsp.dap import dap, harmonic_powers

        frames = framing.frame_signal(v, frame_len=640, hop=1600)
        f0 = yin(frames, rate_hz=rate, f0_min_hz=60.0, f0_max_hz=700.0)[0]
        hf, hp, hw = harmonic_powers(frames * np.hanning(640), f0, rate_hz=rate, max_hz=rate / 2.0 - 50.0)
        a, _ = dap(hf, hp, hw, order=12, rate_hz=rate)
        formant_candidates(a, rate_hz=rate)


#: Voice settings :func:`warm_up` has run for in this process.
_WARMED: set[str] = set()
