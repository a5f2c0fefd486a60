"""``livevowel analyze``: per-frame formants of recordings."""

from __future__ import annotations

import argparse

NAME = "analyze"
SUMMARY = "measure F0, voicing, level and F1/F2/F3 of recordings, frame by frame"
DESCRIPTION = """\
Analyse recordings frame by frame (25 ms window, 10 ms hop by default) and
write one row per frame with the columns

  time_s, voiced, f0_hz, f1_hz, f2_hz, f3_hz, b1_hz, b2_hz, b3_hz, level_db

(measure cells empty where nothing was measured), then print a short summary
of each input: duration, voiced share and median F1/F2/F3 of voiced frames.

INPUT may be several files or folders (their audio files, one level deep).
With more than one input, a folder among the inputs, or an OUT that is a
folder or ends in '/', --frames names a folder that gets one table per
input, named after it; the work is spread over the machine's cores. Without
--frames only the summary is printed.

By default the whole file is used to choose the formant tracks; --causal
gives exactly what the live path would show for the same audio."""
EPILOG = """\
examples:
  livevowel analyze --example                  analyse the built-in example voice
  livevowel analyze take1.wav --frames take1.csv
  livevowel analyze homework/ --frames tables/ --voice adult_female
  livevowel analyze take1.wav --causal --format json --frames -"""


def configure(parser: argparse.ArgumentParser) -> None:
    from livevowel.cli import add_config_option

    parser.add_argument("inputs", nargs="*", metavar="INPUT", help="audio file or folder (WAV, FLAC, OGG)")
    parser.add_argument("--example", action="store_true",
                        help="analyse the built-in example voice (written to livevowel-example.wav "
                             "in the current folder)")
    parser.add_argument("--frames", metavar="OUT",
                        help="write the per-frame table to OUT ('-' for standard output; a folder "
                             "when there are several inputs)")
    parser.add_argument("--format", choices=("csv", "json"), default="csv", help="table format (default: csv)")
    parser.add_argument("--voice", choices=("adult_male", "adult_female", "child", "auto"),
                        help="speaker group; sets the formant ceiling (default from config: auto)")
    parser.add_argument("--ceiling", type=float, metavar="HZ", help="formant ceiling in Hz (overrides --voice)")
    parser.add_argument("--causal", action="store_true",
                        help="frame-by-frame tracking, exactly as the live path shows it")
    parser.add_argument("--targets", metavar="SET",
                        help="add a nearest_target column using this target set (name or YAML path)")
    parser.add_argument("--jobs", type=int, metavar="N", help="worker processes for several inputs (default: cores)")
    parser.add_argument("-q", "--quiet", action="store_true", help="no summary, no progress bar")
    add_config_option(parser)


def _analyse_one(path: str, settings_values: dict, causal: bool, target_spec: "str | None") -> dict:
    """Worker: analyse one file; returns a picklable result or an error line."""
    from livevowel.audiofile import read_audio
    from livevowel.config import Settings
    from livevowel.dsp.engine import AnalysisSettings, analyze
    from livevowel.errors import UserError

    try:
        rec = read_audio(path)
        a_settings = AnalysisSettings.from_config(Settings(settings_values))
        res = analyze(rec.samples, rec.rate_hz, settings=a_settings, causal=causal)
        extra = None
        if target_spec:
            extra = {"nearest_target": _nearest_column(res.frames, target_spec)}
        return {"path": path, "frames": res.frames, "extra": extra, "duration_s": rec.duration_s,
                "warnings": list(dict.fromkeys(rec.warnings + list(res.warnings))), "voice": res.voice,
                "ceiling_hz": res.ceiling_hz, "error": None}
    except UserError as exc:
        return {"path": path, "error": str(exc)}


def _nearest_column(frames, target_spec: str) -> list:
    import math

    from livevowel.targets import load_target_set

    tset = load_target_set(target_spec)
    out = []
    for f1, f2, v in zip(frames.f1_hz, frames.f2_hz, frames.voiced):
        if v and math.isfinite(f1) and math.isfinite(f2):
            out.append(tset.nearest(float(f1), float(f2))[0].id)
        else:
            out.append(None)
    return out


def _summary(result: dict) -> str:
    import numpy as np

    fr = result["frames"]
    n = len(fr)
    share = float(fr.voiced.mean()) if n else 0.0
    voiced = fr.voiced & np.isfinite(fr.f1_hz)
    parts = [f"{result['path']}: {result['duration_s']:.2f} s, {n} frames, voiced {share:.0%}"]
    if voiced.any():
        med = [np.nanmedian(getattr(fr, f"f{k}_hz")[voiced]) for k in (1, 2, 3)]
        parts.append("median F1 {:.0f} Hz, F2 {:.0f} Hz, F3 {} Hz".format(
            med[0], med[1], "-" if not np.isfinite(med[2]) else f"{med[2]:.0f}"))
    elif fr.voiced.any():
        parts.append("no formants measured")
    else:
        parts.append("no voiced frames")
    parts.append(f"voice {result['voice']}, ceiling {result['ceiling_hz']:.0f} Hz")
    return "; ".join(parts)


def run(args: argparse.Namespace) -> int:
    import os
    import sys
    from pathlib import Path

    from livevowel import config
    from livevowel.audiofile import find_audio_files
    from livevowel.cli.progress import Progress
    from livevowel.errors import UserError
    from livevowel.framesio import frames_to_csv, frames_to_json, write_frames

    settings = config.load(config_file=args.config,
                           overrides={"analysis": {"voice": args.voice, "ceiling_hz": args.ceiling}})
    inputs = list(args.inputs)
    if args.example:
        from livevowel.examples import make_example

        example = Path("livevowel-example.wav")
        make_example(example)
        if not args.quiet:
            print(f"wrote the example voice to {example}", file=sys.stderr)
        inputs.append(str(example))
    if not inputs:
        raise UserError("give at least one INPUT file or folder, or --example to try the built-in voice")
    if args.targets:
        from livevowel.targets import load_target_set

        load_target_set(args.targets)  # fail early, in this process, with the file's message
    files = find_audio_files(inputs)
    many = len(files) > 1
    out_dir = None
    several = many or any(Path(i).is_dir() for i in inputs)      # a table per input, in a folder
    if args.frames == "-" and several:
        raise UserError("--frames - (standard output) takes one input file; give a folder for several")
    if args.frames and args.frames != "-" and (several or args.frames.endswith(("/", os.sep))
                                               or Path(args.frames).is_dir()):
        out_dir = Path(args.frames)
        if out_dir.exists() and not out_dir.is_dir():
            raise UserError(f"--frames {args.frames}: is a file, but the tables need a folder; "
                            "give a folder name (it is made if missing)")
        try:
            out_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise UserError(f"--frames {args.frames}: cannot make the folder ({exc.strerror})") from None
        stems = [f.stem for f in files]
        dup = {s for s in stems if stems.count(s) > 1}
        if dup:
            raise UserError(f"several inputs are named {sorted(dup)[0]!r}; their tables would overwrite "
                            "each other in one folder; analyse them separately")

    jobs = args.jobs or min(len(files), os.cpu_count() or 1)
    progress = Progress(len(files), "analysing", quiet=args.quiet)
    results = []
    if jobs <= 1 or not many:
        for f in files:
            results.append(_analyse_one(str(f), settings.values, args.causal, args.targets))
            progress.step(f.name)
    else:
        from concurrent.futures import ProcessPoolExecutor

        # the cores already share the files: one thread per file
        values = dict(settings.values, analysis=dict(settings.values["analysis"], threads=1))
        with ProcessPoolExecutor(max_workers=jobs) as pool:
            futs = [pool.submit(_analyse_one, str(f), values, args.causal, args.targets) for f in files]
            for f, fut in zip(files, futs):
                results.append(fut.result())
                progress.step(f.name)

    failed = 0
    for res in results:
        if res["error"]:
            failed += 1
            print(f"livevowel analyze: error: {res['error']}", file=sys.stderr)
            continue
        for w in res["warnings"]:
            print(f"livevowel analyze: warning: {res['path']}: {w}", file=sys.stderr)
        meta = {"input": res["path"], "voice": res["voice"], "ceiling_hz": res["ceiling_hz"]}
        if args.frames == "-":
            text = (frames_to_csv(res["frames"], res["extra"]) if args.format == "csv"
                    else frames_to_json(res["frames"], res["extra"], meta))
            sys.stdout.write(text)
        elif args.frames:
            target = out_dir / f"{Path(res['path']).stem}.{args.format}" if out_dir else Path(args.frames)
            try:
                write_frames(target, res["frames"], fmt=args.format, extra=res["extra"], meta=meta)
            except OSError as exc:
                failed += 1
                print(f"livevowel analyze: error: {target}: cannot write the table "
                      f"({exc.strerror or exc}); check the folder exists and is writable", file=sys.stderr)
                continue
        if not args.quiet:
            print(_summary(res), file=sys.stderr if args.frames == "-" else sys.stdout)
    if not args.frames and not args.quiet and not failed:
        print("(no table written: --frames OUT.csv writes the per-frame table)", file=sys.stderr)
    if failed:
        return 2 if failed == len(results) else 1
    return 0
