"""Putting the screen together for the ``practice`` and ``demo`` commands.

Thin glue: load the target set (mapped through a speaker profile when one is
given), pick the controller, build the live pipeline, run the loop.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

from livevowel.errors import UserError


def load_targets(spec: str, *, profile_path: "str | os.PathLike | None" = None) -> Any:
    """The target set ``spec`` (shipped name or YAML path), in the speaker's space when a profile is given."""
    from livevowel.targets import load_target_set

    ts = load_target_set(spec)
    if profile_path:
        from livevowel.profile import load_profile

        ts = load_profile(profile_path).map_set(ts)
    return ts


def make_pipeline(source: Any, settings: Any) -> Any:
    """A :class:`livevowel.audio.pipeline.LivePipeline` for ``source`` with the run's settings."""
    from livevowel.audio.pipeline import LivePipeline, LiveSettings
    from livevowel.dsp.engine import AnalysisSettings

    return LivePipeline(source, settings=AnalysisSettings.from_config(settings),
                        live=LiveSettings.from_config(settings))


def make_tone(options: Any, *, headless: bool) -> Any:
    """The hit tone (a no-op when headless, muted or without a sound device)."""
    from livevowel.ui.sound import HitTone

    return HitTone(enabled=options.tone and not headless, volume=options.tone_volume)


@dataclass
class DemoRun:
    """What a demo run left behind: the screen (counters, dot log), the loop figures, the scenario."""

    screen: Any
    loop: Any
    scenario: Any


def run_demo(*, settings: Any, options: Any, headless: bool = False, seconds: float | None = None,
             screenshot: "str | os.PathLike | None" = None, pace: float = 1.0, size: tuple[int, int] = (1280, 800),
             fullscreen: bool = False, seed: int = 0) -> DemoRun:
    """Run the built-in demo on the practice screen (see :mod:`livevowel.demo`)."""
    from livevowel.audio.paced import GeneratedVoiceSource
    from livevowel.demo import demo_scenario
    from livevowel.feedback import ScriptedController
    from livevowel.ui import loop
    from livevowel.ui.screen import TITLE_SEP, PracticeScreen

    scenario = demo_scenario()
    ts = load_targets(scenario.set_name)
    loop.init_display(headless=headless)
    tone = make_tone(options, headless=headless)
    screen = PracticeScreen(ts, ScriptedController(ts.targets, scenario.timetable), options=options,
                            on_hit=lambda e: tone.play(), title=f"demo voice{TITLE_SEP}{ts.title}")
    source = GeneratedVoiceSource(scenario.schedule, rate_hz=16000.0, pace=pace, seed=seed)
    pipeline = make_pipeline(source, settings)
    res = loop.run(screen, pipeline, headless=headless, seconds=seconds, screenshot=screenshot, size=size,
                   fullscreen=fullscreen, pace=pace)
    return DemoRun(screen, res, scenario)


def run_practice(*, settings: Any, options: Any, targets: str, target_id: str | None = None,
                 profile_path: "str | os.PathLike | None" = None, source: Any, headless: bool = False,
                 seconds: float | None = None, screenshot: "str | os.PathLike | None" = None,
                 pace: float = 1.0, size: tuple[int, int] = (1280, 800), fullscreen: bool = False) -> Any:
    """Free practice over a set, or practice on one target (``target_id``).

    Returns ``(screen, loop_result)``: the screen holds the counters."""
    from livevowel.feedback import TargetController
    from livevowel.ui import loop
    from livevowel.ui.screen import PracticeScreen

    ts = load_targets(targets, profile_path=profile_path)
    if target_id is not None:
        t = ts.find(target_id) if hasattr(ts, "find") else None
        if t is None:
            raise UserError(f"target set {ts.id} has no target {target_id!r}; known: {', '.join(ts.ids)}")
        controller = TargetController(ts.targets, t.id, locked=True)
    else:
        controller = TargetController(ts.targets)
    loop.init_display(headless=headless)
    tone = make_tone(options, headless=headless)
    from livevowel.ui.screen import TITLE_SEP

    title = ts.title + (f"{TITLE_SEP}speaker profile" if profile_path else "")
    screen = PracticeScreen(ts, controller, options=options, on_hit=lambda e: tone.play(), title=title)
    pipeline = make_pipeline(source, settings)
    res = loop.run(screen, pipeline, headless=headless, seconds=seconds, screenshot=screenshot, size=size,
                   fullscreen=fullscreen, pace=pace)
    return screen, res
