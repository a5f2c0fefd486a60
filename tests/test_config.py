"""Settings: the schema, the commented default file and user overrides."""

from pathlib import Path

import pytest

from livevowel import config
from livevowel.errors import UserError

ROOT = Path(__file__).resolve().parents[1]


def test_config_yaml_lists_every_default():
    # config.yaml is generated from the schema; regenerate with
    # `livevowel config --template > config.yaml` after changing SCHEMA.
    assert (ROOT / "config.yaml").read_text(encoding="utf-8") == config.template()


def test_config_yaml_parses_to_the_defaults():
    assert config.load_file(ROOT / "config.yaml") == config.defaults()


def test_user_file_overrides_defaults_and_options_override_file(tmp_path):
    f = tmp_path / "mine.yaml"
    f.write_text("analysis:\n  hop_ms: 5\n  voice: child\n", encoding="utf-8")
    s = config.load(config_file=f, overrides={"analysis": {"voice": "adult_male", "window_ms": None}})
    assert s.get("analysis.hop_ms") == 5.0
    assert s.get("analysis.voice") == "adult_male"
    assert s.get("analysis.window_ms") == config.SCHEMA["analysis"]["window_ms"].default


@pytest.mark.parametrize(
    "text, needle",
    [
        ("analysis:\n  hopms: 5\n", "unknown key analysis.hopms"),
        ("analysys:\n  hop_ms: 5\n", "unknown section 'analysys'"),
        ("analysis:\n  hop_ms: 500\n", "analysis.hop_ms: 500.0 is above the maximum"),
        ("analysis:\n  voice: robot\n", "analysis.voice: 'robot' is not one of"),
        ("analysis:\n  hop_ms: fast\n", "analysis.hop_ms: expected a number"),
        ("analysis: [1, 2\n", "is not valid YAML"),
    ],
)
def test_bad_config_names_file_and_key(tmp_path, text, needle):
    f = tmp_path / "bad.yaml"
    f.write_text(text, encoding="utf-8")
    with pytest.raises(UserError) as exc:
        config.load(config_file=f)
    assert needle in str(exc.value)
    assert str(f) in str(exc.value)


def test_missing_config_file_is_a_clear_error(tmp_path):
    with pytest.raises(UserError, match="cannot read config file"):
        config.load(config_file=tmp_path / "nope.yaml")


def test_settings_name_where_they_were_read_from(tmp_path):
    f = tmp_path / "mine.yaml"
    f.write_text("analysis:\n  hop_ms: 5\n", encoding="utf-8")
    s = config.load(config_file=f, overrides={"analysis": {"voice": "child"}})
    assert s.sources == ("built-in defaults", str(f), "command line")
    # options left at None (not given) are not a source
    s = config.load(config_file=f, overrides={"analysis": {"voice": None}})
    assert s.sources == ("built-in defaults", str(f))


def test_config_command_heads_its_output_with_the_files_read(tmp_path, capsys):
    import yaml

    from livevowel.cli import main

    f = tmp_path / "mine.yaml"
    f.write_text("analysis:\n  hop_ms: 5\n", encoding="utf-8")
    assert main(["config", "--config", str(f)]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0] == f"# read from: built-in defaults, {f}"
    assert yaml.safe_load(out)["analysis"]["hop_ms"] == 5.0   # still valid YAML
