"""Sweeps: design expansion, rows equal to single runs, resume after an interruption, outputs,
and a real ``covergrid sweep`` process stopped by SIGINT, SIGTERM and SIGKILL then rerun."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import xarray as xr
import yaml

import covergrid
from covergrid.errors import StudyError
from covergrid.pipeline.run import run_study
from covergrid.study import parse_study
from covergrid.trade import runner
from covergrid.trade.designs import WalkerDesign
from covergrid.trade.evaluate import STATISTICS, evaluate_design, row_columns
from covergrid.trade.space import evaluation_context, sweep_designs
from covergrid.trade.store import ResultStore
from covergrid.trade.sweep import run_sweep

# An invented scenario: a small regional-revisit trade on a coarse grid (fast).
BASE = {
    "study": "sweep_test",
    "epoch": "2031-05-01T00:00:00Z",
    "duration_h": 6.0,
    "step_s": 60.0,
    "constellation": [{"walker": {"pattern": "delta", "total": 6, "planes": 2, "phasing": 1},
                       "template": {"altitude_km": 1200.0, "inclination_deg": 55.0}}],
    "sensor": {"min_elevation_deg": 10.0},
    "grid": {"resolution_deg": 5.0},
    "requirement": {"metric": "max_gap", "at_most": 7200.0, "area_fraction": 0.9},
    "compute": {"scheduler": "synchronous"},
    "sweep": {"altitude_km": [1000.0, 1400.0], "total": [6, 8], "planes": "all",
              "phasing": "all"},
}


def _study(**changes):
    data = json.loads(json.dumps(BASE))
    for key, value in changes.items():
        data[key] = value
    return parse_study(data)


def test_designs_cover_every_valid_combination():
    designs = sweep_designs(_study())
    # planes all = divisors, phasing all = 0..P-1: T=6 -> 1+2+3+6, T=8 -> 1+2+4+8, two altitudes
    assert len(designs) == 2 * ((1 + 2 + 3 + 6) + (1 + 2 + 4 + 8))
    assert {(d.total, d.planes, d.phasing) for d in designs} >= {(6, 6, 5), (8, 4, 3), (8, 1, 0)}
    assert all(d.total % d.planes == 0 and d.phasing < d.planes for d in designs)
    # values left out keep the study's group and sensor
    assert {d.inclination_deg for d in designs} == {55.0}
    assert {d.min_elevation_deg for d in designs} == {10.0}


def test_ranges_and_lists_skip_invalid_patterns():
    s = _study(sweep={"inclination_deg": {"from": 40, "to": 60, "step": 10}, "total": 12,
                      "planes": [3, 5, 4], "phasing": [0, 3], "min_elevation_deg": [5, 10]})
    designs = sweep_designs(s)
    assert sorted({d.inclination_deg for d in designs}) == [40.0, 50.0, 60.0]
    # 5 does not divide 12 and phasing 3 is not below 3 planes: 12/3/0, 12/4/0, 12/4/3
    assert sorted({(d.planes, d.phasing) for d in designs}) == [(3, 0), (4, 0), (4, 3)]
    assert len(designs) == 3 * 2 * 3


def test_no_valid_pattern_is_refused():
    with pytest.raises(StudyError, match="sweep"):
        sweep_designs(_study(sweep={"total": 7, "planes": [2, 3]}))


def test_sweep_needs_one_walker_group():
    data = json.loads(json.dumps(BASE))
    data["constellation"].append({"name": "extra", **data["constellation"][0]})
    data["constellation"][0]["name"] = "main"
    with pytest.raises(StudyError, match="sweep: needs the constellation to be one Walker"):
        parse_study(data)


def _single_study(design: WalkerDesign):
    data = json.loads(json.dumps(BASE))
    del data["sweep"]
    data["constellation"] = [{"walker": {"pattern": design.pattern, "total": design.total,
                                         "planes": design.planes, "phasing": design.phasing},
                              "template": {"altitude_km": design.altitude_km,
                                           "inclination_deg": design.inclination_deg}}]
    data["sensor"]["min_elevation_deg"] = design.min_elevation_deg
    return parse_study(data)


def test_sweep_rows_equal_single_runs_of_the_same_designs():
    study = _study(sweep={"altitude_km": [1000.0, 1400.0], "total": [6], "planes": [3, 6],
                          "phasing": [1], "min_elevation_deg": [10.0, 20.0]})
    result = run_sweep(study, scheduler="threads")
    assert result.computed == len(result.rows) == 8
    for row in result.rows[::3]:
        design = WalkerDesign("delta", row["total"], row["planes"], row["phasing"],
                              row["altitude_km"], row["inclination_deg"],
                              row["min_elevation_deg"])
        single = run_study(_single_study(design))  # the pipeline's own run (several bands)
        for m in single.summary["metrics"]:
            prefix = m["metric"] if m["k"] is None else f"{m['metric']}_k{m['k']}"
            for stat in STATISTICS:
                # the same cells summed in the same order: equal to the last bit
                assert row[f"{prefix}_{stat}"] == m["global"][stat], (prefix, stat)
        v = single.summary["requirement"]
        assert (row["meets"], row["achieved"], row["margin"]) == (v["met"], v["achieved"],
                                                                  v["margin"])


def test_interrupted_sweep_resumes_with_only_the_missing_designs(tmp_path, monkeypatch):
    study = _study()
    n = len(sweep_designs(study))
    real = evaluate_design
    calls = []

    def interrupted(design, context):
        if len(calls) == 5:
            raise KeyboardInterrupt
        calls.append(design)
        return real(design, context)

    monkeypatch.setattr(runner, "evaluate_design", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run_sweep(study, tmp_path)
    assert len(ResultStore(tmp_path / "sweep_test" / "store")) == 5
    assert not (tmp_path / "sweep_test" / "sweep.csv").exists()

    computed = []

    def counting(design, context):
        computed.append(design)
        return real(design, context)

    monkeypatch.setattr(runner, "evaluate_design", counting)
    resumed = run_sweep(study, tmp_path, figures=False)
    assert resumed.computed == len(computed) == n - 5
    assert not set(calls) & set(computed)
    # a second rerun computes nothing, and gives the same rows
    again = run_sweep(study, tmp_path, figures=False)
    assert again.computed == 0 and again.rows == resumed.rows
    # a changed study (other grid) never reuses the stored rows
    coarser = _study(grid={"resolution_deg": 10.0})
    assert run_sweep(coarser, tmp_path, figures=False).computed == n


def test_changed_step_sensor_or_span_changes_every_key():
    study = _study()
    d = sweep_designs(study)[0]
    from covergrid.trade.store import result_key

    base = result_key(evaluation_context(study).inputs(d))
    for change in ({"step_s": 30.0}, {"duration_h": 12.0}, {"epoch": "2031-05-02T00:00:00Z"},
                   {"sensor": {"min_elevation_deg": 10.0, "max_off_nadir_deg": 50.0}},
                   {"requirement": {"metric": "max_gap", "at_most": 3600.0,
                                    "area_fraction": 0.9}}):
        other = _study(**change)
        assert result_key(evaluation_context(other).inputs(d)) != base, change


def test_outputs_table_netcdf_and_trade_figures(tmp_path):
    study = _study()
    result = run_sweep(study, tmp_path)
    folder = tmp_path / "sweep_test"
    names = {p.relative_to(folder).as_posix() for p in result.files}
    assert {"sweep.csv", "sweep.nc", "study.resolved.yaml"} <= names
    for stem in ("trade_metric_vs_total", "trade_min_total", "trade_pareto"):
        assert {f"trades/sweep/{stem}.png", f"trades/sweep/{stem}.pdf"} <= names
    lines = (folder / "sweep.csv").read_text().splitlines()
    assert len(lines) == 1 + len(result.rows)
    assert lines[0].split(",") == row_columns(covergrid.resolve(study).nfold_max, True)
    with xr.open_dataset(folder / "sweep.nc") as ds:
        assert ds.sizes["design"] == len(result.rows)
        assert ds["max_gap_p95"].attrs["units"] == "s"
        assert ds["achieved"].attrs["units"] == "s"
        assert ds.attrs["Conventions"] == "CF-1.8"
        assert list(ds["total"].values) == [r["total"] for r in result.rows]
        assert [bool(x) for x in ds["meets"].values] == [r["meets"] for r in result.rows]


# --- real processes stopped mid-run (issue 6, item 3) ----------------------------------
# Each design here takes ~0.3 s (2 deg grid, 24 h at 30 s, 24 satellites), 45 designs.
SLOW_SWEEP = {
    **{k: v for k, v in BASE.items() if k not in ("sweep", "compute")},
    "study": "stopped",
    "duration_h": 24.0, "step_s": 30.0, "grid": {"resolution_deg": 2.0},
    "constellation": [{"walker": {"pattern": "delta", "total": 24, "planes": 4, "phasing": 1},
                       "template": {"altitude_km": 1000.0, "inclination_deg": 55.0}}],
    "sweep": {"altitude_km": [900.0, 1000.0, 1100.0], "total": 24, "planes": "all",
              "phasing": [0, 1]},
}
N_SLOW = 3 * (1 + 7 * 2)


def _cli(*args: str) -> list[str]:
    return [sys.executable, "-m", "covergrid.cli", *args]


def _records(folder: Path) -> list[Path]:
    return sorted(folder.glob("*.json")) if folder.is_dir() else []


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM, signal.SIGKILL],
                         ids=["SIGINT", "SIGTERM", "SIGKILL"])
def test_stopped_sweep_process_loses_nothing_finished(tmp_path, sig):
    path = tmp_path / "stopped.yaml"
    path.write_text(yaml.safe_dump(SLOW_SWEEP))
    out = tmp_path / "out"
    store = out / "stopped" / "store"
    env = {**os.environ, "PYTHONPATH": str(Path(covergrid.__file__).resolve().parents[1])}
    proc = subprocess.Popen(_cli("sweep", str(path), "--out", str(out), "--quiet"), env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 120
    while len(_records(store)) < 4 and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    assert proc.poll() is None, "the sweep finished before it could be stopped"
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=120)
    expected_rc = {signal.SIGINT: 130, signal.SIGTERM: 143}.get(sig, -signal.SIGKILL)
    assert proc.returncode == expected_rc, err.decode()
    kept = _records(store)
    assert 4 <= len(kept) < N_SLOW
    # every record at a final path is complete JSON (atomic writes), none is a temporary
    for p in kept:
        assert json.loads(p.read_text())["row"]["total"] == 24
    assert not (out / "stopped" / "sweep.csv").exists()
    if sig != signal.SIGKILL:  # cleaned up at once; after SIGKILL, by the next run
        assert sorted(p.name for p in out.iterdir()) == ["stopped"]
    rerun = subprocess.run(_cli("sweep", str(path), "--out", str(out), "--no-figures"),
                           env=env, capture_output=True, text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    assert (f"{N_SLOW} designs ({N_SLOW - len(kept)} computed, {len(kept)} from the store)"
            in rerun.stdout)
    assert len(_records(store)) == N_SLOW
    assert not [p for p in store.iterdir() if p.suffix == ".tmp"]
    assert sorted(p.name for p in out.iterdir()) == ["stopped"]


def test_sweep_command_reports_and_refuses_a_study_without_a_sweep(tmp_path, capsys):
    from covergrid.cli import main

    data = json.loads(json.dumps(BASE))
    path = tmp_path / "s.yaml"
    path.write_text(yaml.safe_dump(data))
    assert main(["sweep", str(path), "--out", str(tmp_path), "--no-figures", "--quiet"]) == 0
    assert (tmp_path / "sweep_test" / "sweep.csv").exists()
    del data["sweep"]
    path.write_text(yaml.safe_dump(data))
    assert main(["sweep", str(path), "--out", str(tmp_path / "x")]) == 2
    assert "sweep: the study file has no sweep block" in capsys.readouterr().err
    assert not (tmp_path / "x").exists()


def test_refine_transitions_reaches_the_engine_and_the_store_key():
    """`refine_transitions: false` gives the pure sampled gaps (whole steps) in runs and
    sweeps alike, and a sweep never reuses rows computed with the other setting."""
    import numpy as np

    from covergrid.trade.store import result_key

    on, off = _study(), _study(refine_transitions=False)
    gaps_off = run_study(off).dataset.max_gap.values
    assert np.all(np.mod(gaps_off, off.step_s) == 0.0)
    gaps_on = run_study(on).dataset.max_gap.values
    assert np.any(np.mod(gaps_on, on.step_s) != 0.0)
    design = sweep_designs(on)[0]
    k_on = result_key(evaluation_context(on).inputs(design))
    k_off = result_key(evaluation_context(off).inputs(design))
    assert k_on != k_off
