"""``livevowel targets``: list, show and check vowel target sets.

Other commands that take a target set should call
:func:`add_targets_option` in their ``configure`` and
:func:`livevowel.targets.load_target_set` on the value, so every command
accepts a shipped set's name or the path of a YAML file the same way.
"""

from __future__ import annotations

import argparse

NAME = "targets"
SUMMARY = "list, show and check vowel target sets"
DESCRIPTION = """\
Work with target sets: the vowel targets (centre and region in the F1-F2
plane) that a speaker aims at. A set is named by a shipped set's name (see
'livevowel targets list') or by the path of a YAML file of your own; the
file format is described in targets/README.md.

  livevowel targets list                 shipped sets, one a line
  livevowel targets show SET             table of a set's targets
  livevowel targets check FILE...        validate set files
  livevowel targets calibrate PROFILE    make or update a speaker profile

Values in the shipped sets come from published tables; sets whose numbers
were entered from memory say so, and so does an assumed spread."""
EPILOG = """\
exit status: 0 on success, 2 when a set is missing or invalid.

examples:
  livevowel targets show gae-women
  livevowel targets show gae-men --profile me.yaml --scale bark
  livevowel targets check my-accent.yaml
  livevowel targets calibrate s07.yaml --speaker S07 --group adult_female \\
      --set gae-men --token i=437,2761 --token ɑ=936,1551 --token u=459,1105
  livevowel targets calibrate s07.yaml --speaker S07 --group adult_female \\
      --set gae-men --listen                       # say the vowels when asked"""


def add_targets_option(parser: argparse.ArgumentParser, *, default: str | None = None,
                       required: bool = False, flag: str = "--targets") -> None:
    """Add ``--targets SET`` (a shipped set's name or a YAML path) to a command's parser.

    Read the value with :func:`livevowel.targets.load_target_set`.
    """
    extra = f" (default: {default})" if default else ""
    parser.add_argument(flag, metavar="SET", default=default, required=required,
                        help=f"target set: a shipped set's name or a YAML file{extra}; "
                             "see 'livevowel targets list'")


def configure(parser: argparse.ArgumentParser) -> None:
    sub = parser.add_subparsers(dest="action", metavar="ACTION", title="actions")
    sub.required = True
    p = sub.add_parser("list", help="list the shipped target sets",
                       description="List the shipped target sets: name, speaker group, number of "
                                   "targets, whether values were entered from memory, and title.")
    p.add_argument("--paths", action="store_true", help="print each set's file path instead of its title")
    p = sub.add_parser("show", help="print a set's targets as a table",
                       description="Print a target set's description and a table of its targets: id, IPA, "
                                   "example words, F1, F2, F3, spread (SDs and correlation) and hit size.")
    p.add_argument("set", metavar="SET", help="a shipped set's name or a YAML file")
    p.add_argument("--profile", metavar="FILE", help="map the set into this speaker profile's space first")
    p.add_argument("--scale", choices=("hz", "bark", "erb", "mel"), default="hz",
                   help="units for the F1-F3 columns (default hz; spreads stay in Hz)")
    p = sub.add_parser("check", help="validate target set files",
                       description="Load each set and report 'ok' or the first problem found (file, target "
                                   "id and key). Exit status 2 if any set fails.")
    p.add_argument("files", metavar="FILE", nargs="+", help="YAML files (or shipped set names)")
    p = sub.add_parser(
        "calibrate", help="make or update a speaker profile from measured vowels",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Make a speaker profile from calibration vowels measured in Hz, or add vowels to an\n"
                    "existing one, and print the transform. Give at least /i/, /a/ or /ɑ/, and /u/;\n"
                    "with five or more different vowels the transform has one factor per formant.\n"
                    "Each --token is VOWEL=F1,F2[,F3] where VOWEL is a target id, IPA symbol or\n"
                    "lexical set of the reference set. The file is written atomically.\n\n"
                    "With --listen the vowels are measured instead: each is asked for in turn\n"
                    "(--takes times; by default the set's /i/, /a/ or /ɑ/, and /u/), said into the\n"
                    "microphone (or read from --source file:PATH), measured on its steady part as\n"
                    "in drills, and asked again when the take was too short, clipped or too quiet.\n"
                    "Say each vowel on its own, steadily, for about half a second. Stop if\n"
                    "speaking hurts or your voice turns hoarse.")
    p.add_argument("profile", metavar="PROFILE", help="profile YAML file (created when missing)")
    p.add_argument("--token", metavar="VOWEL=F1,F2[,F3]", action="append",
                   help="one measured vowel in Hz (repeat for each)")
    p.add_argument("--listen", action="store_true", help="measure the vowels from the input, prompting each")
    p.add_argument("--vowels", metavar="V,V,...",
                   help="with --listen: the vowels to ask for (ids, IPA or keywords; default the corners)")
    p.add_argument("--takes", metavar="N", type=int, help="with --listen: takes per vowel, 1-10 (default 2)")
    p.add_argument("--wait", metavar="S", type=float,
                   help="with --listen: give up after S seconds with no voice (default 30)")
    from livevowel.audio.options import add_source_options
    from livevowel.cli import add_config_option

    add_source_options(p, source_default=None)
    add_config_option(p)
    add_targets_option(p, flag="--set")
    p.add_argument("--speaker", metavar="ID", help="pseudonymous speaker code (new profile)")
    p.add_argument("--group", choices=("adult_male", "adult_female", "child", "any"),
                   help="the speaker's voice group (new profile)")
    p.add_argument("--method", choices=("auto", "nearey-shared", "nearey-per-formant"), default=None,
                   help="transform (default auto, or the profile's own)")


def run(args: argparse.Namespace) -> int:
    return {"list": _list, "show": _show, "check": _check, "calibrate": _calibrate}[args.action](args)


def _list(args: argparse.Namespace) -> int:
    from livevowel.errors import UserError
    from livevowel.targets import load_target_set, shipped_sets, targets_dir

    sets = shipped_sets()
    if not sets:
        raise UserError(f"no target sets found in {targets_dir()}")
    rows = []
    for name, path in sets.items():
        try:
            ts = load_target_set(path)
        except UserError as exc:
            rows.append((name, "?", "?", "?", f"INVALID: {exc}"))
            continue
        rows.append((name, ts.group, str(len(ts)), "yes" if ts.from_memory else "no",
                     str(path) if args.paths else ts.title))
    _table(("NAME", "GROUP", "N", "MEMORY", "PATH" if args.paths else "TITLE"), rows, right={2})
    return 0


def _show(args: argparse.Namespace) -> int:
    import textwrap

    from livevowel.dsp.scales import SCALE_UNITS, scale_by_name
    from livevowel.targets import load_target_set

    ts = load_target_set(args.set)
    if args.profile:
        from livevowel.profile import load_profile

        prof = load_profile(args.profile)
        tr = prof.transform_for(ts)
        ts = prof.map_set(ts)
        mapped = (f"mapped to speaker {prof.speaker_id} ({tr.method}, factors "
                  f"F1 x{tr.factors[0]:.3f}, F2 x{tr.factors[1]:.3f}, F3 x{tr.factors[2]:.3f})")
    else:
        mapped = None
    fwd, _ = scale_by_name(args.scale)
    unit = SCALE_UNITS[args.scale]
    wrap = lambda label, text: textwrap.fill(  # noqa: E731
        text, width=78, initial_indent=f"{label:<9}", subsequent_indent=" " * 9)
    print(wrap("set", f"{ts.id}: {ts.title}"))
    print(wrap("accent", ts.accent))
    print(wrap("group", ts.group))
    print(wrap("source", ts.source + (f" ({ts.source_table})" if ts.source_table else "")))
    if ts.from_memory:
        print(wrap("", "Values entered from memory: check them against the source."))
    if ts.spread_assumption:
        print(wrap("spread", ts.spread_assumption))
    if ts.notes:
        print(wrap("notes", ts.notes))
    if mapped:
        print(wrap("profile", mapped))
    print(wrap("hit", f"default hit size {ts.default_hit_size_sd:g} SD; the closeness score is 50 "
                      "on the edge of a region and 100 at its centre"))
    print()
    digits = 0 if args.scale in ("hz", "mel") else 2

    def num(v):
        return "-" if v is None else f"{float(fwd(v)):.{digits}f}"

    rows = [(t.id, t.ipa, ", ".join(t.words), num(t.f1_hz), num(t.f2_hz), num(t.f3_hz),
             t.spread_label(), f"{t.hit_size_sd:g}") for t in ts.targets]
    _table(("ID", "IPA", "WORDS", f"F1 {unit}", f"F2 {unit}", f"F3 {unit}", "SPREAD (Hz)", "HIT SD"),
           rows, right={3, 4, 5, 7})
    return 0


def _check(args: argparse.Namespace) -> int:
    import sys

    from livevowel.errors import UserError
    from livevowel.targets import load_target_set

    status = 0
    for spec in args.files:
        try:
            ts = load_target_set(spec)
        except UserError as exc:
            print(f"livevowel targets check: {exc}", file=sys.stderr)
            status = 2
            continue
        notes = []
        if ts.from_memory:
            notes.append("values from memory")
        if ts.spread_assumption:
            notes.append("assumed spread")
        extra = f"; {', '.join(notes)}" if notes else ""
        print(f"{spec}: ok ({len(ts)} targets, {ts.group}, {ts.units}{extra})")
    return status


def _parse_token(text: str):
    from livevowel.errors import UserError
    from livevowel.profile import CalibrationToken

    vowel, sep, nums = text.partition("=")
    try:
        vals = [float(x) for x in nums.split(",")]
        if not sep or not vowel.strip() or len(vals) not in (2, 3):
            raise ValueError
    except ValueError:
        raise UserError(f"--token {text!r}: expected VOWEL=F1,F2 or VOWEL=F1,F2,F3 in Hz, "
                        "e.g. --token i=310,2790") from None
    return CalibrationToken(vowel.strip(), vals[0], vals[1], vals[2] if len(vals) == 3 else None)


def _calibrate(args: argparse.Namespace) -> int:
    import datetime
    from dataclasses import replace
    from pathlib import Path

    from livevowel.errors import UserError
    from livevowel.profile import SpeakerProfile, load_profile

    if bool(args.token) == bool(args.listen):
        raise UserError("give the measured vowels with --token VOWEL=F1,F2 ..., or --listen to measure them")
    if not args.listen:
        for flag, value in (("--vowels", args.vowels), ("--takes", args.takes), ("--wait", args.wait),
                            ("--source", args.source),
                            ("--device", args.device), ("--channel", args.channel)):
            if value is not None:
                raise UserError(f"{flag} goes with --listen (measure the vowels); add --listen or leave out {flag}")
    path = Path(args.profile)
    if not path.exists() and not (args.speaker and args.group and args.set):
        raise UserError(f"{path} does not exist yet: give --speaker, --group and --set to create it")
    if args.speaker:
        from livevowel.session.store import check_speaker_id

        check_speaker_id(args.speaker)
    now = datetime.datetime.now().astimezone().isoformat(timespec="seconds")
    if args.listen:
        tokens = _listen_tokens(args, path)
    else:
        tokens = [_parse_token(t) for t in args.token]
    tokens = [replace(t, time=now) for t in tokens]
    if path.exists():
        prof = load_profile(path)
        if args.speaker and args.speaker != prof.speaker_id:
            raise UserError(f"{path} belongs to speaker {prof.speaker_id}, not {args.speaker}; "
                            "choose another file")
        if args.method:
            prof = replace(prof, method=args.method)
        prof = prof.with_tokens(tokens, args.set)
        verb = "updated"
    else:
        prof = SpeakerProfile.calibrate(args.speaker, tokens, args.set, voice_group=args.group,
                                        method=args.method or "auto")
        verb = "created"
    prof.save(path)
    tr = prof.transform
    print(f"{path}: {verb} for speaker {prof.speaker_id} ({prof.voice_group}), {len(prof.tokens)} tokens")
    print(f"transform {tr.method} against {tr.reference_set} ({tr.reference_group}): "
          f"F1 x{tr.factors[0]:.3f}, F2 x{tr.factors[1]:.3f}, F3 x{tr.factors[2]:.3f} "
          f"from {', '.join(tr.vowels)}")
    return 0


def _listen_tokens(args: argparse.Namespace, path) -> list:
    """``calibrate --listen``: prompt each vowel on the terminal, measure it from the input."""
    import sys

    from livevowel import config
    from livevowel.audio.options import source_from_args
    from livevowel.cli import caution_if_live
    from livevowel.audio.pipeline import LiveSettings
    from livevowel.dsp.engine import AnalysisSettings
    from livevowel.errors import UserError
    from livevowel.profile import CalibrationToken, fit_transform, load_profile
    from livevowel.session.attempts import AttemptSettings
    from livevowel.session.calibration import corner_vowels, resolve_vowels, run_calibration
    from livevowel.targets import load_target_set

    old = load_profile(path) if path.exists() else None
    ts = load_target_set(args.set or old.transform.reference_set)
    takes = 2 if args.takes is None else args.takes
    ids = resolve_vowels(ts, [v.strip() for v in args.vowels.split(",") if v.strip()]) if args.vowels \
        else corner_vowels(ts)
    # a dry run of the fit with the vowels planned (at the set's own centres): a missing corner or too few
    # vowels for the method is reported now, not after the speaker has said them all
    planned = [CalibrationToken(v, ts.get(v).f1_hz, ts.get(v).f2_hz) for v in ids]
    fit_transform(planned + list(old.tokens if old else ()), ts,
                  method=args.method or (old.method if old else "auto"))
    group = args.group or (old.voice_group if old else None)
    settings = config.load(config_file=getattr(args, "config", None))
    if group in ("adult_male", "adult_female", "child") and settings.values["analysis"].get("voice") == "auto":
        settings = config.load(config_file=getattr(args, "config", None), overrides={"analysis": {"voice": group}})
    live = LiveSettings.from_config(settings)
    args.source = args.source or "mic"
    source = source_from_args(args, live=live)
    caution_if_live(args)

    def prompt(target, take) -> None:
        word = target.words[0] if target.words else target.id
        label = f"/{target.ipa}/" if target.ipa else target.id
        print(f"say {label} as in \u201c{word}\u201d ({target.lexical_set or target.id}), take {take} of "
              f"{takes} ...", flush=True)

    measured = []

    def took(oc, take) -> None:
        if take is not None:
            measured.append(take)
        if take is None:
            why = ", ".join(oc.attempt.flags) or oc.judgement.reason
            print(f"  not used ({why}); {'again, please' if oc.prompt is not None else 'then say it'}", flush=True)
        else:
            f3 = f" F3 {take.f3_hz:.0f}" if take.f3_hz is not None else ""
            f0 = f" (F0 {take.f0_hz:.0f})" if take.f0_hz is not None else ""
            print(f"  F1 {take.f1_hz:.0f} F2 {take.f2_hz:.0f}{f3} Hz{f0}", flush=True)

    wait = 30.0 if args.wait is None else args.wait
    if not wait > 0:
        raise UserError(f"--wait {args.wait:g}: give a number of seconds above 0")
    try:
        got = run_calibration(ts, source, vowels=ids, takes=takes, wait_s=wait,
                              analysis=AnalysisSettings.from_config(settings),
                              live=live, attempt_settings=AttemptSettings.from_config(settings), on_prompt=prompt,
                              on_take=took)
    except KeyboardInterrupt:
        # stopping is what the caution asks for when the voice hurts: say plainly what became of the takes
        print(f"stopped after {len(measured)} of {takes * len(ids)} takes; a profile needs them all, so nothing "
              f"was saved and {path} is {'unchanged' if path.exists() else 'not written'}. Run the same command "
              "again when ready.", file=sys.stderr, flush=True)
        raise
    short = [f"{v}: {n} of {takes}" for v in ids if (n := sum(t.vowel == v for t in got)) < takes]
    if short:
        raise UserError(f"the input ended before every take was made ({'; '.join(short)}); {path} is unchanged")
    return [t.token() for t in got]


def _table(header, rows, *, right=frozenset()) -> None:
    widths = [max(len(str(x)) for x in col) for col in zip(header, *rows)]
    for row in (header, *rows):
        cells = [str(c).rjust(w) if i in right else str(c).ljust(w) for i, (c, w) in enumerate(zip(row, widths))]
        print("  ".join(cells).rstrip())
