"""Atomic output writing, output folders, and CF-1.8 compliance of the netCDF."""

from __future__ import annotations

import errno
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from conftest import compliance_report, contract_dataset
from covergrid import io

VENV_BIN = Path(sys.executable).parent


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def test_netcdf_passes_cf_1_8_with_no_errors(tmp_path):
    ds = contract_dataset(10.0)
    path = io.write_netcdf(ds, tmp_path / "coverage.nc")
    report = compliance_report(path)
    # high = errors, medium = warnings in the checker's scoring (its "scoreheader").
    assert report["high_count"] == 0, report["high_priorities"]
    assert report["medium_count"] == 0, report["medium_priorities"]


def test_netcdf_round_trip_keeps_values_attrs_and_nan(tmp_path):
    ds = contract_dataset(10.0)
    data = ds["mean_gap"].values.copy()
    data[3, 4] = np.nan
    ds["mean_gap"] = ds["mean_gap"].copy(data=data)
    ds["visits"] = ((), np.int64(2**40), {"units": "1", "long_name": "visits"})
    path = io.write_netcdf(ds, tmp_path / "c.nc")
    with xr.open_dataset(path) as back:
        xr.testing.assert_equal(back.drop_vars("visits"), ds.drop_vars("visits"))
        assert back.attrs == ds.attrs
        for name in ("mean_gap", "gap_count", "nfold_fraction", "cell_area", "lat"):
            assert back[name].attrs == ds[name].attrs
        assert back["mean_gap"].encoding["zlib"] is True
        assert back["mean_gap"].encoding["_FillValue"] == io.FILL_DOUBLE
        assert "_FillValue" not in back["lat"].encoding or np.isnan(
            back["lat"].encoding.get("_FillValue", np.nan))
        assert int(back["visits"]) == 2**40  # stored as a double, exact below 2**53
    assert _leftovers(tmp_path) == []


def test_json_csv_yaml_are_strict_and_atomic(tmp_path):
    io.write_json({"a": float("nan"), "b": np.float64(1.5), "c": [np.int32(2)]},
                  tmp_path / "s.json")
    assert json.loads((tmp_path / "s.json").read_text()) == {"a": None, "b": 1.5, "c": [2]}
    io.write_csv([{"x": 0.1, "y": float("inf")}], tmp_path / "s.csv", ("x", "y"))
    assert (tmp_path / "s.csv").read_text().splitlines() == ["x,y", "0.1,"]
    io.write_yaml({"k": [1, 2]}, tmp_path / "s.yaml")
    assert (tmp_path / "s.yaml").read_text() == "k:\n- 1\n- 2\n"
    mode = (tmp_path / "s.json").stat().st_mode & 0o777
    assert mode == 0o666 & ~io.atomic._UMASK  # not mkstemp's private 0600
    assert _leftovers(tmp_path) == []


def test_an_error_inside_the_write_leaves_the_old_file(tmp_path):
    final = tmp_path / "summary.json"
    final.write_text("old\n")
    with pytest.raises(RuntimeError, match="boom"), io.atomic_path(final) as tmp:
        tmp.write_text("half")
        raise RuntimeError("boom")
    assert final.read_text() == "old\n"
    assert _leftovers(tmp_path) == []


def test_disk_full_is_a_clear_error_and_nothing_lands(tmp_path, monkeypatch):
    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(io.atomic.os, "fsync", full)
    with pytest.raises(io.OutputError, match=r"summary.json: cannot write: no space left"):
        io.write_json({"a": 1}, tmp_path / "summary.json")
    assert list(tmp_path.iterdir()) == []


def test_killed_writer_leaves_no_file_at_the_final_path(tmp_path):
    # A real process dies (SIGKILL) in the middle of a write: only a hidden temporary
    # remains, never a partial file under the final name.
    code = (
        "import os, signal, sys\n"
        "from covergrid import io\n"
        "with io.atomic_path(sys.argv[1]) as tmp:\n"
        "    with open(tmp, 'w') as fh:\n"
        "        fh.write('partial'); fh.flush()\n"
        "        os.kill(os.getpid(), signal.SIGKILL)\n"
    )
    final = tmp_path / "coverage.nc"
    proc = subprocess.run([sys.executable, "-c", code, str(final)], timeout=60, check=False)
    assert proc.returncode == -9
    assert not final.exists()
    assert all(p.name.startswith(".coverage.nc.") for p in tmp_path.iterdir())


def test_output_folder_stays_inside_the_root(tmp_path):
    assert io.study_output_dir(tmp_path, "demo") == (tmp_path / "demo").resolve()
    for bad in ("..", "../x", "a/b", "", ".", "x\x00", ".hidden"):
        with pytest.raises(io.OutputRefused, match="study"):
            io.study_output_dir(tmp_path, bad)


def test_a_file_in_the_way_is_a_clear_error(tmp_path):
    blocker = tmp_path / "outputs"
    blocker.write_text("not a folder")
    with pytest.raises(io.OutputRefused, match="a part of the path is a file"), \
            io.ResultFolder(blocker, "demo"):
        pass
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "demo").write_text("a file where the results go")
    with pytest.raises(io.OutputRefused, match="a file is in the way of the result folder"):
        io.ResultFolder(tmp_path / "out", "demo")
    with pytest.raises(io.OutputError, match="cannot write"):
        io.write_json({}, blocker / "demo" / "summary.json")


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write into read-only folders")
def test_read_only_folder_is_a_clear_error(tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    try:
        with pytest.raises(io.OutputRefused, match="permission denied"), \
                io.ResultFolder(ro, "demo"):
            pass
    finally:
        ro.chmod(0o700)


def test_figures_are_saved_atomically(tmp_path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(2, 1))
    ax.plot([0, 1], [0, 1])
    try:
        png = io.save_figure(fig, tmp_path / "maps" / "f.png", dpi=50)
        pdf = io.save_figure(fig, tmp_path / "maps" / "f.pdf")
    finally:
        plt.close(fig)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert pdf.read_bytes()[:5] == b"%PDF-"
    assert _leftovers(tmp_path / "maps") == []
