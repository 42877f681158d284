"""The covergrid command: run end to end, check, elements (vs Vallado), schema, exit statuses."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

from conftest import REPO, TINY_STUDY, compliance_report, write_study
from covergrid import __version__, cli
from covergrid.compute.metrics import COVERAGE_METRICS as METRICS
from covergrid.study import export_schema, load_study, resolve


def _numbers(text: str, label: str) -> list[float]:
    line = next(ln for ln in text.splitlines() if ln.startswith(label))
    return [float(x) for x in re.findall(r"-?\d+\.\d+", line[len(label):])]


def test_version_and_help_document_exit_statuses(capsys):
    assert cli.main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"covergrid {__version__}"
    for command in ([], ["run"], ["check"], ["elements"], ["schema"], ["sweep"], ["size"]):
        assert cli.main([*command, "--help"]) == 0
        out = capsys.readouterr().out
        assert "exit status:" in out and "1   run: the study's requirement is not met" in out
        for status in ("\n  0   ", "\n  2   bad input or refused", "\n  3   a failure while "
                       "running", "130 interrupted (SIGINT", "143 terminated (SIGTERM)",
                       "--debug"):
            assert status in out, (command, status)


def test_usage_error_is_one_line_and_status_2(capsys):
    assert cli.main(["run"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("covergrid: error: the following arguments are required: STUDY.yaml")
    assert len(err.strip().splitlines()) == 1


# Vallado, Fundamentals of Astrodynamics and Applications, 5th ed., Example 2-5 (RV2COE),
# with the example's mu = 398600.4415 km^3/s^2.
VALLADO_2_5_R_KM = ("6524.834", "6862.875", "6448.296")
VALLADO_2_5_V_KM_S = ("4.901327", "5.533756", "-1.976341")
VALLADO_MU_KM3_S2 = "398600.4415"
# The example prints a = 36127.343 km and p = 11067.790 km; computing from its printed
# (rounded) r and v gives values within 10 m of those, so the check allows 10 m.
VALLADO_2_5_LENGTH_KM = 1e-2
# Angles are printed to 0.001 deg (argp to 0.01 deg).
VALLADO_2_5_ANGLE_DEG = 1e-3
VALLADO_2_5_ARGP_DEG = 1e-2


def test_elements_from_state_vector_vallado_2_5(capsys):
    assert cli.main(["elements", "--position-km", *VALLADO_2_5_R_KM, "--velocity-km-s",
                     *VALLADO_2_5_V_KM_S, "--mu-km3-s2", VALLADO_MU_KM3_S2]) == 0
    out = capsys.readouterr().out
    assert _numbers(out, "semi-latus rectum p")[0] == pytest.approx(11067.790,
                                                                     abs=VALLADO_2_5_LENGTH_KM)
    assert _numbers(out, "semi-major axis a")[0] == pytest.approx(36127.343,
                                                                   abs=VALLADO_2_5_LENGTH_KM)
    assert _numbers(out, "eccentricity e")[0] == pytest.approx(0.832853, abs=1e-6)
    assert _numbers(out, "inclination i")[0] == pytest.approx(87.870, abs=VALLADO_2_5_ANGLE_DEG)
    assert _numbers(out, "RAAN")[0] == pytest.approx(227.898, abs=VALLADO_2_5_ANGLE_DEG)
    assert _numbers(out, "argument of perigee")[0] == pytest.approx(53.38,
                                                                     abs=VALLADO_2_5_ARGP_DEG)
    assert _numbers(out, "true anomaly nu")[0] == pytest.approx(92.335,
                                                                 abs=VALLADO_2_5_ANGLE_DEG)
    for label, unit in (("semi-major axis a", "km"), ("inclination i", "deg"),
                        ("period", "s"), ("perigee altitude", "km"), ("apogee altitude", "km")):
        line = next(ln for ln in out.splitlines() if ln.startswith(label))
        assert line.endswith(f" {unit}")


# Vallado, 5th ed., Example 2-6 (COE2RV): p = 11067.79 km, e = 0.83285, i = 87.87 deg,
# RAAN = 227.89 deg, argp = 53.38 deg, nu = 92.335 deg -> r = (6525.36812, 6861.53183,
# 6449.11861) km, v = (4.90227864, 5.53313957, -1.9757101) km/s.
VALLADO_2_6_R_KM = (6525.36812, 6861.53183, 6449.11861)
VALLADO_2_6_V_KM_S = (4.90227864, 5.53313957, -1.9757101)
# The command takes a, not p: a = p / (1 - e^2) with the example's printed p and e.
VALLADO_2_6_A_KM = 11067.79 / (1 - 0.83285**2)
ONE_METRE_KM = 1e-3
ONE_MM_S_KM_S = 1e-6


def test_elements_to_state_vector_vallado_2_6(capsys):
    assert cli.main(["elements", "--a-km", repr(VALLADO_2_6_A_KM), "--e", "0.83285",
                     "--i-deg", "87.87", "--raan-deg", "227.89", "--argp-deg", "53.38",
                     "--nu-deg", "92.335", "--mu-km3-s2", VALLADO_MU_KM3_S2]) == 0
    out = capsys.readouterr().out
    np.testing.assert_allclose(_numbers(out, "position r"), VALLADO_2_6_R_KM, atol=ONE_METRE_KM)
    np.testing.assert_allclose(_numbers(out, "velocity v"), VALLADO_2_6_V_KM_S,
                               atol=ONE_MM_S_KM_S)


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        (["elements"], "give --position-km and --velocity-km-s"),
        (["elements", "--position-km", "7000", "0", "0"], "--velocity-km-s: is required"),
        (["elements", "--a-km", "7000", "--i-deg", "50", "--nu-deg", "0", "--e", "1.5"],
         "--e: must be in [0, 1)"),
        (["elements", "--a-km", "-6000", "--i-deg", "50", "--nu-deg", "0"],
         "--a-km: must give a positive semi-major axis; allowed: a > 0; got -6000"),
        (["elements", "--position-km", "0", "0", "0", "--velocity-km-s", "1", "0", "0"],
         "--position-km: |r| = 0 km; allowed: 1 km <= |r| < 924,647 km"),
    ],
)
def test_elements_bad_input(argv, fragment, capsys):
    assert cli.main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("covergrid: error: ") and fragment in err and "Traceback" not in err


def test_schema_command_prints_the_checked_in_schema(capsys):
    assert cli.main(["schema"]) == 0
    out = capsys.readouterr().out
    assert json.loads(out) == export_schema()
    assert out == (REPO / "configs" / "schema.json").read_text(encoding="utf-8")


def test_check_prints_the_work_without_computing(tmp_path, capsys, monkeypatch):
    study = write_study(tmp_path, TINY_STUDY + "requirement: {metric: max_gap, at_most: 3600}\n")
    monkeypatch.chdir(tmp_path)
    assert cli.main(["check", str(study)]) == 0
    out = capsys.readouterr().out
    assert "study tiny-ring: valid" in out
    assert "6 satellites: Walker delta 6/3/1 at 1200 km, 55 deg" in out
    assert "-> 120 samples" in out and "18 x 36 = 648 cells" in out
    assert "requirement     max_gap at most 3600" in out
    assert cli.main(["check", str(study), "--json"]) == 0
    est = json.loads(capsys.readouterr().out)
    assert (est["satellites"], est["steps"], est["cells"]) == (6, 120, 648)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["study.yaml"]  # nothing written


def test_check_refuses_a_study_over_the_memory_limit(tmp_path, capsys):
    study = write_study(tmp_path,
                        TINY_STUDY.replace("{resolution_deg: 10}", "{resolution_deg: 0.25}")
                        + "compute: {memory_limit_gb: 0.1}\n")
    assert cli.main(["check", str(study)]) == 2
    err = capsys.readouterr().err
    assert "compute.memory_limit_gb: the run needs about" in err and "--force" in err
    assert "compute.memory_limit_gb is 100 MB" in err  # not "0.10 GB"


def test_run_end_to_end_writes_every_output(tmp_path, capsys):
    study = write_study(tmp_path, TINY_STUDY + "requirement: {metric: max_gap, at_most: 3600, "
                   "area_fraction: 0.5}\n")
    out = tmp_path / "out"
    assert cli.main(["run", str(study), "--out", str(out), "--no-maps", "--quiet"]) == 0
    folder = out / "tiny-ring"
    assert sorted(p.name for p in folder.iterdir()) == [
        "coverage.nc", "report.html", "study.resolved.yaml", "summary.csv", "summary.json"]
    with xr.open_dataset(folder / "coverage.nc") as ds:
        assert set(METRICS) <= set(ds.data_vars)
        assert ds.attrs["Conventions"] == "CF-1.8"
        assert load_study(study).dump_resolved_yaml() == ds.attrs["covergrid_study"]
    summary = json.loads((folder / "summary.json").read_text())
    assert summary["study"] == "tiny-ring" and summary["requirement"]["met"] is True
    assert summary["requirement"]["margin"] > 0
    assert "secular J2" in summary["model_limits"]  # every report states the model's limits
    header = (folder / "summary.csv").read_text().splitlines()[0]
    assert header.startswith("metric,k,units,scope,lat_min_deg,lat_max_deg")
    # The resolved study is itself a valid study that describes the same run.
    assert load_study(folder / "study.resolved.yaml") == load_study(study)
    assert not any(p.name.endswith(".tmp") for p in folder.iterdir())
    report = compliance_report(folder / "coverage.nc")
    assert report["high_count"] == 0, report["high_priorities"]


def test_local_cluster_gives_the_same_data(tmp_path):
    pytest.importorskip("distributed")
    study = write_study(tmp_path, TINY_STUDY + "compute: {scheduler: local-cluster, workers: 1, "
                   "threads_per_worker: 1}\n")
    ds_cluster = load_study(study)
    import covergrid

    a = covergrid.run(ds_cluster)
    b = covergrid.run(ds_cluster, scheduler="threads")
    xr.testing.assert_identical(a.drop_attrs(), b.drop_attrs())


def test_run_status_1_when_the_requirement_is_not_met(tmp_path, capsys):
    # Six satellites cannot keep every cell's gap under a minute for 2 h.
    study = write_study(tmp_path, TINY_STUDY + "requirement: {metric: max_gap, at_most: 60}\n")
    assert cli.main(["run", str(study), "--out", str(tmp_path / "o"), "--no-maps"]) == 1
    out = capsys.readouterr().out
    assert "NOT MET" in out and "margin -" in out
    assert (tmp_path / "o" / "tiny-ring" / "summary.json").exists()


def test_run_into_a_file_is_refused_before_computing(tmp_path, capsys):
    study = write_study(tmp_path, TINY_STUDY)
    blocker = tmp_path / "blocker"
    blocker.write_text("x")
    assert cli.main(["run", str(study), "--out", str(blocker), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"covergrid: error: {blocker}: cannot write: a part of the path is a "
                          "file")


def test_force_overrides_the_memory_limit(tmp_path, capsys):
    study = write_study(tmp_path, TINY_STUDY + "compute: {memory_limit_gb: 0.01}\n")
    out = tmp_path / "o"
    assert cli.main(["run", str(study), "--out", str(out), "--no-maps", "--quiet"]) == 2
    assert not out.exists()
    assert cli.main(["run", str(study), "--out", str(out), "--no-maps", "--quiet",
                     "--force"]) == 0
    assert (out / "tiny-ring" / "coverage.nc").exists()


def test_scheduler_option_gives_identical_data(tmp_path, capsys):
    study = write_study(tmp_path, TINY_STUDY)
    a, b = tmp_path / "a", tmp_path / "b"
    assert cli.main(["run", str(study), "--out", str(a), "--no-maps", "--quiet",
                     "--scheduler", "synchronous"]) == 0
    assert cli.main(["run", str(study), "--out", str(b), "--no-maps", "--quiet"]) == 0
    with xr.open_dataset(a / "tiny-ring" / "coverage.nc") as da_, \
            xr.open_dataset(b / "tiny-ring" / "coverage.nc") as db_:
        xr.testing.assert_identical(da_.drop_attrs(), db_.drop_attrs())
    assert cli.main(["run", str(study), "--out", str(a), "--scheduler", "bogus"]) == 2
    assert "compute.scheduler: unknown scheduler" in capsys.readouterr().err


def test_python_api_matches_the_command(tmp_path):
    import covergrid

    study = covergrid.load_study(write_study(tmp_path, TINY_STUDY))
    ds = covergrid.run(study)
    est = covergrid.estimate(study)
    assert ds.sizes["lat"] * ds.sizes["lon"] == est["cells"]
    # The visit estimate is a planning figure; on this study it is within a factor of 2.
    assert 0.5 < est["visits"] / float(ds["visits"]) < 2.0


def test_console_script_runs_in_a_real_process(tmp_path):
    study = write_study(tmp_path, TINY_STUDY)
    proc = subprocess.run([sys.executable, "-m", "covergrid.cli", "check", str(study)],
                          capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 0, proc.stderr
    assert "study tiny-ring: valid" in proc.stdout


@pytest.mark.slow  # cartopy figures: 3-8 s
def test_run_with_figures(tmp_path):
    pytest.importorskip("cartopy")
    study = write_study(tmp_path, TINY_STUDY)
    assert cli.main(["run", str(study), "--out", str(tmp_path / "o"), "--quiet"]) == 0
    folder = tmp_path / "o" / "tiny-ring"
    names = {p.relative_to(folder).as_posix() for p in folder.rglob("*") if p.is_file()}
    for metric in ("coverage_fraction", "max_gap", "mean_response_time", "mean_in_view"):
        assert {f"maps/{metric}.png", f"maps/{metric}.pdf"} <= names
    assert {"ground_tracks.png", "ground_tracks.pdf", "latitude_profile.png",
            "latitude_profile.pdf"} <= names
    assert (folder / "maps" / "max_gap.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_scheduler_address_of_an_existing_cluster(tmp_path, capsys):
    distributed = pytest.importorskip("distributed")
    study = write_study(tmp_path, TINY_STUDY)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None, processes=False,
                                  protocol="tcp://") as cluster:
        address = cluster.scheduler_address
        assert address.startswith("tcp://127.0.0.1:")
        assert cli.main(["run", str(study), "--out", str(tmp_path / "c"), "--no-maps",
                         "--quiet", "--scheduler", address]) == 0
    assert cli.main(["run", str(study), "--out", str(tmp_path / "t"), "--no-maps",
                     "--quiet"]) == 0
    with xr.open_dataset(tmp_path / "c" / "tiny-ring" / "coverage.nc") as a, \
            xr.open_dataset(tmp_path / "t" / "tiny-ring" / "coverage.nc") as b:
        xr.testing.assert_identical(a.drop_attrs(), b.drop_attrs())


def test_nfold_requirement_uses_its_fold(tmp_path, capsys):
    # k = 6 means all six in view at once: impossible here, as the two satellites of a plane
    # are 180 deg apart while one coverage circle at 1200 km and 10 deg spans under 60 deg of
    # central angle. So any positive 6-fold share fails; nfold_max grows to 6.
    study = write_study(tmp_path, TINY_STUDY + "requirement: {metric: nfold_fraction, k: 6, "
                   "at_least: 0.01, area_fraction: 0.5}\n")
    assert resolve(load_study(study)).nfold_max == 6
    assert cli.main(["run", str(study), "--out", str(tmp_path / "o"), "--no-maps",
                     "--quiet"]) == 1
    summary = json.loads((tmp_path / "o" / "tiny-ring" / "summary.json").read_text())
    v = summary["requirement"]
    assert (v["metric"], v["k"], v["met"], v["achieved"]) == ("nfold_fraction", 6, False, 0.0)


def test_quiet_still_prints_the_verdict_line_with_units(tmp_path, capsys):
    study = write_study(tmp_path, TINY_STUDY + "requirement: {metric: max_gap, at_most: 3600, "
                        "area_fraction: 0.5}\n")
    status = cli.main(["run", str(study), "--out", str(tmp_path / "o"), "--no-maps",
                       "--no-report", "--quiet"])
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 1 and lines[0].startswith("requirement max_gap at most 3600.0 s over "
                                                   "50 % of the area: ")
    # threshold, achieved and margin: seconds, one decimal each, the margin signed
    assert re.search(r"\(achieved \d+\.\d s, margin [+-]\d+\.\d s; \d+\.\d % of the area",
                     lines[0]), lines[0]
    assert status == (0 if "NOT MET" not in lines[0] else 1)
