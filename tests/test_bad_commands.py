"""Every command-line case in tests/bad_commands/ ends as its file says.

Each case is a YAML file (its first line says what it reproduces):

- ``argv``: the arguments after ``covergrid``; ``{study}`` is a study file written from the
  case's ``study`` text, ``{out}`` an output root and ``{tmp}`` the case's own folder;
- ``status``: the exit status;
- ``stderr`` / ``stdout``: fragments each stream must hold;
- ``stdout_json``: stdout is strict JSON (no NaN or Infinity);
- ``subprocess``: run the console module in a real process (otherwise in-process);
- ``setup``: a named preparation of the output root (see :data:`SETUPS`);
- ``nothing_written`` (default true for a failure): the output root stays absent;
- ``traceback``: with ``--debug``, stderr holds a traceback before the one error line.

A failure is always one line on stderr (the last line with ``--debug``), starting with
``covergrid: error:``, with no traceback unless asked for.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from covergrid import cli

CASES = sorted((Path(__file__).resolve().parent / "bad_commands").glob("*.yaml"))


def _symlink_study_folder(out: Path, elsewhere: Path) -> None:
    out.mkdir()
    os.symlink(elsewhere, out / "tiny-ring")


def _symlink_store(out: Path, elsewhere: Path) -> None:
    (out / "tiny-ring").mkdir(parents=True)
    os.symlink(elsewhere, out / "tiny-ring" / "store")


SETUPS = {"symlink_study_folder": _symlink_study_folder, "symlink_store": _symlink_store}


def _strict(text: str):
    def refuse(name):
        raise ValueError(f"not strict JSON: {name}")

    return json.loads(text, parse_constant=refuse)


def test_the_corpus_is_there():
    assert len(CASES) >= 20


@pytest.mark.parametrize("path", CASES, ids=[p.stem for p in CASES])
def test_command_case(path, tmp_path, monkeypatch, capsys):
    case = yaml.safe_load(path.read_text(encoding="utf-8"))
    out, elsewhere = tmp_path / "out", tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / "keep.txt").write_text("not covergrid's")
    if "study" in case:
        (tmp_path / "study.yaml").write_text(case["study"], encoding="utf-8")
    if "setup" in case:
        SETUPS[case["setup"]](out, elsewhere)
    argv = [a.format(study=tmp_path / "study.yaml", out=out, tmp=tmp_path) for a in case["argv"]]
    monkeypatch.chdir(tmp_path)
    if case.get("subprocess"):
        proc = subprocess.run([sys.executable, "-m", "covergrid.cli", *argv],
                              capture_output=True, text=True, timeout=120, check=False)
        status, stdout, stderr = proc.returncode, proc.stdout, proc.stderr
    else:
        status = cli.main(argv)
        captured = capsys.readouterr()
        stdout, stderr = captured.out, captured.err
    assert status == case["status"], stderr
    for fragment in case.get("stdout", []):
        assert fragment in stdout, (fragment, stdout)
    for fragment in case.get("stderr", []):
        assert fragment in stderr, (fragment, stderr)
    if case.get("stdout_json"):
        _strict(stdout)
    if status != 0:
        lines = stderr.strip().splitlines()
        assert lines and lines[-1].startswith("covergrid: error: "), stderr
        if case.get("traceback"):
            assert "Traceback (most recent call last)" in stderr
        else:
            assert "Traceback" not in stderr and len(lines) == 1, stderr
        if case.get("nothing_written", True):
            assert not out.exists()
    else:
        assert stderr == ""
    assert sorted(p.name for p in elsewhere.iterdir()) == ["keep.txt"]  # never written to
