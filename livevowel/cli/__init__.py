"""The ``livevowel`` command line: a thin shell over the library.

Each command lives in its own module under :mod:`livevowel.cli` and exposes

* ``NAME`` -- the command word,
* ``SUMMARY`` -- one line for ``livevowel --help``,
* ``configure(parser)`` -- adds its options (keep imports here light),
* ``run(args) -> int`` -- does the work; heavy imports go inside.

Errors meant for the user are :class:`~livevowel.errors.UserError`; they are
printed as one line, without a traceback, and set the exit status.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from typing import Sequence

from livevowel import __version__
from livevowel.errors import UserError

#: Command modules in the order ``--help`` lists them.
COMMAND_MODULES: tuple[str, ...] = (
    "analyze",
    "listen",
    "devices",
    "targets",
    "practice",
    "demo",
    "drill",
    "review",
    "sessions",
    "export",
    "report",
    "bench",
    "config_cmd",
)

DESCRIPTION = """\
livevowel measures vowel formants (F1, F2, F3) from a microphone or a
recording and shows where each vowel lands against target regions.

It is a practice and feedback tool, not a diagnostic or medical device."""

EPILOG = """\
Run 'livevowel COMMAND --help' for the options of one command.
Settings come from config.yaml defaults, your own config file, then options."""


def build_parser() -> argparse.ArgumentParser:
    """The full argument parser, with every command's sub-parser."""
    parser = argparse.ArgumentParser(
        prog="livevowel",
        description=DESCRIPTION,
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"livevowel {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", title="commands")
    for modname in COMMAND_MODULES:
        mod = importlib.import_module(f"livevowel.cli.{modname}")
        p = sub.add_parser(
            mod.NAME,
            help=mod.SUMMARY,
            description=getattr(mod, "DESCRIPTION", mod.SUMMARY),
            epilog=getattr(mod, "EPILOG", None),
            formatter_class=argparse.RawDescriptionHelpFormatter,
        )
        mod.configure(p)
        p.set_defaults(_run=mod.run, _parser=p)
    return parser


def add_config_option(parser: argparse.ArgumentParser) -> None:
    """Add the shared ``--config FILE`` option to a command's parser."""
    parser.add_argument("--config", metavar="FILE",
                        help="read settings from FILE (default: your user config.yaml if present)")


def caution_if_live(args: argparse.Namespace) -> bool:
    """Print the caution (standard error) when the input is the microphone: someone is about
    to speak. Returns whether it was printed. Files and the demo voice get none."""
    from livevowel import CAUTION

    live = (getattr(args, "source", None) or "mic") == "mic"
    if live:
        print(CAUTION, file=sys.stderr, flush=True)
    return live


#: Commands that run the analysis engine (its compiled kernels are readied first).
ENGINE_COMMANDS = frozenset({"analyze", "listen", "practice", "demo", "drill", "review", "bench"})


def _prepare_engine() -> None:
    """Ready the engine's compiled kernels; if that takes a while (compiling, on the first
    run on a machine or after an upgrade), say why the start is slow."""
    import threading

    from livevowel.dsp.engine import warm_up

    note = threading.Timer(1.0, lambda: print(
        "livevowel: compiling the analysis engine (first run after installing; about half a minute)...",
        file=sys.stderr, flush=True))
    note.daemon = True
    note.start()
    try:
        warm_up()
    finally:
        note.cancel()


def _stop_on_terminate():
    """SIGTERM (a service manager, ``kill``) stops a run the way Ctrl-C does: what is open is
    closed and stamped, not cut off. Only from the main thread (where signals are handled);
    returns the handler it replaced (None if it set none), for :func:`main` to put back."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "SIGTERM"):
        return None

    def stop(signum, frame):
        _terminated.append(signum)
        raise KeyboardInterrupt

    return signal.signal(signal.SIGTERM, stop)


#: Signals that stopped this process's run (main's exit status is then 128 + the signal, not 130).
_terminated: list = []


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``livevowel`` console script; returns the exit status."""
    parser = build_parser()
    args, extra = parser.parse_known_args(argv)
    if extra:
        sub = getattr(args, "_parser", parser)
        sub.error(f"unrecognized arguments: {' '.join(extra)}")
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    previous = _stop_on_terminate()
    _terminated.clear()
    try:
        if args.command in ENGINE_COMMANDS:
            _prepare_engine()
        rc = int(args._run(args) or 0)
        # a run stopped by SIGTERM ends as Ctrl-C's does, but says so in its status (143)
        return 128 + _terminated[0] if _terminated and rc == 130 else rc
    except UserError as exc:
        print(f"livevowel {args.command}: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt as exc:
        print(f"livevowel {args.command}: stopped", file=sys.stderr)
        shot = getattr(getattr(exc, "result", None), "screenshot", None)   # a stopped screen's last picture
        if shot is not None:
            print(f"screenshot: {shot}")
        return 128 + _terminated[0] if _terminated else 130
    except BrokenPipeError:  # e.g. `livevowel ... | head`
        return 0
    finally:
        if previous is not None:
            import signal

            signal.signal(signal.SIGTERM, previous)
