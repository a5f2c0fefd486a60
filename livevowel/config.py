"""Settings: one schema, one commented default file, user overrides.

Precedence, lowest first: the defaults in :data:`SCHEMA` (the same values the
top-level ``config.yaml`` lists, with comments), then the user's own config
file (``--config FILE``, or ``config.yaml`` in the user config folder when it
exists), then command-line options.

``config.yaml`` is generated from :data:`SCHEMA` (``livevowel config
--template``) and a test checks that the two agree, so the file always lists
every default.

Unknown keys, wrong types and out-of-range values raise
:class:`~livevowel.errors.UserError` naming the file and the dotted key.
"""

from __future__ import annotations

import copy
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import yaml

from livevowel.errors import UserError


@dataclass(frozen=True)
class Key:
    """One setting: default, type, allowed range or choices, and a comment."""

    default: Any
    help: str
    kind: type = float
    min: float | None = None
    max: float | None = None
    choices: tuple[str, ...] | None = None
    nullable: bool = False

    def check(self, value: Any, where: str) -> Any:
        """Return ``value`` converted to this key's type, or raise UserError."""
        if value is None:
            if self.nullable:
                return None
            raise UserError(f"{where}: a value is required (default {self.default!r})")
        if self.kind is bool:
            if not isinstance(value, bool):
                raise UserError(f"{where}: expected true or false, got {value!r}")
            return value
        if self.kind in (int, float):
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise UserError(f"{where}: expected a number, got {value!r}")
            if self.kind is int and float(value) != int(value):
                raise UserError(f"{where}: expected a whole number, got {value!r}")
            value = self.kind(value)
            if self.min is not None and value < self.min:
                raise UserError(f"{where}: {value} is below the minimum {self.min}")
            if self.max is not None and value > self.max:
                raise UserError(f"{where}: {value} is above the maximum {self.max}")
            return value
        if self.kind is str:
            if not isinstance(value, str):
                raise UserError(f"{where}: expected text, got {value!r}")
            if self.choices is not None and value not in self.choices:
                raise UserError(f"{where}: {value!r} is not one of {', '.join(self.choices)}")
            return value
        raise TypeError(f"unsupported kind {self.kind}")  # pragma: no cover - schema bug


#: Every setting livevowel has, by section. Sections are owned by layers:
#: ``analysis`` by the DSP engine, ``live`` by the audio path, and so on.
SCHEMA: dict[str, dict[str, Key]] = {
    "analysis": {
        "voice": Key("auto", "speaker group: adult_male, adult_female, child or auto (decide from the voice)",
                     kind=str, choices=("adult_male", "adult_female", "child", "auto")),
        "ceiling_hz": Key(None, "formant ceiling in Hz; null follows the voice setting",
                          min=3000, max=9000, nullable=True),
        "window_ms": Key(25.0, "analysis window length in milliseconds", min=5, max=100),
        "hop_ms": Key(10.0, "hop between frames in milliseconds", min=1, max=50),
        "pre_emphasis_hz": Key(50.0, "pre-emphasis corner frequency in Hz (0 turns it off)", min=0, max=1000),
        "f0_min_hz": Key(60.0, "lowest F0 searched, Hz", min=30, max=400),
        "f0_max_hz": Key(700.0, "highest F0 searched, Hz", min=100, max=1500),
        "method": Key("dap", "formant method: dap (discrete all-pole fit to the harmonics, best for high voices), "
                      "autocorrelation, burg, weighted (weighted linear prediction) or hybrid "
                      "(autocorrelation below dap_above_hz, dap above)",
                      kind=str, choices=("dap", "autocorrelation", "burg", "weighted", "hybrid")),
        "dap_above_hz": Key(160.0, "hybrid method only: F0 in Hz from which the dap fit is used", min=0, max=1000),
        "threads": Key(0, "offline analysis of one input: threads sharing the work (0: one per core, at most 2; "
                       "1: none)", min=0, max=64, kind=int),
        "closed_phase_below": Key(1.3, "dap only: where the lowest formant reads below this many times F0 (F1 "
                                  "near or under F0, high voices), closed-phase LPC may give it instead, and a "
                                  "near-exact closed-phase fit also replaces formants locked on a harmonic below "
                                  "2.2 x F0, or an exact one F1 alone between harmonics; 0 turns all off",
                                  min=0, max=4),
        "taper": Key("gaussian", "analysis window shape: gaussian, hann or hamming",
                     kind=str, choices=("gaussian", "hann", "hamming")),
        "yin_threshold": Key(0.1, "YIN dip threshold for the period search (lower = stricter)", min=0.01, max=0.5),
        "voicing_on": Key(0.25, "aperiodicity below which voicing starts (0 = perfectly periodic)",
                          min=0.01, max=1.0),
        "voicing_off": Key(0.4, "aperiodicity above which voicing stops (at least voicing_on)",
                           min=0.01, max=1.0),
        "voicing_floor_db": Key(-50.0, "level in dB re full scale below which voicing cannot start",
                                min=-100, max=0),
        "voicing_relative_db": Key(30.0, "frames this many dB below the recent peak level count as unvoiced",
                                   min=5, max=120),
        "voicing_peak_decay_db_per_s": Key(20.0, "how fast (dB per second) the recent peak level falls",
                                           min=0, max=1000),
        "max_bandwidth_hz": Key(700.0, "resonances wider than this (Hz) are not taken as formants",
                                min=100, max=2000),
        "hold_ms": Key(50.0, "unvoiced gaps up to this long (ms) keep the last formants; longer ones reset",
                       min=0, max=500),
        "smoother_alpha": Key(0.4, "live display smoothing for small moves, 0..1 (1 = none)", min=0.01, max=1.0),
        "smoother_jump": Key(0.15, "relative change (0.15 = 15 %) that the live display follows at once",
                             min=0.01, max=2.0),
        "auto_settle_ms": Key(500.0, "live voice=auto: voiced time (ms) after which the voice is decided",
                              min=0, max=5000),
        "transition_cost": Key(6.0, "tracking: cost weight of frame-to-frame formant change", min=0, max=100),
        "bandwidth_cost": Key(1.0, "tracking: cost weight of wide candidates", min=0, max=100),
        "reference_cost": Key(1.0, "tracking: cost weight of distance from the voice's typical formants",
                              min=0, max=100),
        "harmonic_cost": Key(0.5, "tracking: cost weight of narrow candidates sitting on a harmonic",
                             min=0, max=100),
        "skip_cost": Key(1.5, "tracking: cost weight of leaving a strong candidate unassigned", min=0, max=100),
    },
    "live": {
        "block_ms": Key(5.0, "audio block (device callback) length in milliseconds", min=2, max=100),
        "queue_size": Key(1000, "result frames held for the display; the oldest are dropped beyond this",
                          kind=int, min=10, max=100000),
        "input_queue_s": Key(2.0, "audio held between the device and the analysis, seconds", min=0.1, max=30),
        "noise_floor_s": Key(1.0, "lead-in over which the room noise floor is measured, seconds", min=0.2, max=10),
        "noise_margin_db": Key(6.0, "voicing cannot start below the noise floor + this margin (dB); null: off",
                               min=0, max=40, nullable=True),
        "max_noise_floor_db": Key(-35.0, "a lead-in louder than this (dBFS) is taken as voice and not used as the floor",
                                  min=-120, max=0),
        "clip_level": Key(0.99, "sample magnitude counted as clipping (full scale 1.0)", min=0.5, max=1.0),
        "lost_after_s": Key(1.0, "seconds without audio from the device before the input counts as lost",
                            min=0.2, max=30),
        "retry_s": Key(2.0, "seconds between attempts to reopen a lost input device", min=0.2, max=60),
    },
    "practice": {
        "hold_ms": Key(250.0, "time the dot must stay inside the target for a hit, milliseconds", min=50, max=3000),
        "min_confidence": Key(0.4, "frames below this confidence (0..1) show no dot and do not count", min=0, max=1),
        "trail_ms": Key(300.0, "length of the fading trail behind the dot, milliseconds", min=0, max=2000),
        "trail": Key(True, "show the trail behind the dot", kind=bool),
        "units": Key("hz", "grid of the vowel plane: hz or bark", kind=str, choices=("hz", "bark")),
        "theme": Key("light", "colours: light, dark or contrast (high contrast)", kind=str,
                     choices=("light", "dark", "contrast")),
        "large_text": Key(False, "larger text on the practice screen", kind=bool),
        "tone": Key(True, "play a short quiet tone on each hit (never with SDL_AUDIODRIVER=dummy)", kind=bool),
        "tone_volume": Key(0.15, "peak level of the hit tone as a fraction of full scale", min=0, max=0.5),
        "fps": Key(60, "frames per second of the practice screen", kind=int, min=10, max=240),
    },
    "attempts": {
        "min_ms": Key(120.0, "shortest voiced run that counts as an attempt, milliseconds (shorter ones are kept, flagged)",
                      min=20, max=2000),
        "hangover_ms": Key(60.0, "unvoiced dip that does not split an attempt, milliseconds", min=0, max=500),
        "ignore_below_ms": Key(30.0, "voiced blips shorter than this are counted as noise, not attempts, milliseconds",
                               min=0, max=200),
        "max_s": Key(8.0, "longest attempt; a longer run is cut there and flagged, seconds", min=1, max=60),
        "min_level_db": Key(-50.0, "attempts quieter than this median level are flagged too quiet, dBFS",
                            min=-120, max=0),
        "min_measured_fraction": Key(0.5, "share of frames that must have F1 and F2 measured (0..1)", min=0, max=1),
        "steady_min_ms": Key(80.0, "shortest steady stretch the measures are taken over, milliseconds",
                             min=10, max=1000),
    },
    "session": {
        "clips": Key(True, "save a WAV clip of every attempt in the data folder (turn off for privacy)", kind=bool),
        "clip_pre_ms": Key(250.0, "audio kept before each attempt in its clip, milliseconds", min=0, max=2000),
        "clip_post_ms": Key(150.0, "audio kept after each attempt in its clip, milliseconds", min=0, max=2000),
    },
}


def defaults() -> dict[str, dict[str, Any]]:
    """The default settings as a nested dict (a fresh copy)."""
    return {sec: {k: copy.deepcopy(key.default) for k, key in keys.items()} for sec, keys in SCHEMA.items()}


def validate(data: Any, *, source: str) -> dict[str, dict[str, Any]]:
    """Check a (possibly partial) settings mapping against :data:`SCHEMA`.

    Parameters
    ----------
    data : mapping
        ``{section: {key: value}}``; missing sections and keys are allowed.
    source : str
        Where the data came from (a file path, ``"command line"``), used in messages.

    Returns
    -------
    dict
        The same data with values converted to their declared types.
    """
    if data is None:
        return {}
    if not isinstance(data, Mapping):
        raise UserError(f"{source}: expected sections such as 'analysis:' at the top level")
    out: dict[str, dict[str, Any]] = {}
    for sec, values in data.items():
        if sec not in SCHEMA:
            raise UserError(f"{source}: unknown section {sec!r} (known: {', '.join(SCHEMA)})")
        if values is None:
            continue
        if not isinstance(values, Mapping):
            raise UserError(f"{source}: section {sec!r} must hold key: value lines")
        out[sec] = {}
        for k, v in values.items():
            if k not in SCHEMA[sec]:
                raise UserError(f"{source}: unknown key {sec}.{k} (known: {', '.join(SCHEMA[sec])})")
            out[sec][k] = SCHEMA[sec][k].check(v, f"{source}: {sec}.{k}")
    return out


def merge(base: dict[str, dict[str, Any]], over: Mapping[str, Mapping[str, Any]]) -> dict[str, dict[str, Any]]:
    """Return ``base`` with the values of ``over`` laid on top (no mutation)."""
    out = copy.deepcopy(base)
    for sec, values in over.items():
        out.setdefault(sec, {}).update(values)
    return out


def user_config_path() -> Path:
    """Where a user's own ``config.yaml`` lives (it need not exist)."""
    env = os.environ.get("LIVEVOWEL_CONFIG")
    if env:
        return Path(env)
    from platformdirs import user_config_dir

    return Path(user_config_dir("livevowel")) / "config.yaml"


def load_file(path: Path) -> dict[str, dict[str, Any]]:
    """Read and validate a YAML config file."""
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise UserError(f"{path}: cannot read config file ({exc.strerror}); check the path") from None
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = f" line {mark.line + 1}" if mark is not None else ""
        raise UserError(f"{path}:{line} is not valid YAML; fix the file or remove it") from None
    return validate(data, source=str(path))


@dataclass
class Settings:
    """The effective settings of one run, with ``settings['analysis']['hop_ms']`` access."""

    values: dict[str, dict[str, Any]] = field(default_factory=defaults)
    #: where the values came from, in the order applied: "built-in defaults", then a
    #: config file's path if one was read, then "command line" if options were given
    sources: tuple[str, ...] = ("built-in defaults",)

    def __getitem__(self, section: str) -> dict[str, Any]:
        return self.values[section]

    def get(self, dotted: str) -> Any:
        """Value of ``"section.key"``."""
        sec, key = dotted.split(".", 1)
        return self.values[sec][key]


def load(*, config_file: str | os.PathLike | None = None,
         overrides: Mapping[str, Mapping[str, Any]] | None = None) -> Settings:
    """Build the effective settings.

    Parameters
    ----------
    config_file : path, optional
        A user config file given on the command line. When ``None``, the file
        at :func:`user_config_path` is used if it exists.
    overrides : mapping, optional
        ``{section: {key: value}}`` from command-line options; ``None`` values
        are ignored (option not given).
    """
    values = defaults()
    sources = ["built-in defaults"]
    path = Path(config_file) if config_file is not None else user_config_path()
    if config_file is not None or path.exists():
        values = merge(values, load_file(path))
        sources.append(str(path))
    if overrides:
        given = {sec: {k: v for k, v in kv.items() if v is not None} for sec, kv in overrides.items()}
        if any(given.values()):
            values = merge(values, validate(given, source="command line"))
            sources.append("command line")
    for sec, keys in values.items():  # cross-key checks
        if sec == "analysis" and keys["f0_min_hz"] >= keys["f0_max_hz"]:
            raise UserError("analysis.f0_min_hz must be below analysis.f0_max_hz")
        if sec == "analysis" and keys.get("voicing_on", 0) > keys.get("voicing_off", 1):
            raise UserError("analysis.voicing_on must not be above analysis.voicing_off")
    return Settings(values, tuple(sources))


def template() -> str:
    """The commented default config file (what ``config.yaml`` holds)."""
    lines = [
        "# livevowel settings: every default, with what it does.",
        "# Copy this file to your user config folder (see `livevowel config --path`)",
        "# or pass it with --config FILE, and keep only the keys you change.",
        "# Command-line options override both.",
        "",
    ]
    for sec, keys in SCHEMA.items():
        lines.append(f"{sec}:")
        for k, key in keys.items():
            lines.append(f"  # {key.help}")
            lines.append(f"  {k}: {yaml.safe_dump(key.default, default_flow_style=True).strip().removesuffix('...').strip()}")
        lines.append("")
    return "\n".join(lines)
