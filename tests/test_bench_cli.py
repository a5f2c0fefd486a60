"""`livevowel bench` as a user runs it: the suite list, one quick suite with its JSON, a bad name.

The figures themselves are measurements of the machine (not asserted here, see
livevowel/benchmarks); these checks keep the command and its output working.
"""

import json

from livevowel.cli import main


def test_bench_lists_runs_and_refuses(tmp_path, capsys):
    assert main(["bench", "--list"]) == 0
    suites = capsys.readouterr().out.split()
    assert {"dsp", "live", "targets", "display", "tracking", "session", "synth"} <= set(suites)
    out = tmp_path / "b.json"
    assert main(["bench", "--only", "targets", "--quick", "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "one frame: nearest+hit+score" in text and "goal" in text
    figures = json.loads(out.read_text())["targets"]
    assert figures and all(isinstance(k, str) for k in figures)
    assert main(["bench", "--only", "nope"]) == 2
    assert "unknown suite 'nope'" in capsys.readouterr().err
