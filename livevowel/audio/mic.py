"""Live capture from a microphone through PortAudio (``sounddevice``).

The PortAudio callback only copies the block out of the device buffer (a few
kilobytes), stamps it and hands it to the sink; analysis happens elsewhere.
A watchdog thread notices a device that stops delivering (unplugged, server
gone), reports "lost", retries every ``retry_s`` seconds and resumes when the
device is back, starting a new segment whose time continues on the wall clock.
"""

from __future__ import annotations

import threading
import time

import numpy as np

from livevowel.audio.base import Block, Sink, Source
from livevowel.audio.devices import (ALTERNATIVES, InputDevice, import_sounddevice, list_input_devices,
                                    no_input_message, resolve_device)
from livevowel.errors import UserError

#: Callback durations kept for percentiles (a ring; older ones are overwritten).
DURATION_RING = 8192


class MicrophoneSource(Source):
    """A live input device.

    Parameters
    ----------
    device : int or str, optional
        PortAudio index or part of the device name (see :func:`resolve_device`);
        default: the system's default input.
    channel : int, optional
        0-based input channel to use; default: all channels (up to 2), which
        the pipeline downmixes to mono.
    rate_hz : float, keyword-only, optional
        Sample rate in Hz; default the device's own rate (44.1 or 48 kHz on
        most hardware; the engine resamples).
    block_s : float, keyword-only
        Block (callback) length in seconds, default 0.005.
    latency : str or float, keyword-only
        PortAudio latency hint ("low", "high" or seconds), default "low".
    lost_after_s : float, keyword-only
        No callback for this long (or a stream that stopped by itself) means the input is lost. Default 1.0.
    retry_s : float, keyword-only
        Seconds between attempts to reopen a lost device. Default 2.0.
    startup_s : float, keyword-only
        Time allowed for the first block after opening, seconds (some servers
        start slowly). Default 5.0.

    Raises
    ------
    UserError
        No PortAudio library, no input device, unknown device, bad channel.
    """

    live = True

    def __init__(self, device: "int | str | None" = None, channel: int | None = None, *,
                 rate_hz: float | None = None, block_s: float = 0.005, latency: "str | float" = "low",
                 lost_after_s: float = 1.0, retry_s: float = 2.0, startup_s: float = 5.0) -> None:
        self._sd = import_sounddevice()
        inputs = list_input_devices(self._sd)
        if not inputs:
            raise UserError(no_input_message(self._sd))
        self.device: InputDevice = resolve_device(device, inputs)
        if channel is not None:
            channel = int(channel)
            if not 0 <= channel < self.device.channels:
                raise UserError(f"channel {channel + 1} does not exist on {self.device.name!r} "
                                f"(it has {self.device.channels}); use --channel 1..{self.device.channels}")
        self.channel = channel
        self.rate_hz = float(rate_hz or self.device.default_rate_hz)
        if not 0.001 <= block_s <= 0.5:
            raise ValueError(f"block_s must be 0.001..0.5 s, got {block_s}")
        self.blocksize = max(1, int(round(block_s * self.rate_hz)))
        self._open_channels = channel + 1 if channel is not None else min(self.device.channels, 2)
        self.channels = 1 if channel is not None else self._open_channels
        self.pace = 1.0
        self.name = f"microphone {self.device.name!r}"
        self.latency = latency
        self.lost_after_s = float(lost_after_s)
        self.retry_s = float(retry_s)
        self.startup_s = float(startup_s)
        # callback state (written by the PortAudio thread only)
        self._count = 0
        self._segment = 0
        self._t_offset = 0.0
        self._last_cb = 0.0
        self._got_first = False
        self.callback_durations = np.zeros(DURATION_RING)
        self.callback_count = 0
        self.overflows = 0
        # control state
        self._sink: Sink | None = None
        self._stream = None
        self._lock = threading.Lock()      # stream open/close only (never taken by the callback)
        self._stop = threading.Event()
        self._watchdog: threading.Thread | None = None
        self._session_t0 = 0.0
        self._opened_at = 0.0
        self.state = "idle"                # idle | running | lost | stopped
        self.reported_latency_s = float("nan")

    # PortAudio callback ---------------------------------------------------
    def _callback(self, indata, frames, time_info, status) -> None:
        t0 = time.perf_counter()
        now = time.monotonic()
        if self.channel is not None:
            x = indata[:, self.channel:self.channel + 1].copy()
        else:
            x = indata.copy()
        overflow = bool(status.input_overflow)
        if overflow:
            self.overflows += 1
        blk = Block(samples=x, rate_hz=self.rate_hz, start_time_s=self._t_offset + self._count / self.rate_hz,
                    received_s=now, segment=self._segment, overflow=overflow)
        self._count += frames
        self._last_cb = now
        self._got_first = True
        sink = self._sink
        if sink is not None:
            sink.on_block(blk)
        self.callback_durations[self.callback_count % DURATION_RING] = time.perf_counter() - t0
        self.callback_count += 1

    # stream handling --------------------------------------------------------
    def _open_stream(self) -> None:
        sd = self._sd
        stream = sd.InputStream(device=self.device.index, samplerate=self.rate_hz, blocksize=self.blocksize,
                                channels=self._open_channels, dtype="float32", latency=self.latency,
                                callback=self._callback)
        self._got_first = False
        self._opened_at = time.monotonic()
        stream.start()
        self._stream = stream
        try:
            self.reported_latency_s = float(stream.latency)
        except (TypeError, ValueError):
            pass

    def _close_stream(self) -> None:
        stream, self._stream = self._stream, None
        if stream is None:
            return
        for op in (stream.abort, stream.close):
            try:
                op()
            except Exception:  # a vanished device may refuse; nothing more to do
                pass

    def _refresh_device(self) -> None:
        """Re-scan devices (PortAudio caches its list) and find ours again by name."""
        sd = self._sd
        try:
            sd._terminate()
            sd._initialize()
        except Exception:
            pass
        devs = list_input_devices(sd)
        for d in devs:
            if d.name == self.device.name:
                self.device = d
                return
        raise UserError(f"input device {self.device.name!r} is not present")

    def start(self, sink: Sink) -> None:
        if self._sink is not None:
            raise RuntimeError("the microphone source was already started")
        self._sink = sink
        self._session_t0 = time.monotonic()
        with self._lock:
            try:
                self._open_stream()
            except self._sd.PortAudioError as exc:
                self._sink = None
                raise UserError(f"cannot open {self.name} at {self.rate_hz:g} Hz ({exc}); try another --device, "
                                f"or {ALTERNATIVES}") from None
            self.state = "running"
        sink.on_event("started", self.name)
        self._watchdog = threading.Thread(target=self._watch, name="livevowel-mic-watchdog", daemon=True)
        self._watchdog.start()

    def _watch(self) -> None:
        next_retry = 0.0
        while not self._stop.wait(0.1):
            now = time.monotonic()
            with self._lock:
                if self._stop.is_set():
                    break
                if self.state == "running":
                    stream = self._stream
                    silent_for = now - (self._last_cb if self._got_first else self._opened_at)
                    limit = self.lost_after_s if self._got_first else self.startup_s
                    if stream is None or not stream.active or silent_for > limit:
                        self._close_stream()
                        self.state = "lost"
                        next_retry = now + self.retry_s
                        self._sink.on_event("lost", f"input lost: {self.name} stopped delivering; "
                                                    f"retrying every {self.retry_s:g} s")
                elif self.state == "lost" and now >= next_retry:
                    next_retry = now + self.retry_s
                    try:
                        try:
                            self._open_stream_next_segment()
                        except Exception:
                            self._refresh_device()
                            self._open_stream_next_segment()
                    except Exception:
                        self._close_stream()
                        continue
                    self.state = "running"
                    self._sink.on_event("resumed", f"input back: {self.name}")

    def _open_stream_next_segment(self) -> None:
        self._segment += 1
        self._count = 0
        self._t_offset = time.monotonic() - self._session_t0
        self._open_stream()

    def stop(self) -> None:
        self._stop.set()
        w = self._watchdog
        if w is not None and w is not threading.current_thread():
            w.join(timeout=5.0)
        with self._lock:
            self._close_stream()
            self.state = "stopped"

    @property
    def finished(self) -> bool:
        return self.state == "stopped"
