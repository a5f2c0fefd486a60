"""livevowel: real-time vowel formant feedback.

Layers, bottom to top:

* :mod:`livevowel.dsp` -- pure signal processing on numpy arrays (no devices,
  files or screens).
* :mod:`livevowel.audio` -- input sources (microphone, paced recording,
  generated voice) that feed the streaming engine.
* session logic -- target sets, speaker profiles, attempts, drills, storage.
* thin shells -- the pygame screen and the command line.
"""

import os as _os

__version__ = "0.1.0"

# pygame prints a greeting on import unless told not to; livevowel's output is its own.
_os.environ.setdefault("PYGAME_HIDE_SUPPORT_PROMPT", "1")

CAUTION = (
    "livevowel is a practice and feedback tool, not a diagnostic or medical device. "
    "Stop if speaking hurts or your voice turns hoarse. "
    "Decisions about treatment belong to a licensed clinician. "
    "Keep any audio cues at a comfortable, low volume."
)
