"""The virtual microphone for device tests (see .ci/virtual-mic.sh).

A private PulseAudio server with a null sink "vmic"; its monitor is recorded
through PortAudio's ALSA "pulse" device, and ``paplay -d vmic`` plays into it.
`.ci/run` starts it and exports PULSE_SERVER. Without it the device tests are
skipped with the reason; under CI=true they fail instead.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = ROOT / ".ci" / "virtual-mic.sh"
DEVICE = "pulse"


def _why_not() -> str | None:
    server = os.environ.get("PULSE_SERVER", "")
    if not server.startswith("unix:"):
        return "no virtual microphone: PULSE_SERVER is not set (run `.ci/virtual-mic.sh start` and export it)"
    for tool in ("pactl", "paplay"):
        if shutil.which(tool) is None:
            return f"no virtual microphone: {tool} is not installed (apt-get install pulseaudio-utils)"
    r = subprocess.run(["pactl", "info"], capture_output=True, text=True, timeout=10)
    if r.returncode != 0:
        return f"no virtual microphone: the sound server at {server} does not answer ({r.stderr.strip()})"
    try:
        import sounddevice as sd
    except OSError as exc:
        return f"no virtual microphone: PortAudio is missing ({exc}); apt-get install libportaudio2"
    names = [d["name"] for d in sd.query_devices() if d["max_input_channels"] > 0]
    if DEVICE not in names:
        return f"no virtual microphone: PortAudio lists no {DEVICE!r} input (inputs: {names}); apt-get install libasound2-plugins"
    return None


def require() -> None:
    """Skip (or, in CI, fail) unless the virtual microphone is up."""
    reason = _why_not()
    if reason is None:
        return
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail(reason + " -- CI must run the device tests")
    pytest.skip(reason)


def vmic_env() -> dict:
    """Environment for the helper script (its folder follows PULSE_SERVER)."""
    folder = Path(os.environ["PULSE_SERVER"][len("unix:"):]).parent
    return {**os.environ, "LIVEVOWEL_VMIC_DIR": str(folder)}


def play(path) -> subprocess.Popen:
    """Start playing a sound file into the virtual microphone."""
    return subprocess.Popen(["paplay", "-d", "vmic", str(path)], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


def unplug() -> None:
    """Remove the virtual device, as if it were unplugged."""
    subprocess.run(["bash", str(SCRIPT), "unplug"], check=True, env=vmic_env(), timeout=20)


def plug() -> None:
    """Bring the virtual device back."""
    subprocess.run(["bash", str(SCRIPT), "plug"], check=True, env=vmic_env(), timeout=20)
