"""The built-in demo: a generated learner working through a few vowels.

The scenario is our own invention, for showing the practice screen without a
microphone. A synthetic adult male voice (Klatt-style cascade synthesiser,
:mod:`livevowel.dsp.synth`) practises four targets of the shipped set
``gae-men`` in turn -- KIT, GOOSE, LOT, TRAP -- the way a learner does:
each attempt starts from a neutral onset and glides into the vowel; some
land in the region and are held (hits), some stop short or overshoot into
the neighbouring vowel (near misses). F0 falls gently through each attempt
(declination), with jitter and shimmer; the pauses carry faint breath-like
noise so the input meters have a room floor.

Formant targets are taken from the target set itself (the region centre for
hits; a point well outside the region, towards the confusable neighbour,
for near misses), so the demo stays consistent with the drawn regions.

Public API
----------
``demo_schedule()`` -> :class:`~livevowel.dsp.synth.Schedule` (what the
generated-voice source plays); ``demo_scenario()`` -> :class:`Scenario`
(the schedule plus the target timetable and the planned outcome of each
attempt, for the screen's controller and for tests).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

#: Target set the demo practises (shipped with livevowel).
DEMO_SET = "gae-men"

#: Neutral onset of each attempt (F1, F2, F3 in Hz): a mid-central vowel for
#: an adult male vocal tract (common practice: about 500/1500/2500 Hz).
ONSET_HZ = (500.0, 1500.0, 2500.0)

#: The script: (target id, [(outcome, offset), ...]). ``offset`` is where the
#: attempt aims, in units of the target's hit size, as (dF1, dF2) away from
#: its centre in SD units scaled by the hit size (0, 0 = the centre).
SCRIPT: tuple[tuple[str, tuple[tuple[str, tuple[float, float]], ...]], ...] = (
    ("kit", (("miss", (1.7, -0.6)),     # too open: stops on the way to DRESS
             ("hit", (0.0, 0.0)),
             ("hit", (-0.2, 0.15)))),
    ("goose", (("miss", (0.0, 2.0)),    # fronted GOOSE, a common learner pattern
               ("hit", (0.0, 0.1)))),
    ("lot", (("hit", (0.0, 0.0)),
             ("miss", (-1.8, 0.9)))),   # too close and too front: towards STRUT
    ("trap", (("hit", (0.0, 0.0)),
              ("hit", (0.1, -0.1)))),
)

LEAD_IN_S = 1.2      # room noise before the first attempt (noise-floor lead-in)
GLIDE_S = 0.16       # onset glide into the vowel
HOLD_S = 0.85        # steady part of an attempt
OFFGLIDE_S = 0.08
PAUSE_S = 0.7        # between attempts
SWITCH_S = 0.9       # extra pause when the target changes
NOISE_DB = -36.0     # level of the breath-like noise in pauses (dB re voicing)


@dataclass(frozen=True)
class Attempt:
    """One planned attempt: when the vowel is steady, what it aims at, and the plan."""

    target_id: str
    outcome: str               # "hit" or "miss"
    start_s: float             # voicing starts (onset glide)
    steady_s: tuple[float, float]
    formants_hz: tuple[float, float, float]


@dataclass(frozen=True)
class Scenario:
    """The demo: what is said and which target is current when."""

    schedule: object           # livevowel.dsp.synth.Schedule
    set_name: str
    timetable: tuple[tuple[float, str], ...]   # (from time s, target id)
    attempts: tuple[Attempt, ...]

    @property
    def duration_s(self) -> float:
        return float(self.schedule.duration_s)

    def picture_time_s(self) -> float:
        """A moment worth a picture: 0.2 s into the steady part of the last planned hit.

        The dot is inside the target with its trail behind it and the hold arc
        filling; the headless demo stops here when nobody chose --seconds.
        """
        hits = [a for a in self.attempts if a.outcome == "hit"]
        return float((hits[-1] if hits else self.attempts[-1]).steady_s[0] + 0.2)

    def planned_hits(self, target_id: str | None = None) -> int:
        return sum(1 for a in self.attempts if a.outcome == "hit" and target_id in (None, a.target_id))


def _aim(target, offset: tuple[float, float]) -> tuple[float, float, float]:
    s1, s2 = target.sd_hz
    k = target.hit_size_sd
    f1 = target.f1_hz + offset[0] * k * s1
    f2 = target.f2_hz + offset[1] * k * s2
    f3 = float(target.f3_hz) if target.f3_hz else 2500.0
    return float(f1), float(f2), max(f3, f2 + 300.0)


@lru_cache(maxsize=4)
def demo_scenario(set_name: str = DEMO_SET) -> Scenario:
    """Build the demo scenario (deterministic; cached)."""
    from livevowel.dsp.synth import Schedule, Segment
    from livevowel.targets import load_target_set

    ts = load_target_set(set_name)
    segs = [Segment(duration_s=LEAD_IN_S, kind="noise", formants_hz=ONSET_HZ, level_db=NOISE_DB)]
    t = LEAD_IN_S
    timetable: list[tuple[float, str]] = []
    attempts: list[Attempt] = []
    n_att = 0
    for ti, (tid, plan) in enumerate(SCRIPT):
        target = ts.get(tid)
        if ti > 0:
            segs.append(Segment(duration_s=SWITCH_S, kind="noise", formants_hz=ONSET_HZ, level_db=NOISE_DB))
            t += SWITCH_S
        timetable.append((0.0 if ti == 0 else t - SWITCH_S / 2, tid))
        for outcome, offset in plan:
            f = _aim(target, offset)
            # F0 declination per attempt, slightly different each time (adult male, common practice ~100-130 Hz)
            f0a = 128.0 - 3.0 * (n_att % 4)
            f0b = f0a - 18.0
            start = t
            segs.append(Segment(duration_s=GLIDE_S, kind="voiced", f0_start_hz=f0a, f0_end_hz=f0a - 3,
                                formants_hz=ONSET_HZ, transition_s=GLIDE_S, label=f"{tid}:onset"))
            segs.append(Segment(duration_s=HOLD_S, kind="voiced", f0_start_hz=f0a - 3, f0_end_hz=f0b,
                                formants_hz=f, transition_s=OFFGLIDE_S, transition="linear",
                                label=f"{tid}:{outcome}"))
            t += GLIDE_S + HOLD_S
            attempts.append(Attempt(tid, outcome, start, (start + GLIDE_S, t - OFFGLIDE_S), f))
            segs.append(Segment(duration_s=PAUSE_S, kind="noise", formants_hz=ONSET_HZ, level_db=NOISE_DB))
            t += PAUSE_S
            n_att += 1
    # a last long hold on the final target, so the picture at the end shows the dot
    last = ts.get(SCRIPT[-1][0])
    f = _aim(last, (0.0, 0.0))
    start = t
    segs.append(Segment(duration_s=GLIDE_S, kind="voiced", f0_start_hz=122.0, f0_end_hz=120.0,
                        formants_hz=ONSET_HZ, transition_s=GLIDE_S, label=f"{last.id}:onset"))
    segs.append(Segment(duration_s=2.0, kind="voiced", f0_start_hz=120.0, f0_end_hz=104.0, formants_hz=f,
                        label=f"{last.id}:hit"))
    t += GLIDE_S + 2.0
    attempts.append(Attempt(last.id, "hit", start, (start + GLIDE_S, t), f))
    segs.append(Segment(duration_s=0.5, kind="noise", formants_hz=ONSET_HZ, level_db=NOISE_DB))
    schedule = Schedule(tuple(segs), voice="man", jitter_pct=0.8, shimmer_db=0.35, aspiration_db=-30.0)
    return Scenario(schedule, set_name, tuple(timetable), tuple(attempts))


def demo_schedule() -> object:
    """The demo scenario's synth :class:`~livevowel.dsp.synth.Schedule` (what the voice says)."""
    return demo_scenario().schedule


def steady_times(scenario: Scenario) -> np.ndarray:
    """(n, 2) array of the steady stretch of each attempt, seconds."""
    return np.array([a.steady_s for a in scenario.attempts])
