"""``livevowel bench``: speed and accuracy figures for this machine."""

from __future__ import annotations

import argparse

NAME = "bench"
SUMMARY = "measure speed, latency and accuracy on this machine"
DESCRIPTION = """\
Run the benchmarks and print their tables: per-hop time of the streaming
engine, offline real-time factor, accuracy against plain LPC, live-path
latency and render time, as each suite provides. Figures are percentiles and
ratios measured in one run, with the goal each is held against."""


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--only", metavar="SUITE", action="append",
                        help="run only this suite (repeatable); see --list")
    parser.add_argument("--list", action="store_true", help="list the suites and exit")
    parser.add_argument("--quick", action="store_true", help="smaller workloads (a smoke run, not a measurement)")
    parser.add_argument("--json", metavar="FILE", help="also write the figures as JSON to FILE")


def run(args: argparse.Namespace) -> int:
    import importlib
    import json

    from livevowel.benchmarks import SUITES
    from livevowel.errors import UserError
    from livevowel.fileio import write_text_atomic

    if args.list:
        for name in SUITES:
            print(name)
        return 0
    names = args.only or list(SUITES)
    unknown = [n for n in names if n not in SUITES]
    if unknown:
        raise UserError(f"unknown suite {unknown[0]!r}; known: {', '.join(SUITES) or 'none'}")

    def out(line: str) -> None:
        if args.quick:    # a smoke run's figures are no measurement: no verdict on them
            line = line.replace("MISSES goal", "(smoke run)").replace("meets goal", "(smoke run)")
        print(line)

    if args.quick:
        print("(--quick: smaller workloads, a smoke run; its figures are not measurements and get no verdict)")
    results = {}
    for name in names:
        print(f"== {name} ==")
        mod = importlib.import_module(f"livevowel.benchmarks.{SUITES[name]}")
        results[name] = mod.run(quick=args.quick, out=out)
        print()
    if args.json:
        write_text_atomic(args.json, json.dumps(results, indent=2) + "\n")
    return 0
