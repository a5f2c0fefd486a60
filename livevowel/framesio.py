"""Writing per-frame tables (CSV and JSON), atomically.

The columns are :data:`livevowel.dsp.types.FRAME_COLUMNS`; cells of measures
that were not made are empty in CSV and ``null`` in JSON. That includes the
formants and bandwidths of unvoiced frames: the engine holds the last reading
through short unvoiced gaps (``AnalysisSettings.hold_s``) for the screen and
the tracker, but a table reports what was measured. Extra columns (for
example the nearest target) may follow.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path
from typing import Mapping, Sequence

import numpy as np

from livevowel.dsp.types import FRAME_COLUMNS, FrameTrack
from livevowel.fileio import write_text_atomic

#: Decimal places per column (Hz to 0.1 Hz, time to 1 ms, level to 0.1 dB).
_DECIMALS = {"time_s": 3, "level_db": 1}

#: Columns left empty in unvoiced frames (held readings, not measurements).
_VOICED_ONLY = ("f1_hz", "f2_hz", "f3_hz", "b1_hz", "b2_hz", "b3_hz")


def _cell(name: str, value: object) -> "str | float | int | None":
    if name == "voiced":
        return int(bool(value))
    if isinstance(value, str) or value is None:
        return value
    v = float(value)  # type: ignore[arg-type]
    if not math.isfinite(v):
        return None
    return round(v, _DECIMALS.get(name, 1))


def frame_rows(track: FrameTrack, extra: "Mapping[str, Sequence[object]] | None" = None) -> list[dict]:
    """Rows (dicts keyed by column) of a track, NaN as ``None``."""
    extra = dict(extra or {})
    for name, values in extra.items():
        if len(values) != len(track):
            raise ValueError(f"extra column {name!r} has {len(values)} values for {len(track)} frames")
    cols = {name: getattr(track, name) for name in FRAME_COLUMNS}
    rows = []
    for i in range(len(track)):
        row = {name: _cell(name, cols[name][i]) for name in FRAME_COLUMNS}
        if not row["voiced"]:
            row.update(dict.fromkeys(_VOICED_ONLY))
        for name, values in extra.items():
            row[name] = _cell(name, values[i])
        rows.append(row)
    return rows


def frames_to_csv(track: FrameTrack, extra: "Mapping[str, Sequence[object]] | None" = None) -> str:
    """The track as CSV text with a header line."""
    rows = frame_rows(track, extra)
    names = list(FRAME_COLUMNS) + list((extra or {}).keys())
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(names)
    for row in rows:
        w.writerow(["" if row[n] is None else row[n] for n in names])
    return buf.getvalue()


def frames_to_json(track: FrameTrack, extra: "Mapping[str, Sequence[object]] | None" = None,
                   meta: "Mapping[str, object] | None" = None) -> str:
    """The track as JSON: ``{"meta": {...}, "columns": [...], "frames": [{...}, ...]}``."""
    names = list(FRAME_COLUMNS) + list((extra or {}).keys())
    doc = {"meta": dict(meta or {}), "columns": names, "frames": frame_rows(track, extra)}
    return json.dumps(doc, indent=1, allow_nan=False) + "\n"


def write_frames(path: "str | Path", track: FrameTrack, *, fmt: str = "csv",
                 extra: "Mapping[str, Sequence[object]] | None" = None,
                 meta: "Mapping[str, object] | None" = None) -> None:
    """Write a track to ``path`` as ``fmt`` ('csv' or 'json'), atomically."""
    if fmt == "csv":
        write_text_atomic(path, frames_to_csv(track, extra))
    elif fmt == "json":
        write_text_atomic(path, frames_to_json(track, extra, meta))
    else:
        raise ValueError(f"unknown format {fmt!r}; use 'csv' or 'json'")


def write_frames_csv(path: "str | Path", track: FrameTrack,
                     extra: "Mapping[str, Sequence[object]] | None" = None) -> None:
    """Write a track as CSV (shorthand for ``write_frames(path, track, fmt='csv')``)."""
    write_frames(path, track, fmt="csv", extra=extra)


def read_frames_csv(path: "str | Path") -> FrameTrack:
    """Read a CSV written by :func:`write_frames_csv` back into a track.

    Extra columns are ignored; confidence (not written) comes back as NaN.
    """
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    def col(name: str) -> np.ndarray:
        return np.array([float(r[name]) if r[name] != "" else np.nan for r in rows])
    data = {name: col(name) for name in FRAME_COLUMNS}
    data["voiced"] = data["voiced"].astype(bool)
    return FrameTrack(**data, confidence=np.full(len(rows), np.nan))
