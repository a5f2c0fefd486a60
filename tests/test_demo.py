"""The built-in demo: its scenario agrees with the target set, and it runs headless."""

import numpy as np
import pytest

from livevowel.demo import DEMO_SET, demo_scenario, demo_schedule
from livevowel.targets import load_target_set


def test_scenario_visits_targets_of_the_set_with_hits_and_near_misses():
    sc = demo_scenario()
    ts = load_target_set(DEMO_SET)
    ids = [tid for _, tid in sc.timetable]
    assert len(set(ids)) >= 3 and all(tid in ts.ids for tid in ids)
    outcomes = {a.outcome for a in sc.attempts}
    assert outcomes == {"hit", "miss"}
    for a in sc.attempts:
        t = ts.get(a.target_id)
        f1, f2, f3 = a.formants_hz
        # planned hits aim inside the drawn region, near misses clearly outside it
        if a.outcome == "hit":
            assert t.contains(f1, f2), a
        else:
            assert t.distance(f1, f2) > 1.3 * t.hit_size_sd, a
        assert f1 < f2 < f3
    # the schedule is what the generated-voice source plays: voiced attempts, F0 in the adult male range
    sched = demo_schedule()
    voiced = [s for s in sched.segments if s.kind == "voiced"]
    assert len(voiced) >= 2 * len(sc.attempts) - 1
    assert all(80 <= s.f0_start_hz <= 160 for s in voiced)
    assert sched.jitter_pct > 0 and sched.shimmer_db > 0
    assert sc.duration_s == pytest.approx(sched.duration_s)


@pytest.mark.slow
def test_demo_runs_headless_writes_a_picture_and_hits_the_first_target(tmp_path):
    pygame = pytest.importorskip("pygame")
    from livevowel import config
    from livevowel.ui.app import run_demo
    from livevowel.ui.screen import ScreenOptions

    sc = demo_scenario()
    first = sc.attempts[0].target_id
    first_hit = next(a for a in sc.attempts if a.outcome == "hit")
    assert first_hit.target_id == first
    seconds = first_hit.steady_s[0] + 0.8   # past the hold time of the first planned hit
    shot = tmp_path / "demo.png"
    settings = config.load()
    r = run_demo(settings=settings, options=ScreenOptions.from_settings(settings), headless=True,
                 seconds=seconds, screenshot=shot, pace=0)
    assert shot.is_file()
    img = pygame.surfarray.array3d(pygame.image.load(str(shot)))
    assert img.shape[:2] == (1280, 800)
    assert img.std() > 10 and len(np.unique(img.reshape(-1, 3), axis=0)) > 50  # not blank
    # the dot visited the intended target: shown inside it during the planned hit ...
    log = np.array([(t, inside) for t, f1, f2, tid, inside in r.screen.dot_log], dtype=float)
    steady = (log[:, 0] >= first_hit.steady_s[0]) & (log[:, 0] <= first_hit.steady_s[0] + 0.5)
    assert steady.sum() >= 30 and log[steady, 1].mean() > 0.9
    # ... and not during the planned near miss before it
    miss = sc.attempts[0]
    assert miss.outcome == "miss"
    m = (log[:, 0] >= miss.steady_s[0]) & (log[:, 0] <= miss.steady_s[1])
    assert m.sum() >= 30 and log[m, 1].mean() < 0.1
    assert r.screen.counter.score(first).hits == 1
    assert r.screen.counter.attempts == 2
    # no dot in the breathy pause before the first attempt
    assert log[:, 0].min() >= sc.attempts[0].start_s


def test_demo_command_rejects_bad_options(capsys):
    from livevowel.cli import main

    assert main(["demo", "--headless", "--screenshot", "out.jpg"]) == 2
    assert "png" in capsys.readouterr().err
    assert main(["demo", "--headless", "--pace", "-1"]) == 2


def test_demo_without_a_screen_runs_headless_and_saves_a_picture(tmp_path):
    import os
    import subprocess
    import sys

    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "SDL_VIDEODRIVER")}
    proc = subprocess.run([sys.executable, "-m", "livevowel", "demo", "--seconds", "3"], cwd=tmp_path, env=env,
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "no screen here" in proc.stdout
    assert (tmp_path / "livevowel-demo.png").stat().st_size > 10_000
    assert "pygame community" not in proc.stdout + proc.stderr


def test_practice_without_a_screen_says_what_to_do(tmp_path):
    import os
    import subprocess
    import sys

    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "SDL_VIDEODRIVER")}
    proc = subprocess.run([sys.executable, "-m", "livevowel", "practice", "--targets", "gae-men", "--source", "demo"],
                          cwd=tmp_path, env=env, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert "--headless" in proc.stderr.strip().splitlines()[-1]
