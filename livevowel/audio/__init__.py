"""Audio input: sources, the live pipeline, input health.

Sources (all deliver :class:`Block` records with their capture time):

* :class:`MicrophoneSource` -- live capture through PortAudio (``sounddevice``).
* :class:`PacedFileSource` -- a recording played at a chosen pace through the same path.
* :class:`GeneratedVoiceSource` -- a synthetic voice rendered block by block.

:func:`open_source` / :func:`add_source_options` give every command the same
``--source mic | file:PATH | demo`` choice. :class:`LivePipeline` runs a
source through the streaming engine and hands results to a display through a
bounded queue; :class:`InputHealth` is what it reports about the input.

``sounddevice`` is imported only when a microphone is opened or listed.
"""

from livevowel.audio.base import Block, Sink, Source
from livevowel.audio.health import InputHealth
from livevowel.audio.options import add_source_options, open_source, source_from_args
from livevowel.audio.paced import GeneratedVoiceSource, PacedFileSource
from livevowel.audio.rqueue import DropOldestQueue


def __getattr__(name: str):
    # Lazy: importing these pulls in sounddevice / the engine.
    if name == "MicrophoneSource":
        from livevowel.audio.mic import MicrophoneSource
        return MicrophoneSource
    if name in ("LivePipeline", "LiveSettings"):
        from livevowel.audio import pipeline
        return getattr(pipeline, name)
    raise AttributeError(f"module 'livevowel.audio' has no attribute {name!r}")


__all__ = [
    "Block", "Sink", "Source", "InputHealth", "DropOldestQueue",
    "PacedFileSource", "GeneratedVoiceSource", "MicrophoneSource",
    "LivePipeline", "LiveSettings", "add_source_options", "open_source", "source_from_args",
]
