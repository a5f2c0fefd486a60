"""``livevowel listen``: the live path in a terminal."""

from __future__ import annotations

import argparse
import math
import sys
import time

NAME = "listen"
SUMMARY = "show F0, F1-F3, level and input state live; save frames and audio"
DESCRIPTION = """\
Listen to the input and show, updating in place, the fundamental frequency,
the first three formants, the input level and the state of the input
(noise floor, SNR, clipping, overflows, dropped results, lag). When standard
output is not a terminal, one plain line is printed every half second.

--frames writes every analysis frame as CSV (the columns of `livevowel
analyze`; empty cells where nothing was measured); --record writes the
captured audio as 16-bit WAV at the device's rate. Both files are written
atomically when the session ends: after --seconds, at the end of a file or
demo source, or on Ctrl-C.

If the device disappears the session keeps what it has measured, says
"input lost" and tries again every couple of seconds.

livevowel is a practice and feedback tool, not a diagnostic or medical
device. Stop if speaking hurts or your voice turns hoarse."""
EPILOG = """\
examples:
  livevowel listen                                  default microphone
  livevowel listen --device 2 --channel 1           first channel of device 2
  livevowel listen --source file:take1.wav --frames take1.csv
  livevowel listen --source demo --seconds 10"""

#: Seconds between screen updates (terminal) and between plain lines (pipe).
TTY_UPDATE_S = 0.05
PLAIN_UPDATE_S = 0.5


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.audio.options import add_source_options
    from livevowel.cli import add_config_option

    add_source_options(parser)
    parser.add_argument("--seconds", metavar="N", type=float,
                        help="stop after N seconds of input (wall-clock seconds for a microphone)")
    parser.add_argument("--frames", metavar="OUT.csv", help="write the frames to this CSV file")
    parser.add_argument("--record", metavar="OUT.wav", help="write the captured audio to this WAV file")
    add_config_option(parser)


def _num(v: float, fmt: str = "4.0f") -> str:
    if v is None or not math.isfinite(v):
        return "-" * int(fmt.split(".")[0] or 1)
    return format(0.0 if float(format(v, fmt)) == 0 else v, fmt)      # no "-0"


def status_line(t_s: float, frame, health) -> str:
    """One line: time, state, F0, F1-F3, level and input health."""
    voiced = frame is not None and frame.voiced
    f = (lambda name: getattr(frame, name) if voiced else math.nan)
    parts = [
        f"{t_s:7.2f} s",
        f"{health.state:<10}",
        f"F0 {_num(f('f0_hz'))}",
        f"F1 {_num(f('f1_hz'))}",
        f"F2 {_num(f('f2_hz'))}",
        f"F3 {_num(f('f3_hz'))} Hz",
        f"level {_num(health.level_db, '6.1f')} dBFS",
        f"floor {_num(health.room_floor_db, '4.0f')}",
        f"SNR {_num(health.snr_db, '3.0f')} dB",
    ]
    if health.clipping:
        parts.append("CLIPPING")
    parts.append(f"overflows {health.overflows}")
    parts.append(f"dropped {health.dropped + health.dropped_blocks}")
    if health.lag_s >= 0.05:
        parts.append(f"lag {health.lag_s:.2f} s")
    if health.message and health.state == "input lost":
        parts.append("(retrying)")
    return "  ".join(parts)


def run(args: argparse.Namespace) -> int:
    import shutil
    from pathlib import Path

    from livevowel import config
    from livevowel.audio.options import source_from_args
    from livevowel.audio.pipeline import LivePipeline, LiveSettings
    from livevowel.cli import caution_if_live
    from livevowel.dsp.engine import AnalysisSettings
    from livevowel.dsp.types import FrameTrack
    from livevowel.errors import RunFailure, UserError
    from livevowel.framesio import write_frames_csv

    if args.seconds is not None and not args.seconds > 0:
        raise UserError(f"--seconds must be positive, got {args.seconds}")
    for opt, path in (("--frames", args.frames), ("--record", args.record)):
        if path is not None and not Path(path).resolve().parent.is_dir():
            raise UserError(f"{opt} {path}: folder {Path(path).parent} does not exist; create it first")
    settings = config.load(config_file=args.config)
    analysis = AnalysisSettings.from_config(settings)
    live = LiveSettings.from_config(settings)
    source = source_from_args(args, live=live)
    caution_if_live(args)
    pipeline = LivePipeline(source, settings=analysis, live=live, record_to=args.record)

    tty = sys.stdout.isatty()
    frames: list = []
    last = None
    t_start = time.monotonic()
    next_plain = 0.0
    interrupted = False
    try:
        pipeline.start()
        while True:
            time.sleep(TTY_UPDATE_S)
            new = pipeline.drain()
            if new:
                frames.extend(new)
                last = new[-1]
            h = pipeline.health()
            elapsed = time.monotonic() - t_start
            shown_t = last.time_s if last is not None else 0.0
            if tty:
                width = max(20, shutil.get_terminal_size().columns - 1)   # one screen line, or \r cannot rewrite it
                sys.stdout.write("\r" + status_line(shown_t, last, h)[:width] + "\x1b[K")
                sys.stdout.flush()
            elif elapsed >= next_plain:
                print(status_line(shown_t, last, h), flush=True)
                next_plain = elapsed + PLAIN_UPDATE_S
            if pipeline.done:
                break
            if args.seconds is not None:
                took = elapsed if source.live else h.seconds
                if took >= args.seconds:
                    break
    except KeyboardInterrupt:
        interrupted = True
    finally:
        pipeline.stop()
        frames.extend(pipeline.drain())
        if tty:
            sys.stdout.write("\n")
    if args.seconds is not None and not source.live:
        frames = [f for f in frames if f.time_s <= args.seconds]
    track = FrameTrack.from_frames(frames)
    if args.frames:
        write_frames_csv(args.frames, track)
    h = pipeline.health()
    voiced = int(track.voiced.sum()) if len(track) else 0
    summary = (f"{'stopped' if interrupted else 'done'}: {len(track)} frames ({voiced} voiced) over {h.seconds:.1f} s "
               f"of input; overflows {h.overflows}, dropped results {h.dropped}, dropped blocks {h.dropped_blocks}; "
               f"lead-in floor {_num(h.noise_floor_db, '.1f')} dBFS"
               f"{'' if h.floor_used else ' (louder than a room: not used for voicing)'}, "
               f"room floor {_num(h.room_floor_db, '.1f')} dBFS, SNR {_num(h.snr_db, '.1f')} dB")
    print(summary, file=sys.stderr)
    for opt, path in (("frames", args.frames), ("audio", args.record)):
        if path:
            print(f"{opt} written to {path}", file=sys.stderr)
    if pipeline.error is not None:
        raise RunFailure(f"the analysis stopped: {pipeline.error}; what was measured before was saved")
    if getattr(source, "error", None) is not None:
        raise RunFailure(f"{source.name}: {source.error}; what was measured before was saved")
    return 0
