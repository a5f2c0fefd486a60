"""The command line as a whole: usage messages and shared options."""

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


def test_first_run_says_it_is_compiling_the_engine(monkeypatch, capsys):
    # a machine with no compiled kernels on disk: the engine commands say why the start is slow
    import livevowel.cli as cli
    import livevowel.dsp._jit as jit_mod
    import livevowel.dsp.engine as engine

    calls = []
    monkeypatch.setattr(jit_mod, "kernels_cached", lambda: False)
    monkeypatch.setattr(engine, "warm_up", lambda settings=None: calls.append("warm"))
    cli._prepare_engine()
    assert calls == ["warm"]
    assert "compiling the analysis engine" in capsys.readouterr().err


def test_kernels_are_cached_after_warm_up():
    # every compiled kernel has its machine code on disk once the engine has run once
    from livevowel.dsp._jit import KERNELS, kernels_cached
    from livevowel.dsp.engine import warm_up

    warm_up()
    assert len(KERNELS) >= 10
    assert kernels_cached()
