"""Every malformed study in tests/bad_studies/ is refused cleanly by ``covergrid run``.

Each file states in its header what the one error message must say:
``# expect-path:`` the dotted path (or the file name for file-level problems) that the
message starts with, and ``# expect:`` fragments (the offending value, what is allowed).
Exit status 2, exactly one message on stderr, no traceback, nothing written.

The corpus holds every study-file reproducer of issue 16 (its header says which defect).
The cases run in a real process do so with their address space capped at
:data:`MEMORY_CAP_BYTES`: a refusal must come before any large allocation (the alias bomb
once grew to 2.2 GB before failing; the 100,000-satellite study died at 9.4 GB drawing its
figures), so a case that starts expanding or computing fails here instead of running on.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from covergrid import cli

BAD = Path(__file__).resolve().parent / "bad_studies"
FILES = sorted(BAD.glob("*.yaml"))
# A few go through a real process (the console script's module entry point), the rest
# in-process to keep the suite fast.
VIA_SUBPROCESS = {"not_utf8.yaml", "yaml_python_tag.yaml", "grid_too_large_for_memory.yaml",
                  "planes_not_dividing_total.yaml", "study_name_with_path.yaml",
                  "yaml_alias_bomb.yaml", "yaml_nested_500.yaml", "yaml_recursive_alias.yaml",
                  "figures_of_100000_satellites.yaml", "cluster_1024_workers.yaml",
                  "sweep_product_too_large.yaml", "sizing_space_too_large.yaml",
                  "step_too_many_samples.yaml"}
#: Address space of a case run in a real process [bytes]: the interpreter with numpy,
#: pydantic and the estimate's imports needs well under 1 GiB.
MEMORY_CAP_BYTES = 2 * 2**30


def _capped() -> None:
    """In the child before exec: cap the address space (setrlimit(2), RLIMIT_AS)."""
    import resource

    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_CAP_BYTES, MEMORY_CAP_BYTES))


def _expectations(path: Path) -> tuple[str, list[str]]:
    head = path.read_bytes().decode("latin-1").splitlines()
    where = [line.split(":", 1)[1].strip() for line in head if line.startswith("# expect-path:")]
    frags = [line.split(":", 1)[1].strip() for line in head if line.startswith("# expect:")]
    assert len(where) == 1 and frags, f"{path.name} lacks its expect header"
    return where[0], frags


def test_there_are_at_least_eighty():
    assert len(FILES) >= 80


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_bad_study_is_refused(path, tmp_path, monkeypatch, capsys):
    where, fragments = _expectations(path)
    out = tmp_path / "out"
    monkeypatch.chdir(tmp_path)
    if path.name in VIA_SUBPROCESS:
        proc = subprocess.run([sys.executable, "-m", "covergrid.cli", "run", str(path),
                               "--out", str(out)], capture_output=True, text=True,
                              timeout=120, check=False, preexec_fn=_capped)
        status, stdout, stderr = proc.returncode, proc.stdout, proc.stderr
    else:
        status = cli.main(["run", str(path), "--out", str(out)])
        captured = capsys.readouterr()
        stdout, stderr = captured.out, captured.err
    assert status == 2, stderr
    assert "Traceback" not in stderr and stdout == ""
    assert stderr.count("covergrid: error:") == 1
    assert len(stderr.strip().splitlines()) == 1, stderr
    message = stderr.strip().removeprefix("covergrid: error: ")
    assert message.startswith(f"{where}: "), message
    for fragment in fragments:
        assert fragment in message, f"{fragment!r} not in {message!r}"
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == []
