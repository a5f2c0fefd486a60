"""Input devices as PortAudio sees them, and picking one by index or name.

``sounddevice`` (and the PortAudio library under it) is imported only here
and in :mod:`livevowel.audio.mic`, and only when a device is needed, so the
file and demo sources work on machines without PortAudio.
"""

from __future__ import annotations

from dataclasses import dataclass

from livevowel.errors import RunFailure, UserError

#: What to try when no microphone can be used.
ALTERNATIVES = "use --source file:PATH to play a recording through the live path, or --source demo for the generated voice"


def import_sounddevice():
    """Import and return the ``sounddevice`` module.

    Raises
    ------
    UserError
        When the PortAudio library is missing (``sounddevice`` raises
        ``OSError`` at import), naming the system package to install.
    """
    try:
        import sounddevice
    except OSError as exc:
        raise RunFailure(f"the PortAudio library was not found ({exc}); install the system package libportaudio2 "
                         f"(e.g. sudo apt-get install libportaudio2), or {ALTERNATIVES}") from None
    except ImportError:
        raise RunFailure(f"the Python package sounddevice is not installed (pip install sounddevice), or {ALTERNATIVES}") \
            from None
    return sounddevice


@dataclass(frozen=True)
class InputDevice:
    """One device that can record.

    Attributes
    ----------
    index : int
        PortAudio device index (what ``--device N`` takes).
    name : str
        Device name.
    host_api : str
        Host API name (ALSA, PulseAudio, Core Audio, WASAPI ...).
    channels : int
        Maximum input channels.
    default_rate_hz : float
        The device's default sample rate, Hz (livevowel records at this rate).
    is_default : bool
        The system's default input.
    """

    index: int
    name: str
    host_api: str
    channels: int
    default_rate_hz: float
    is_default: bool


def list_input_devices(sd=None) -> list[InputDevice]:
    """Every device with at least one input channel, in PortAudio order."""
    sd = sd or import_sounddevice()
    try:
        devices = sd.query_devices()
        apis = sd.query_hostapis()
    except sd.PortAudioError as exc:
        raise RunFailure(f"PortAudio cannot list devices ({exc}); {ALTERNATIVES}") from None
    try:
        default_in = int(sd.default.device[0])
    except (TypeError, ValueError, IndexError):
        default_in = -1
    out = []
    for d in devices:
        if int(d["max_input_channels"]) < 1:
            continue
        out.append(InputDevice(index=int(d["index"]), name=str(d["name"]),
                               host_api=str(apis[d["hostapi"]]["name"]), channels=int(d["max_input_channels"]),
                               default_rate_hz=float(d["default_samplerate"]), is_default=int(d["index"]) == default_in))
    return out


def all_device_names(sd=None) -> list[str]:
    """Names of every device PortAudio sees, inputs or not (for messages)."""
    sd = sd or import_sounddevice()
    try:
        return [f"{d['name']} ({d['max_input_channels']} in, {d['max_output_channels']} out)" for d in sd.query_devices()]
    except sd.PortAudioError:
        return []


def no_input_message(sd=None) -> str:
    """The one-line message for a machine with no input device."""
    seen = all_device_names(sd)
    what = f"PortAudio sees only {', '.join(seen)}" if seen else "PortAudio sees no audio device at all"
    hint = "" if seen else ("is the sound server (PulseAudio or PipeWire) running, and the microphone plugged in? "
                            "Otherwise ")
    return f"no input device found ({what}); {hint}{ALTERNATIVES}"


def describe_devices(devices: list[InputDevice]) -> str:
    """One line per device, for messages."""
    if not devices:
        return "none"
    return "; ".join(f"{d.index} {d.name!r}" for d in devices)


def resolve_device(spec: "str | int | None", devices: list[InputDevice]) -> InputDevice:
    """Pick an input device.

    Parameters
    ----------
    spec : int, str or None
        ``None``: the default input (or the first input if none is marked).
        An integer (or a string of digits): that PortAudio index. Anything
        else: a case-insensitive part of the name; an exact name wins, and a
        part that matches several devices is an error naming them.

    Raises
    ------
    UserError
        No input device at all, unknown index, or no / several name matches.
    """
    if not devices:
        raise UserError(f"no input device found (PortAudio lists no device that can record); {ALTERNATIVES}")
    if spec is None or (isinstance(spec, str) and spec.strip() == ""):
        for d in devices:
            if d.is_default:
                return d
        return devices[0]
    text = str(spec).strip()
    if text.lstrip("-").isdigit():
        idx = int(text)
        for d in devices:
            if d.index == idx:
                return d
        raise UserError(f"no input device with index {idx}; inputs are: {describe_devices(devices)} "
                        "(see `livevowel devices`)")
    exact = [d for d in devices if d.name.lower() == text.lower()]
    if exact:
        return exact[0]
    part = [d for d in devices if text.lower() in d.name.lower()]
    if len(part) == 1:
        return part[0]
    if not part:
        raise UserError(f"no input device named like {text!r}; inputs are: {describe_devices(devices)} "
                        f"(see `livevowel devices`), or {ALTERNATIVES}")
    raise UserError(f"{text!r} matches several input devices: {describe_devices(part)}; give the index or more of the name")
