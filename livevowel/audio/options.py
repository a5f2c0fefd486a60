"""One way for every command to choose its audio input.

``add_source_options(parser)`` adds ``--source``, ``--device``, ``--channel``
and ``--pace``; ``open_source(spec, ...)`` (or ``source_from_args(args)``)
turns them into a :class:`~livevowel.audio.base.Source`.

Source specs:

* ``mic`` -- live capture from an input device (the default);
* ``file:PATH`` -- a recording played through the same path at real-time pace
  (or ``--pace``);
* ``demo`` -- the generated voice speaking the demo scenario
  (``livevowel.demo.demo_schedule()``). Until that module exists, a short
  built-in sequence of steady vowels (:func:`fallback_demo_schedule`) is used.
"""

from __future__ import annotations

import argparse
from typing import Callable

from livevowel.audio.base import Source
from livevowel.errors import UserError

SOURCE_HELP = "mic (live input, the default), file:PATH (a recording played as if live) or demo (a generated voice)"

#: Fallback demo vowels: (label, F1, F2, F3) in Hz, adult male averages of
#: Peterson & Barney (1952), Table II.
FALLBACK_VOWELS = (
    ("i", 270.0, 2290.0, 3010.0),
    ("ɛ", 530.0, 1840.0, 2480.0),
    ("æ", 660.0, 1720.0, 2410.0),
    ("ɑ", 730.0, 1090.0, 2440.0),
    ("u", 300.0, 870.0, 2240.0),
)


def add_source_options(parser: argparse.ArgumentParser, *, source_default: str | None = "mic") -> None:
    """Add --source, --device, --channel and --pace to a command's parser.

    ``source_default=None`` leaves ``--source`` unset when not given (for a
    command that checks whether input options were given at all; "mic" then
    is the caller's default)."""
    g = parser.add_argument_group("input")
    g.add_argument("--source", metavar="S", default=source_default, help=SOURCE_HELP)
    g.add_argument("--device", metavar="D",
                   help="input device: an index or part of a name from `livevowel devices` (default: the system default)")
    g.add_argument("--channel", metavar="N", type=int,
                   help="use input channel N (1 = first) instead of a downmix of all channels")
    g.add_argument("--pace", metavar="F", type=float, default=1.0,
                   help="speed of file and demo sources: 1 real time (default), 2 twice as fast, 0 as fast as possible")


def parse_spec(spec: str) -> tuple[str, str | None]:
    """``"mic"`` -> ("mic", None); ``"file:a.wav"`` -> ("file", "a.wav"); ``"demo"`` -> ("demo", None)."""
    text = (spec or "mic").strip()
    if text == "mic":
        return "mic", None
    if text == "demo":
        return "demo", None
    if text.startswith("file:"):
        path = text[5:]
        if not path:
            raise UserError("--source file: needs a path, e.g. --source file:recording.wav")
        return "file", path
    from pathlib import Path

    if Path(spec).suffix.lower() in (".wav", ".flac", ".ogg", ".oga", ".aiff", ".aif"):
        raise UserError(f"unknown --source {spec!r}; for a recording write --source file:{spec}")
    raise UserError(f"unknown --source {spec!r}; use {SOURCE_HELP}")


def fallback_demo_schedule():
    """A built-in demo: each vowel of :data:`FALLBACK_VOWELS` for 1.2 s with 0.3 s pauses, F0 120 -> 100 Hz."""
    from livevowel.dsp.synth import Schedule, Segment

    segs = [Segment(duration_s=1.0, kind="silent")]
    for label, f1, f2, f3 in FALLBACK_VOWELS:
        segs.append(Segment(duration_s=1.2, kind="voiced", f0_start_hz=120.0, f0_end_hz=100.0,
                            formants_hz=(f1, f2, f3), label=label))
        segs.append(Segment(duration_s=0.3, kind="silent"))
    return Schedule(tuple(segs), voice="man", jitter_pct=0.5, shimmer_db=0.3)


def demo_schedule_provider() -> Callable[[], object]:
    """``livevowel.demo.demo_schedule`` when that module exists, else :func:`fallback_demo_schedule`."""
    try:
        from livevowel import demo
    except ModuleNotFoundError as exc:
        if exc.name not in ("livevowel.demo",):
            raise
        return fallback_demo_schedule
    return demo.demo_schedule


def open_source(spec: str, *, device: "int | str | None" = None, channel: int | None = None, pace: float = 1.0,
                block_ms: float = 5.0, live=None, schedule=None, rate_hz: float | None = None,
                seed: int = 0) -> Source:
    """Make the source a spec names (not started).

    Parameters
    ----------
    spec : str
        ``"mic"``, ``"file:PATH"`` or ``"demo"``.
    device : int or str, keyword-only, optional
        Input device for ``mic`` (index or part of the name).
    channel : int, keyword-only, optional
        0-based input channel for ``mic``; default a downmix.
    pace : float, keyword-only
        Pace of ``file`` and ``demo`` (1.0 real time, 0 as fast as possible).
    block_ms : float, keyword-only
        Block length in milliseconds.
    live : LiveSettings, keyword-only, optional
        Supplies ``block_ms``, ``lost_after_s`` and ``retry_s`` when given.
    schedule : Schedule or callable, keyword-only, optional
        What ``demo`` says (default :func:`demo_schedule_provider`).
    rate_hz : float, keyword-only, optional
        Sample rate for ``mic`` (default the device's own) or ``demo`` (default 16000).
    seed : int, keyword-only
        Seed of the generated voice.

    Raises
    ------
    UserError
        Unknown spec, missing file, no PortAudio, no device, bad channel or pace.
    """
    kind, path = parse_spec(spec)
    if live is not None:
        block_ms = live.block_ms
    block_s = float(block_ms) / 1000.0
    if pace is None:
        pace = 1.0
    if kind != "mic" and (pace < 0 or pace != pace):
        raise UserError(f"--pace must be 0 (as fast as possible) or a positive factor, got {pace}")
    if kind == "mic":
        if pace not in (1.0, None):
            raise UserError("--pace applies to file and demo sources; live input always runs in real time")
        from livevowel.audio.mic import MicrophoneSource

        extra = {} if live is None else {"lost_after_s": live.lost_after_s, "retry_s": live.retry_s}
        return MicrophoneSource(device, channel, rate_hz=rate_hz, block_s=block_s, **extra)
    if device is not None or channel is not None:
        raise UserError("--device and --channel apply to --source mic only")
    if kind == "file":
        from livevowel.audio.paced import PacedFileSource

        return PacedFileSource(path, pace=pace, block_s=block_s)
    from livevowel.audio.paced import GeneratedVoiceSource

    provider = schedule if schedule is not None else demo_schedule_provider()
    return GeneratedVoiceSource(provider, rate_hz=rate_hz or 16000.0, pace=pace, seed=seed, block_s=block_s)


def source_from_args(args: argparse.Namespace, *, live=None, **kw) -> Source:
    """:func:`open_source` from the options :func:`add_source_options` added."""
    channel = getattr(args, "channel", None)
    if channel is not None:
        if channel < 1:
            raise UserError(f"--channel counts from 1, got {channel}")
        channel -= 1
    return open_source(getattr(args, "source", "mic") or "mic", device=getattr(args, "device", None), channel=channel,
                       pace=getattr(args, "pace", 1.0), live=live, **kw)
