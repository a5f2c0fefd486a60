"""Hit logic with a fake clock: hold time, attempts, streaks, target control."""

import pytest

from livevowel.feedback import HitCounter, ScriptedController, TargetController

HOP = 0.01  # 10 ms between frames (common practice for formant tracking)


def run(counter, spans, target="kit"):
    """spans: list of (duration_s, present, inside); the fake clock carries on
    from the previous call on the same counter. Returns all events."""
    t = getattr(counter, "_fake_clock", 0.0)
    out = []
    for dur, present, inside in spans:
        for _ in range(int(round(dur / HOP))):
            out += counter.update(t, present=present, inside=inside, target_id=target)
            t = round(t + HOP, 10)
    counter._fake_clock = t
    return out


def test_hit_only_after_hold_time():
    c = HitCounter(hold_s=0.25)
    t = 0.0
    hit_at = None
    for i in range(40):
        ev = c.update(t, present=True, inside=True, target_id="kit")
        if any(e.kind == "hit" for e in ev):
            hit_at = t
        if t < 0.25 - 1e-9:
            assert c.hits == 0, f"hit counted too early at {t:.2f} s"
        t = round(t + HOP, 10)
    assert c.hits == 1
    assert hit_at == pytest.approx(0.25)


def test_leaving_the_region_restarts_the_hold():
    c = HitCounter(hold_s=0.25)
    run(c, [(0.2, True, True), (0.05, True, False), (0.2, True, True)])
    assert c.hits == 0
    run(c, [(0.06, True, True)])
    assert c.hits == 1


def test_configurable_hold_time():
    c = HitCounter(hold_s=0.5)
    run(c, [(0.4, True, True)])
    assert c.hits == 0
    run(c, [(0.2, True, True)])
    assert c.hits == 1


def test_one_hit_per_attempt_and_streak():
    c = HitCounter(hold_s=0.25, gap_s=0.15)
    # two utterances that hit, separated by silence
    run(c, [(0.6, True, True), (0.3, False, False), (0.5, True, True), (0.3, False, False)])
    assert (c.attempts, c.hits, c.streak) == (2, 2, 2)
    # a near miss: voiced but outside the region -> attempt, no hit, streak back to 0
    run(c, [(0.5, True, False), (0.3, False, False)])
    assert (c.attempts, c.hits, c.streak, c.best_streak) == (3, 2, 0, 2)
    assert c.score("kit").attempts == 3 and c.score("kit").hits == 2


def test_blips_are_not_attempts_and_short_gaps_do_not_split():
    c = HitCounter(hold_s=0.25, min_attempt_s=0.12, gap_s=0.15)
    run(c, [(0.05, True, False), (0.4, False, False)])
    assert c.attempts == 0
    run(c, [(0.3, True, False), (0.08, False, False), (0.3, True, False), (0.4, False, False)])
    assert c.attempts == 1


def test_unreliable_frames_never_hit():
    c = HitCounter(hold_s=0.25)
    run(c, [(1.0, False, True)])
    assert (c.attempts, c.hits) == (0, 0)


def test_changing_target_drops_the_attempt():
    c = HitCounter(hold_s=0.25)
    run(c, [(0.2, True, True)], target="kit")
    run(c, [(0.1, True, True)], target="dress")
    assert c.hits == 0  # the hold on kit does not carry over to dress
    run(c, [(0.2, True, True)], target="dress")
    assert c.hits == 1 and c.score("dress").hits == 1


class T:
    def __init__(self, id):
        self.id = id


def test_controller_steps_and_locks():
    ts = [T("a"), T("b"), T("c")]
    c = TargetController(ts)
    assert c.current.id == "a"
    assert c.next() and c.current.id == "b"
    assert c.previous() and c.previous() and c.current.id == "c"  # wraps around
    assert c.select("a") and c.current.id == "a"
    assert not c.select("zz")
    locked = TargetController(ts, "b", locked=True)
    assert not locked.next() and locked.current.id == "b"
    with pytest.raises(ValueError):
        TargetController(ts, "zz")


def test_scripted_controller_follows_timetable():
    ts = [T("a"), T("b"), T("c")]
    c = ScriptedController(ts, [(0.0, "b"), (2.0, "c"), (5.0, "a")])
    for t, want in [(0.5, "b"), (2.0, "c"), (4.9, "c"), (5.1, "a")]:
        c.update(t)
        assert c.current.id == want
    assert not c.next()
