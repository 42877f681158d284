"""Faults survived, with real processes: a dask worker killed mid-run, an output folder the
process may not write to, and an output file system that fills up during the write (exit 3,
the earlier results kept whole).

(A sweep stopped by SIGINT or SIGKILL is in test_sweep.py; a writer killed in the middle of a
file, a file in the way of the output folder and the study name checks are in test_io.py and
test_cli.py.)
"""

from __future__ import annotations

import concurrent.futures
import errno
import math
import os
import re
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest
import xarray as xr

from conftest import TINY_STUDY, contract_dataset
from covergrid import cli, io
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.sensor import Sensor
from covergrid.orbits.walker import walker_delta

EPOCH = "2027-03-14T06:00:00Z"
RE = 6378.137  # WGS 84 equatorial radius [km] (NIMA TR8350.2, 3rd ed., table 3.1)


#: How long the test waits for a killed worker to be replaced, or for the first band to
#: finish [s]: far above the 1-3 s a worker takes to start and load the compiled kernel
#: (a busy machine has been seen to take tens of seconds).
WORKER_WAIT_S = 240.0


def _band_keys(keys) -> set[str]:
    return {str(k) for k in keys if "band_task" in str(k)}


@pytest.mark.slow  # a 2-worker cluster, one worker killed and restarted: about 10 s
def test_a_worker_killed_mid_run_changes_nothing():
    """SIGKILL one of two worker processes while it holds a finished band and runs another;
    its nanny starts a new worker, the scheduler recomputes the lost bands and the Dataset
    is identical to a threaded run."""
    distributed = pytest.importorskip("distributed")
    el = walker_delta(240, 12, 1, a_km=RE + 800.0, i_rad=math.radians(53.0))
    args = (el, EPOCH, 86400.0, 30.0, GridSpec(2.0), Sensor(10.0))
    chunk_rows = 3  # 30 bands of ~0.1-0.3 s each: the run lasts seconds after the first band
    ref = compute_coverage(*args, chunk_rows=chunk_rows, scheduler="threads")

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client, \
            concurrent.futures.ThreadPoolExecutor(1) as pool:
        pids_before = client.run(os.getpid)
        assert len(pids_before) == 2
        run = pool.submit(compute_coverage, *args, chunk_rows=chunk_rows, scheduler=client)
        # Wait until some worker holds a finished band in memory, then kill that worker:
        # both its finished results and the band it is running are lost.
        deadline = time.monotonic() + WORKER_WAIT_S
        victim = None
        while victim is None:
            assert time.monotonic() < deadline, "no band finished in time"
            assert not run.done(), "the run ended before a worker could be killed"
            for address, keys in client.has_what().items():
                if _band_keys(keys) and address in pids_before:
                    victim, lost = address, _band_keys(keys)
                    break
            else:
                time.sleep(0.01)
        os.kill(pids_before[victim], signal.SIGKILL)
        assert not run.done()  # the kill landed mid-run
        got = run.result(timeout=300)
        # The nanny replaced the killed process: two workers again, one of them new.
        client.wait_for_workers(2, timeout=WORKER_WAIT_S)
        pids_after = client.run(os.getpid)
    assert pids_before[victim] not in pids_after.values(), (pids_before, victim, pids_after)
    assert len(set(pids_after.values()) - set(pids_before.values())) == 1, (pids_before,
                                                                              pids_after)
    assert lost
    xr.testing.assert_identical(got, ref)


def _covergrid(args: list[str], **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "covergrid.cli", *args], capture_output=True,
                          text=True, timeout=300, check=False, **kwargs)


def _one_error_line(proc: subprocess.CompletedProcess) -> str:
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    return lines[0]


def _files_under(folder: Path) -> list[str]:
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*") if p.is_file())


#: Linux prctl(2) option and capability numbers (linux/prctl.h, linux/capability.h).
PR_CAPBSET_DROP = 24
CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH = 1, 2


def _without_permission_override() -> None:
    """In the child before exec: drop root's right to ignore permission bits.

    A capability dropped from the bounding set is not regained at exec, so the command
    then obeys the folder's mode bits like any other user (capabilities(7))."""
    import ctypes

    libc = ctypes.CDLL(None, use_errno=True)
    for cap in (CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH):
        if libc.prctl(PR_CAPBSET_DROP, cap, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP)")


def test_an_unwritable_output_folder_is_exit_2_before_computing(tmp_path):
    """A real process is denied by the folder's permission bits (mode 0555). Root ignores
    permission bits, so as root the command runs without CAP_DAC_OVERRIDE."""
    study = tmp_path / "study.yaml"
    study.write_text(TINY_STUDY, encoding="utf-8")
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    extra = {"preexec_fn": _without_permission_override} if os.geteuid() == 0 else {}
    try:
        proc = _covergrid(["run", str(study), "--out", str(locked / "out"), "--no-maps",
                           "--quiet"], **extra)
    except subprocess.SubprocessError as exc:  # the capability could not be dropped
        pytest.skip(f"running as root and cannot drop CAP_DAC_OVERRIDE: {exc}")
    finally:
        locked.chmod(0o755)
    line = _one_error_line(proc)
    assert line == (f"covergrid: error: {locked / 'out'}: cannot write: permission denied; "
                    "choose a folder you can write to with --out")
    assert list(locked.iterdir()) == []


def _mount_tiny_tmpfs(where: Path, size: str) -> bool:
    """Mount a tmpfs of `size` at `where`; False where mounting is not permitted."""
    if os.geteuid() != 0 or not Path("/bin/mount").exists():
        return False
    proc = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size},mode=0755", "tmpfs",
                           str(where)], capture_output=True, timeout=30, check=False)
    return proc.returncode == 0


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.mark.slow  # three real covergrid processes: 10-20 s
def test_a_file_system_that_fills_up_is_exit_3_and_keeps_the_earlier_results(tmp_path):
    """A real tmpfs of 600 KiB: room for a run without maps (about 220 KiB), not for the
    earlier results and a run with maps beside them, so a figure hits ENOSPC."""
    where = tmp_path / "small"
    where.mkdir()
    if not _mount_tiny_tmpfs(where, "600k"):
        pytest.skip("cannot mount a tmpfs here (needs root with CAP_SYS_ADMIN); the "
                    "in-process disk-full test below covers the same path")
    try:
        study = tmp_path / "study.yaml"
        study.write_text(TINY_STUDY, encoding="utf-8")
        out = where / "out"
        assert _covergrid(["run", str(study), "--out", str(out), "--no-maps", "--quiet"]
                          ).returncode == 0
        before = _snapshot(out / "tiny-ring")
        proc = _covergrid(["run", str(study), "--out", str(out), "--quiet"])
        assert proc.returncode == 3, proc.stderr
        assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
        # issue 16, defect 4: disk full while saving figures ended in a traceback; here the
        # data files fit and a figure (PNG or PDF) is the first to hit ENOSPC
        assert re.fullmatch(rf"covergrid: error: {re.escape(str(out / 'tiny-ring'))}/\S+"
                            r"\.(png|pdf): cannot write: no space left on the device; free "
                            r"some space or choose another --out\n", proc.stderr), proc.stderr
        assert _snapshot(out / "tiny-ring") == before  # the earlier run, whole
        assert sorted(p.name for p in out.iterdir()) == ["tiny-ring"]  # no staging, no lock
    finally:
        subprocess.run(["umount", str(where)], capture_output=True, timeout=30, check=False)


def test_disk_full_during_a_later_file_is_exit_3_and_keeps_the_earlier_results(
        tmp_path, capsys, monkeypatch):
    """The disk fills while the second output of a rerun is flushed: exit 3, one message
    naming the file's final path, the earlier results untouched, nothing else left."""
    study = tmp_path / "study.yaml"
    study.write_text(TINY_STUDY, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(study), "--out", str(out), "--no-maps", "--quiet"]) == 0
    folder = out / "tiny-ring"
    before = _snapshot(folder)
    real_fsync = os.fsync
    calls = []

    def fsync_then_full(fd):
        if stat.S_ISREG(os.fstat(fd).st_mode):  # files, not the folder's own fsync
            calls.append(fd)
        if len(calls) == 2:  # 1: coverage.nc, 2: summary.json
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_fsync(fd)

    monkeypatch.setattr(io.atomic.os, "fsync", fsync_then_full)
    assert cli.main(["run", str(study), "--out", str(out), "--no-maps", "--quiet"]) == 3
    err = capsys.readouterr().err
    assert err == (f"covergrid: error: {folder / 'summary.json'}: cannot write: no space left "
                   "on the device; free some space or choose another --out\n")
    monkeypatch.undo()
    assert _snapshot(folder) == before
    assert sorted(p.name for p in out.iterdir()) == ["tiny-ring"]


def test_a_netcdf_library_failure_is_a_clear_error_and_nothing_lands(tmp_path, monkeypatch):
    """netCDF-C reports failed writes as RuntimeError without an errno; with free space
    left it is reported as the library's failure, not as a full disk, and nothing lands."""

    def fails(self, path, **kwargs):
        Path(path).write_bytes(b"\x89HDF\r\n\x1a\n")  # a partial start of a file
        raise RuntimeError("NetCDF: HDF error")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", fails)
    with pytest.raises(io.OutputError, match=r"coverage.nc: cannot write: the netCDF library "
                       r"could not write the file \(NetCDF: HDF error\); choose another --out"):
        io.write_netcdf(contract_dataset(10.0), tmp_path / "coverage.nc")
    assert list(tmp_path.iterdir()) == []
