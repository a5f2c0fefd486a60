"""The command line as a whole: usage messages and shared options."""

import argparse

import pytest

from livevowel.cli import main


def test_unknown_option_shows_the_commands_own_usage(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["analyze", "--frobnicate"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert err.startswith("usage: livevowel analyze")
    assert "unrecognized arguments: --frobnicate" in err


@pytest.mark.parametrize("argv", [
    ["practice", "--help"],
    ["drill", "--help"],
    ["review", "--help"],
])
def test_profile_and_storage_options_have_the_same_names_everywhere(argv, capsys):
    with pytest.raises(SystemExit):
        main(argv)
    out = capsys.readouterr().out
    assert "--profile" in out
    if argv[0] in ("drill", "review"):
        assert "--no-store" in out and "--no-save" in out
    if argv[0] == "drill":
        assert "--targets" in out


def test_a_drill_on_a_bad_input_file_leaves_no_empty_session(tmp_path, capsys):
    bad = tmp_path / "take.wav"
    bad.write_text("not sound")
    data = tmp_path / "record"
    rc = main(["drill", "front-vowels-five-vowel-l1", "--source", f"file:{bad}", "--data", str(data)])
    assert rc == 2
    assert "not an audio file" in capsys.readouterr().err
    assert not (data / "sessions.sqlite3").exists()


def test_source_that_looks_like_a_file_suggests_file_prefix():
    from livevowel.audio.options import open_source
    from livevowel.errors import UserError

    with pytest.raises(UserError, match="--source file:take.wav"):
        open_source("take.wav")


def test_a_slow_engine_start_is_explained(monkeypatch, capsys):
    # compiling the kernels (first run after installing) takes long: the engine commands say why
    import time

    import livevowel.cli as cli
    import livevowel.dsp.engine as engine

    monkeypatch.setattr(engine, "warm_up", lambda settings=None: time.sleep(1.4))
    cli._prepare_engine()
    assert "compiling the analysis engine" in capsys.readouterr().err
    monkeypatch.setattr(engine, "warm_up", lambda settings=None: None)     # cached: a quiet start
    cli._prepare_engine()
    time.sleep(1.2)
    assert capsys.readouterr().err == ""


def test_warm_up_compiles_every_kernel_into_a_fresh_cache(tmp_path):
    # a machine with nothing cached: kernels_cached() says so, and one warm_up() leaves every
    # kernel's machine code on disk (so no kernel compiles later, mid-stream)
    import os
    import subprocess
    import sys

    code = ("import numba; import livevowel.dsp.engine as e; from livevowel.dsp import _jit as j\n"
            "assert not numba.config.DISABLE_JIT\n"
            "assert j.CACHE_DIR.startswith(%r), j.CACHE_DIR\n"
            "before = j.kernels_cached(); e.warm_up(); print(before, j.kernels_cached(), len(j.KERNELS))" % str(tmp_path))
    env = dict(os.environ, LIVEVOWEL_KERNEL_CACHE=str(tmp_path))
    env.pop("NUMBA_DISABLE_JIT", None)
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr
    before, after, n = out.stdout.split()
    assert (before, after) == ("False", "True") and int(n) >= 20


def test_the_caution_is_printed_where_someone_speaks_live(capsys):
    from livevowel import CAUTION
    from livevowel.cli import caution_if_live

    for source, live in ((None, True), ("mic", True), ("demo", False), ("file:take.wav", False)):
        assert caution_if_live(argparse.Namespace(source=source)) is live
        err = capsys.readouterr().err
        assert (CAUTION in err) is live and ("hoarse" in err) is live


@pytest.mark.parametrize("argv", [
    ["listen", "--seconds", "0.3"],
    ["practice", "--targets", "gae-men", "--headless", "--seconds", "0.3"],
    ["practice", "--drill", "front-vowels-five-vowel-l1", "--headless", "--seconds", "0.3", "--no-save"],
    ["practice", "--drill", "front-vowels-five-vowel-l1", "--headless", "--seconds", "0.3", "--no-save",
     "--screenshot", "{tmp}/d.png"],
    ["drill", "front-vowels-five-vowel-l1", "--no-save", "--quiet"],
])
def test_every_live_command_asks_for_the_caution(argv, monkeypatch, tmp_path, capsys):
    # each command that can listen to a microphone checks its input for the caution (the demo voice
    # stands in for the microphone here: a check that someone would be speaking live)
    import livevowel.cli as cli

    asked = []
    monkeypatch.setattr(cli, "caution_if_live", lambda args: asked.append(args.source) or False)
    argv = [a.replace("{tmp}", str(tmp_path)) for a in argv]
    assert main(argv + ["--source", "demo", "--pace", "0"]) == 0
    assert asked == ["demo"]
