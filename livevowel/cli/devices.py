"""``livevowel devices``: the input devices PortAudio can record from."""

from __future__ import annotations

import argparse

NAME = "devices"
SUMMARY = "list the input devices (index, name, host API, channels, rate)"
DESCRIPTION = """\
List every device that can record, with the index and name that --device
accepts (an index, or any unique part of the name). The system's default
input is marked with '*'. livevowel records at the device's own default rate
and resamples inside; with several channels it downmixes them to mono unless
--channel picks one."""


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print the list as JSON")


def run(args: argparse.Namespace) -> int:
    import json
    from dataclasses import asdict

    from livevowel.audio.devices import list_input_devices, no_input_message

    devices = list_input_devices()
    if args.json:
        print(json.dumps([asdict(d) for d in devices], indent=1))
        return 0
    if not devices:
        print(no_input_message())
        return 1
    wname = max(4, max(len(d.name) for d in devices))
    wapi = max(8, max(len(d.host_api) for d in devices))
    print(f"  {'index':>5}  {'name':<{wname}}  {'host API':<{wapi}}  {'channels':>8}  {'rate Hz':>8}")
    for d in devices:
        mark = "*" if d.is_default else " "
        print(f"{mark} {d.index:>5}  {d.name:<{wname}}  {d.host_api:<{wapi}}  {d.channels:>8}  {d.default_rate_hz:>8.0f}")
    print("(* default input)")
    return 0
