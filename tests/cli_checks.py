"""Shared checks for the command line's user errors: one line, exit 2, nothing written."""
from __future__ import annotations

import re

from synth.cli import main


def run_cli(capsys, *argv):
    """Run the CLI in-process: (status, stdout, stderr); argparse exits count too."""
    try:
        status = main([str(a) for a in argv])
    except SystemExit as exit_:
        status = exit_.code
    out, err = capsys.readouterr()
    return status, out, err


def error_line(err):
    """The single ``synth: error:`` line of `err` (fails on tracebacks or more lines)."""
    assert "Traceback" not in err, err
    lines = err.strip().splitlines()
    assert len(lines) == 1, f"expected one line on stderr, got {len(lines)}:\n{err}"
    assert lines[0].startswith("synth: error: "), lines[0]
    return lines[0]


def check_bad_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase):
    """Write `text` as patch.yaml and check `command` refuses it as a user error.

    The one stderr line must start ``synth: error: patch.yaml:LINE: KEY: ``, match
    `phrase`, the status be 2, stdout empty, and nothing but patch.yaml be left.
    """
    monkeypatch.chdir(tmp_path)
    (tmp_path / "patch.yaml").write_text(text, encoding="utf-8")
    argv = ["render", "patch.yaml", "-o", "out.wav"] if command == "render" else ["modes", "patch.yaml"]
    status, out, err = run_cli(capsys, *argv)
    assert status == 2
    assert out == ""
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith(f"synth: error: patch.yaml:{line}: {key}: "), lines[0]
    assert re.search(phrase, lines[0]), lines[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["patch.yaml"]
