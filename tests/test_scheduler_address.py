"""An unreachable dask scheduler address is bad input: one message, exit status 2, no traceback."""

from __future__ import annotations

import socket

import pytest

from conftest import TINY_STUDY, write_study
from covergrid import cli
from covergrid.pipeline import schedulers


def _closed_loopback_port() -> int:
    """A loopback port nothing listens on (bound, then released)."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.slow  # distributed's connect retries take several seconds even when refused
def test_unreachable_scheduler_is_status_2_naming_compute_scheduler(tmp_path, capsys,
                                                                    monkeypatch):
    monkeypatch.setattr(schedulers, "CONNECT_TIMEOUT_S", 1)  # refused at once; keep the test fast
    study = write_study(tmp_path, TINY_STUDY)
    address = f"tcp://127.0.0.1:{_closed_loopback_port()}"
    out = tmp_path / "o"
    status = cli.main(["run", str(study), "--out", str(out), "--scheduler", address, "--quiet"])
    err = capsys.readouterr().err
    assert status == 2
    assert err.startswith("covergrid: error: compute.scheduler: cannot reach the dask scheduler")
    assert address in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not (out / "tiny-ring" / "coverage.nc").exists()
