"""Nothing lost, nothing mixed: the fault reproducers of issue 16, each against a real folder.

Every test here starts from a folder holding an earlier run's results and does to a second
run what the issue's probes did: SIGINT and SIGTERM sent to a real process while it computes
and while it writes its figures, a second writer at once, SIGKILL, a kill between the two
renames of the swap, a link inside the results, read-only earlier results, changed maps, a
damaged store record, running out of memory and an unexpected failure. Afterwards the folder
holds the files of exactly one run (the earlier one, whole, unless the new one finished),
nothing but the folder is left in the output root, and the command ended with one line and
its exit status. Disk-full cases are in test_faults.py; the study-file and command-line
reproducers are the corpora tests/bad_studies/ and tests/bad_commands/.

Waits are on the state of the output root (the lock taken, the staging folder holding maps),
never on elapsed time, so the tests do not depend on the machine's speed.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import yaml

from conftest import TINY_STUDY
from covergrid import cli, io

#: An earlier run (2 h) and a longer one (48 h, some seconds of computing) of one study.
EARLIER = """\
study: probe
epoch: 2031-03-20T00:00:00Z
duration_h: 2
step_s: 10
constellation:
  - walker: {pattern: delta, total: 24, planes: 4, phasing: 1}
    template: {altitude_km: 1200, inclination_deg: 55}
grid: {resolution_deg: 5}
maps: {metrics: [max_gap, coverage_fraction]}
"""
LONGER = EARLIER.replace("duration_h: 2", "duration_h: 48")
#: Longest wait for a state of the output root or for a process to end [s] (a loaded
#: machine has been seen to take tens of seconds to start a process and compile).
WAIT_S = 300.0


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _start(study: Path, out: Path, *extra: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "covergrid.cli", "run", str(study), "--out",
                             str(out), "--quiet", *extra], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _wait_for(what, proc: subprocess.Popen, label: str) -> None:
    deadline = time.monotonic() + WAIT_S
    while not what():
        assert proc.poll() is None, f"the run ended before {label}: {proc.stderr.read()}"
        assert time.monotonic() < deadline, f"no {label} in {WAIT_S} s"
        time.sleep(0.01)


def _staging(out: Path) -> list[Path]:
    return sorted(out.glob(".probe.staging-*"))


def _computing(out: Path) -> bool:
    """The lock is taken and the staging folder made, with nothing written into it yet."""
    stages = _staging(out)
    return bool(stages) and not any(stages[0].iterdir())


def _writing_figures(out: Path) -> bool:
    stages = _staging(out)
    return bool(stages) and (stages[0] / "maps").is_dir()


def _earlier_run(tmp_path: Path) -> tuple[Path, dict[str, bytes]]:
    out = tmp_path / "out"
    assert cli.main(["run", str(_write(tmp_path, "earlier.yaml", EARLIER)), "--out", str(out),
                     "--quiet"]) == 0
    return out, _snapshot(out / "probe")


@pytest.mark.slow  # an earlier run and an interrupted one with figures: 10-20 s each
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
@pytest.mark.parametrize("phase", ["computing", "writing figures"])
def test_a_signal_leaves_the_earlier_results_whole(tmp_path, sig, phase):
    """Issue 16, defect 1: SIGINT 5.5 s into a second run left coverage.nc, summaries and
    the resolved study of the new run beside maps of the old one; SIGTERM also left a
    temporary map file for good."""
    out, before = _earlier_run(tmp_path)
    proc = _start(_write(tmp_path, "longer.yaml", LONGER), out)
    ready = _computing if phase == "computing" else _writing_figures
    _wait_for(lambda: ready(out), proc, phase)
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=WAIT_S)
    assert proc.returncode == (130 if sig == signal.SIGINT else 143), err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1, err
    assert err.startswith("covergrid: interrupted" if sig == signal.SIGINT
                          else "covergrid: terminated (SIGTERM)")
    assert _snapshot(out / "probe") == before
    assert sorted(p.name for p in out.iterdir()) == ["probe"]  # no staging, lock or temp


@pytest.mark.slow  # a local cluster started and stopped: 10-30 s
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_a_signal_to_a_local_cluster_run_is_one_line_and_stops_the_workers(tmp_path, sig):
    """Cancelling a distributed computation made the client and every worker print
    tracebacks and warnings; the command's one line must be all, and no worker may stay."""
    psutil = pytest.importorskip("psutil")
    out, before = _earlier_run(tmp_path)
    study = _write(tmp_path, "cluster.yaml", EARLIER.replace("duration_h: 2", "duration_h: 480")
                   + "compute: {scheduler: local-cluster, workers: 2, threads_per_worker: 1}\n")
    proc = _start(study, out, "--no-maps")
    me = psutil.Process(proc.pid)

    def workers_computing() -> bool:  # two worker processes that have used CPU for bands
        try:
            kids = [k for k in me.children(recursive=True) if "spawn" in " ".join(k.cmdline())]
            return len(kids) >= 2 and all(sum(k.cpu_times()[:2]) > 1.0 for k in kids[:2])
        except psutil.Error:
            return False

    _wait_for(workers_computing, proc, "busy workers")
    workers = me.children(recursive=True)
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=WAIT_S)
    assert proc.returncode == (130 if sig == signal.SIGINT else 143), err
    assert len(err.strip().splitlines()) == 1, err
    psutil.wait_procs(workers, timeout=60)
    assert not [w for w in workers if w.is_running() and w.status() != psutil.STATUS_ZOMBIE]
    assert _snapshot(out / "probe") == before
    assert sorted(p.name for p in out.iterdir()) == ["probe"]


@pytest.mark.slow  # two real runs at once: 10-20 s
def test_a_second_writer_is_refused_at_once_and_the_first_one_wins(tmp_path):
    """Issue 16, defect 1: two runs at once mixed their files."""
    out, _ = _earlier_run(tmp_path)
    started = time.time()
    proc = _start(_write(tmp_path, "longer.yaml", LONGER), out, "--no-maps")
    _wait_for(lambda: _computing(out), proc, "the lock")
    second = subprocess.run([sys.executable, "-m", "covergrid.cli", "run",
                             str(tmp_path / "earlier.yaml"), "--out", str(out), "--quiet"],
                            capture_output=True, text=True, timeout=WAIT_S, check=False)
    assert second.returncode == 2, second.stderr
    assert second.stderr == (
        f"covergrid: error: {out / 'probe'}: another covergrid process (pid {proc.pid} on "
        f"{os.uname().nodename}, since {second.stderr.split('since ')[1].split(')')[0]}) is "
        "writing these results; wait for it to end or choose another --out\n")
    _, err = proc.communicate(timeout=WAIT_S)
    assert proc.returncode == 0, err
    folder = out / "probe"
    # every file is the first writer's: made after it started, and its study is the 48 h one
    assert all(p.stat().st_ctime >= started for p in folder.rglob("*") if p.is_file())
    assert yaml.safe_load((folder / "study.resolved.yaml").read_text())["duration_h"] == 48.0
    assert not (folder / "maps").exists()  # --no-maps: the earlier run's maps went with it
    assert sorted(p.name for p in out.iterdir()) == ["probe"]


@pytest.mark.slow  # a real run killed, then a rerun: 5-15 s
def test_a_killed_writer_leaves_a_lock_that_blocks_no_one(tmp_path):
    out, before = _earlier_run(tmp_path)
    proc = _start(_write(tmp_path, "longer.yaml", LONGER), out)
    _wait_for(lambda: _computing(out), proc, "the lock")
    proc.kill()
    proc.communicate(timeout=WAIT_S)
    assert (out / ".probe.lock").exists() and _staging(out)  # what SIGKILL leaves
    assert _snapshot(out / "probe") == before  # ... and what it cannot touch
    assert cli.main(["run", str(tmp_path / "earlier.yaml"), "--out", str(out), "--quiet",
                     "--no-maps"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["probe"]  # leftovers cleared


def test_a_run_killed_between_the_two_renames_is_put_back(tmp_path):
    """Power lost after the old folder was moved aside and before the new one took its
    place: the next writer puts the old folder back before doing anything."""
    out = tmp_path / "out"
    assert cli.main(["run", str(_write(tmp_path, "tiny.yaml", TINY_STUDY)), "--out", str(out),
                     "--quiet", "--no-maps"]) == 0
    before = _snapshot(out / "tiny-ring")
    os.rename(out / "tiny-ring", out / ".tiny-ring.previous-0123456789abcdef")
    os.mkdir(out / ".tiny-ring.staging-fedcba9876543210")  # its half-written successor
    with pytest.raises(RuntimeError, match="stop"), io.ResultFolder(out, "tiny-ring"):
        assert _snapshot(out / "tiny-ring") == before  # put back on taking the lock
        raise RuntimeError("stop")
    assert _snapshot(out / "tiny-ring") == before
    assert sorted(p.name for p in out.iterdir()) == ["tiny-ring"]


def test_one_process_cannot_take_a_folder_twice(tmp_path):
    with io.ResultFolder(tmp_path, "demo") as first:
        (first.path / "a.txt").write_text("first")
        with pytest.raises(io.OutputRefused, match=rf"pid {os.getpid()} on .* is writing these "
                           "results"), io.ResultFolder(tmp_path, "demo"):
            pass
    assert (tmp_path / "demo" / "a.txt").read_text() == "first"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["demo"]


@pytest.mark.slow  # three runs with figures: 10-20 s
def test_changed_maps_or_no_maps_leave_no_old_maps(tmp_path):
    """Issue 16, defect 1: changing maps.metrics or --no-maps left old maps beside new
    results."""
    out = tmp_path / "out"
    first = _write(tmp_path, "a.yaml", EARLIER)
    assert cli.main(["run", str(first), "--out", str(out), "--quiet"]) == 0
    maps = out / "probe" / "maps"
    assert sorted(p.name for p in maps.iterdir()) == [
        "coverage_fraction.pdf", "coverage_fraction.png", "max_gap.pdf", "max_gap.png"]
    other = _write(tmp_path, "b.yaml", EARLIER.replace("[max_gap, coverage_fraction]",
                                                      "[mean_in_view]"))
    assert cli.main(["run", str(other), "--out", str(out), "--quiet"]) == 0
    assert sorted(p.name for p in maps.iterdir()) == ["mean_in_view.pdf", "mean_in_view.png"]
    assert cli.main(["run", str(other), "--out", str(out), "--quiet", "--no-maps"]) == 0
    assert sorted(p.name for p in (out / "probe").iterdir()) == [
        "coverage.nc", "report.html", "study.resolved.yaml", "summary.csv", "summary.json"]


@pytest.mark.slow  # a run with figures: 5-10 s
def test_a_link_inside_the_results_is_never_written_through(tmp_path):
    """Issue 16, defect 7: with out/<study>/maps a link to elsewhere, maps were written
    there (only the top folder was checked)."""
    out, _ = _earlier_run(tmp_path)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / "max_gap.png").write_bytes(b"someone else's file")
    maps = out / "probe" / "maps"
    for p in maps.iterdir():
        p.unlink()
    maps.rmdir()
    os.symlink(elsewhere, maps)
    assert cli.main(["run", str(tmp_path / "earlier.yaml"), "--out", str(out), "--quiet"]) == 0
    assert sorted(p.name for p in elsewhere.iterdir()) == ["max_gap.png"]
    assert (elsewhere / "max_gap.png").read_bytes() == b"someone else's file"
    assert maps.is_dir() and not maps.is_symlink()
    assert {"max_gap.png", "coverage_fraction.pdf"} <= {p.name for p in maps.iterdir()}


#: Linux prctl(2) option and capability numbers (linux/prctl.h, linux/capability.h).
PR_CAPBSET_DROP = 24
CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH = 1, 2


def _without_permission_override() -> None:
    """In the child before exec: drop root's right to ignore permission bits
    (capabilities(7): a capability dropped from the bounding set is not regained at exec)."""
    import ctypes

    libc = ctypes.CDLL(None, use_errno=True)
    for cap in (CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH):
        if libc.prctl(PR_CAPBSET_DROP, cap, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP)")


@pytest.mark.slow  # two runs with figures: 10-20 s
def test_read_only_earlier_maps_do_not_stop_a_run(tmp_path):
    """Issue 16, defect 4: a read-only maps/ while saving figures ended in a traceback.
    The new figures go to the staging folder; the old read-only folder is removed whole."""
    out, _ = _earlier_run(tmp_path)
    maps = out / "probe" / "maps"
    maps.chmod(0o555)
    extra = {"preexec_fn": _without_permission_override} if os.geteuid() == 0 else {}
    try:
        proc = subprocess.run([sys.executable, "-m", "covergrid.cli", "run",
                               str(tmp_path / "earlier.yaml"), "--out", str(out), "--quiet"],
                              capture_output=True, text=True, timeout=WAIT_S, check=False,
                              **extra)
    except subprocess.SubprocessError as exc:
        pytest.skip(f"running as root and cannot drop CAP_DAC_OVERRIDE: {exc}")
    finally:
        if maps.exists():
            maps.chmod(0o755)
    assert proc.returncode == 0, proc.stderr
    assert sorted(p.name for p in out.iterdir()) == ["probe"]  # the old folder is gone too
    assert os.access(out / "probe" / "maps", os.W_OK)


SWEEP = TINY_STUDY + ("compute: {scheduler: synchronous}\n"
                      "sweep: {altitude_km: [1000, 1200], total: 6, planes: [3], phasing: [1]}\n")


def test_a_damaged_store_record_is_computed_again(tmp_path, capsys):
    """Issue 16, defect 4: a store record holding `row: {}` ended in a traceback."""
    study = _write(tmp_path, "sweep.yaml", SWEEP)
    out = tmp_path / "out"
    assert cli.main(["sweep", str(study), "--out", str(out), "--quiet", "--no-figures"]) == 0
    records = sorted((out / "tiny-ring" / "store").glob("*.json"))
    assert len(records) == 2
    good = json.loads(records[1].read_text())
    damaged = {**json.loads(records[0].read_text()), "row": {}}
    records[0].write_text(json.dumps(damaged))
    wrong_kind = {**good, "row": {**good["row"], "total": "six"}}
    records[1].write_text(json.dumps(wrong_kind))
    assert cli.main(["sweep", str(study), "--out", str(out), "--no-figures"]) == 0
    assert "2 designs (2 computed, 0 from the store)" in capsys.readouterr().out
    assert json.loads(records[1].read_text())["row"]["total"] == 6  # written again, whole


def _run_failing(monkeypatch, tmp_path, error: BaseException, *extra: str):
    from covergrid.pipeline import run as run_module

    tmp_path.mkdir(exist_ok=True)
    out, before = _earlier_run(tmp_path)

    def fails(resolved, progress):
        raise error

    monkeypatch.setattr(run_module, "_compute", fails)
    status = cli.main(["run", str(tmp_path / "earlier.yaml"), "--out", str(out), "--quiet",
                       *extra])
    monkeypatch.undo()
    assert _snapshot(out / "probe") == before
    assert sorted(p.name for p in out.iterdir()) == ["probe"]
    return status


@pytest.mark.slow  # an earlier run with figures: 3-8 s
def test_out_of_memory_while_running_is_one_line_and_exit_3(tmp_path, monkeypatch, capsys):
    """Issue 16, item 2: out of memory is a failure while running (exit 3), one line."""
    assert _run_failing(monkeypatch, tmp_path, MemoryError()) == 3
    err = capsys.readouterr().err
    assert err.startswith("covergrid: error: out of memory while running; ")
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err


@pytest.mark.slow  # two earlier runs with figures: 6-15 s
def test_an_unexpected_failure_is_one_line_and_debug_adds_the_traceback(tmp_path, monkeypatch,
                                                                      capsys):
    assert _run_failing(monkeypatch, tmp_path / "a", RuntimeError("boom")) == 3
    err = capsys.readouterr().err
    assert err == ("covergrid: error: the run failed: RuntimeError: boom (run again with "
                   "--debug for the traceback)\n")
    assert _run_failing(monkeypatch, tmp_path / "b", RuntimeError("boom"), "--debug") == 3
    lines = capsys.readouterr().err.strip().splitlines()
    assert lines[0] == "Traceback (most recent call last):"
    assert lines[-1].startswith("covergrid: error: the run failed: RuntimeError: boom")


def test_a_pipe_as_study_file_is_refused_without_waiting(tmp_path):
    """`check` of a pipe nobody writes to must not wait for it (nor read a device forever,
    see the corpus case check_dev_zero)."""
    fifo = tmp_path / "study.yaml"
    os.mkfifo(fifo)
    proc = subprocess.run([sys.executable, "-m", "covergrid.cli", "check", str(fifo)],
                          capture_output=True, text=True, timeout=WAIT_S, check=False)
    assert proc.returncode == 2
    assert proc.stderr == (f"covergrid: error: {fifo}: is not a regular file (a device, pipe or "
                           "socket); allowed: a study file\n")


def test_a_study_file_over_the_size_limit_is_refused_unread(tmp_path, monkeypatch):
    from covergrid.study import loading

    monkeypatch.setattr(loading, "MAX_STUDY_FILE_BYTES", 1000)
    big = _write(tmp_path, "big.yaml", TINY_STUDY + "#" * 2000 + "\n")
    assert cli.main(["check", str(big)]) == 2
