"""``livevowel config``: show the settings and where they come from."""

from __future__ import annotations

import argparse

NAME = "config"
SUMMARY = "show the effective settings, the default file, or the user config path"
DESCRIPTION = """\
Show livevowel's settings. With no option, prints the effective settings
(defaults, then your config file), headed by a comment that names the
files they were read from. --template prints the commented default
file (the same text as config.yaml in the source tree)."""


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.cli import add_config_option

    add_config_option(parser)
    g = parser.add_mutually_exclusive_group()
    g.add_argument("--template", action="store_true", help="print the commented default config file")
    g.add_argument("--path", action="store_true", help="print where your own config.yaml is read from")


def run(args: argparse.Namespace) -> int:
    import yaml

    from livevowel import config

    if args.template:
        print(config.template(), end="")
    elif args.path:
        print(config.user_config_path())
    else:
        settings = config.load(config_file=args.config)
        print(f"# read from: {', '.join(settings.sources)}")
        if len(settings.sources) == 1:
            print(f"# (no config file at {config.user_config_path()}; `livevowel config --template` makes one)")
        print(yaml.safe_dump(settings.values, sort_keys=False), end="")
    return 0
