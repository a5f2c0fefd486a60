"""Atomic writes and the per-frame table format."""

import numpy as np
import pytest

from livevowel.dsp.types import FRAME_COLUMNS, FrameTrack
from livevowel.errors import UserError
from livevowel.fileio import atomic_writer, write_text_atomic
from livevowel.framesio import frames_to_csv, frames_to_json, read_frames_csv, write_frames_csv


def make_track():
    n = 3
    nan = np.nan
    return FrameTrack(time_s=np.array([0.015, 0.025, 0.035]), voiced=np.array([False, True, True]),
                      f0_hz=np.array([nan, 120.04, 121.0]), f1_hz=np.array([nan, 730.26, 731.0]),
                      f2_hz=np.array([nan, 1090.0, 1091.0]), f3_hz=np.array([nan, nan, 2440.0]),
                      b1_hz=np.array([nan, 80.0, 81.0]), b2_hz=np.array([nan, 90.0, 91.0]),
                      b3_hz=np.array([nan, nan, 150.0]), level_db=np.array([-80.0, -20.04, -19.0]),
                      confidence=np.zeros(n))


def test_csv_has_header_empty_cells_and_rounding():
    lines = frames_to_csv(make_track()).splitlines()
    assert lines[0] == ",".join(FRAME_COLUMNS)
    assert lines[1] == "0.015,0,,,,,,,,-80.0"
    assert lines[2].split(",")[3] == "730.3"


def test_csv_round_trip(tmp_path):
    t = make_track()
    write_frames_csv(tmp_path / "t.csv", t)
    back = read_frames_csv(tmp_path / "t.csv")
    np.testing.assert_array_equal(back.voiced, t.voiced)
    np.testing.assert_allclose(back.f1_hz, t.f1_hz, atol=0.05, equal_nan=True)


def test_json_uses_null_for_unmeasured():
    import json

    doc = json.loads(frames_to_json(make_track(), meta={"input": "x.wav"}))
    assert doc["frames"][0]["f1_hz"] is None and doc["meta"]["input"] == "x.wav"


def test_readings_held_through_an_unvoiced_gap_are_not_written():
    import dataclasses
    import json

    t = make_track()
    held = dataclasses.replace(t, f1_hz=np.array([731.0, 730.26, 731.0]), b1_hz=np.array([81.0, 80.0, 81.0]))
    assert frames_to_csv(held) == frames_to_csv(t)        # frame 0 is unvoiced: its held F1 stays out
    assert json.loads(frames_to_json(held))["frames"][0]["b1_hz"] is None


def test_extra_column_length_is_checked():
    with pytest.raises(ValueError, match="extra column"):
        frames_to_csv(make_track(), {"nearest_target": ["i"]})


def test_atomic_writer_keeps_old_file_on_error(tmp_path):
    p = tmp_path / "out.txt"
    write_text_atomic(p, "old\n")
    with pytest.raises(RuntimeError):
        with atomic_writer(p) as fh:
            fh.write("half of the new")
            raise RuntimeError("crash mid-write")
    assert p.read_text() == "old\n"
    assert [q.name for q in tmp_path.iterdir()] == ["out.txt"]


def test_atomic_writer_missing_folder_is_a_user_error(tmp_path):
    with pytest.raises(UserError, match="does not exist"):
        write_text_atomic(tmp_path / "no" / "out.txt", "x")


def test_atomic_files_get_ordinary_permissions(tmp_path):
    import os
    import stat

    old = os.umask(0o022)
    try:
        write_text_atomic(tmp_path / "t.csv", "x\n")
        with atomic_writer(tmp_path / "clip.wav", mode="wb", permissions=0o600) as fh:
            fh.write(b"\0")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "t.csv").stat().st_mode) == 0o644  # what open() gives under umask 022
    assert stat.S_IMODE((tmp_path / "clip.wav").stat().st_mode) == 0o600
