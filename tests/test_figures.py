"""The figures of a run: only those the study asks for, the same drawn here or in helpers,
written only into the folder given, errors raised in the caller."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from PIL import Image

from conftest import TINY_STUDY, write_study
from covergrid.errors import CovergridError
from covergrid.pipeline import figures
from covergrid.pipeline.run import run_study
from covergrid.render import maps as render_maps
from covergrid.study import load_study
from covergrid.study.build import resolve


@pytest.fixture(scope="module")
def computed(tmp_path_factory):
    """A resolved tiny study asking for two maps (one of them per fold), and its Dataset."""
    folder = tmp_path_factory.mktemp("study")
    text = (TINY_STUDY + "maps: {metrics: [max_gap, nfold_fraction]}\n"
            + "requirement: {metric: nfold_fraction, k: 2, at_least: 0.1}\n")
    study = resolve(load_study(write_study(folder, text)))
    return study, run_study(study).dataset


def _names(paths, root):
    return [p.relative_to(root).as_posix() for p in paths]


def test_jobs_are_the_figures_the_study_asks_for(computed):
    study, ds = computed
    jobs = figures.figure_jobs(study, ds)
    folds = [int(k) for k in ds["k"].values]
    assert [j.name for j in jobs] == (["map max_gap"] + [f"map nfold_fraction k={k}" for k in folds]
                                      + ["ground tracks", "latitude profile"])
    # each job carries only what it draws
    assert set(jobs[0].data[0].data_vars) == {"max_gap", "lat_bnds", "lon_bnds"}
    assert [int(k) for k in jobs[1].data[0]["k"].values] == [folds[0]]
    assert set(jobs[-1].data[0].data_vars) == {"max_gap", "cell_area", "lat_bnds", "lon_bnds"}


def test_helpers_draw_the_same_files_in_the_same_order(computed, tmp_path):
    study, ds = computed
    jobs = figures.figure_jobs(study, ds)
    here = figures.draw_figures(jobs, tmp_path / "here", workers=1)
    shared = figures.draw_figures(jobs, tmp_path / "shared", workers=3)
    assert _names(here, tmp_path / "here") == _names(shared, tmp_path / "shared")
    for a, b in zip(here, shared, strict=True):
        if a.suffix == ".png":
            with Image.open(a) as ia, Image.open(b) as ib:
                assert np.array_equal(np.asarray(ia), np.asarray(ib)), a.name
    # nothing but the listed files, and nothing outside the folder given
    listed = sorted(p.relative_to(tmp_path / "shared").as_posix()
                    for p in (tmp_path / "shared").rglob("*") if p.is_file())
    assert listed == sorted(_names(shared, tmp_path / "shared"))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["here", "shared"]


def test_an_error_in_a_helper_is_raised_here(computed, tmp_path):
    study, ds = computed
    good = figures.figure_jobs(study, ds)[0]
    bad = figures.FigureJob("map nonsense", render_maps.save_metric_maps, (ds, ["nonsense"]),
                            {"caption": None})
    # this process takes the first job, the helper the last: the error comes from the helper
    with pytest.raises(CovergridError, match="'nonsense' is not in the Dataset"):
        figures.draw_figures([good, bad], tmp_path, workers=2)


def test_how_many_helpers_a_run_starts(computed, monkeypatch):
    study, ds = computed
    n_jobs = len(figures.figure_jobs(study, ds))
    assert figures.figure_count(study) == n_jobs
    import dataclasses

    from covergrid.pipeline import resources

    monkeypatch.setattr(figures, "_usable_cpus", lambda: 8)
    monkeypatch.setattr(figures, "_idle_cpus", lambda cpus: cpus - 0.3)
    monkeypatch.setattr(resources, "available_memory_bytes", lambda: 64 * 2**30)
    assert figures.figure_helpers(study) == min(8, n_jobs // figures.JOBS_PER_PROCESS)
    # other work keeps 7 of the 8 CPUs busy: a helper for the idle one and one for the CPU
    # of this process (which draws none); on a machine busier still, one helper takes the
    # figures off the path of this process (it draws the ground tracks while this computes)
    monkeypatch.setattr(figures, "_idle_cpus", lambda cpus: 1.2)
    assert figures.figure_helpers(study) == 2
    monkeypatch.setattr(figures, "_idle_cpus", lambda cpus: -3.0)
    assert figures.figure_helpers(study) == 1
    monkeypatch.setattr(figures, "_idle_cpus", lambda cpus: cpus - 0.3)

    def with_compute(**kw):
        return dataclasses.replace(study, compute=dataclasses.replace(study.compute, **kw))

    # nothing but this process may draw: no helper
    assert figures.figure_helpers(with_compute(scheduler="synchronous")) == 0
    assert figures.figure_helpers(with_compute(workers=1)) == 0
    monkeypatch.setattr(figures, "_usable_cpus", lambda: 1)
    assert figures.figure_helpers(study) == 0
    monkeypatch.setattr(figures, "_usable_cpus", lambda: 8)
    # memory for no helper: this process draws
    monkeypatch.setattr(resources, "available_memory_bytes",
                        lambda: figures.HELPER_BASE_BYTES)
    assert figures.figure_helpers(study) == 0


def test_a_run_with_helpers_writes_what_a_run_without_writes(computed, tmp_path, monkeypatch):
    study, _ = computed
    monkeypatch.setattr(figures, "figure_helpers", lambda study: 0)
    here = run_study(study, tmp_path / "here").files
    monkeypatch.setattr(figures, "figure_helpers", lambda study: 2)
    shared = run_study(study, tmp_path / "shared").files
    assert _names(here, tmp_path / "here") == _names(shared, tmp_path / "shared")
    for a, b in zip(here, shared, strict=True):
        if a.suffix == ".png":
            with Image.open(a) as ia, Image.open(b) as ib:
                assert np.array_equal(np.asarray(ia), np.asarray(ib)), a.name


def test_a_pool_raises_the_error_of_a_job_and_leaves_no_helper(computed, tmp_path):
    from covergrid.pipeline.figure_pool import FigurePool

    study, ds = computed
    good = figures.figure_jobs(study, ds)[0]
    bad = figures.FigureJob("map nonsense", render_maps.save_metric_maps, (ds, ["nonsense"]),
                            {"caption": None})
    with FigurePool(1) as pool:
        procs = [h.proc for h in pool._helpers]
        pool.submit([good], tmp_path)
        pool.submit([good, bad], tmp_path)  # the same job is not queued twice
        assert len(pool._queue) <= 2
        with pytest.raises(CovergridError, match="'nonsense' is not in the Dataset"):
            pool.collect([good, bad])
    assert all(p.poll() is not None for p in procs)
    # an exception in the block (an interrupt while computing) stops the helpers too
    with pytest.raises(KeyboardInterrupt), FigurePool(1) as pool:
        procs = [h.proc for h in pool._helpers]
        raise KeyboardInterrupt
    assert all(p.poll() is not None for p in procs)


@pytest.mark.slow
def test_a_script_without_a_main_guard_draws_with_helpers(tmp_path):
    # Helpers are fresh interpreters that never import the caller's script: a script calling
    # covergrid.run at its top level must not run again in them.
    study = write_study(tmp_path, TINY_STUDY + "maps: {metrics: [max_gap, coverage_fraction, "
                        "mean_gap, gap_count, pass_count, mean_in_view, max_in_view]}\n")
    script = tmp_path / "analysis.py"
    script.write_text(
        "import covergrid\n"
        "from covergrid.pipeline import figures\n"
        "figures.figure_helpers = lambda study: 2\n"
        f"covergrid.run({str(study)!r}, out_dir={str(tmp_path / 'out')!r})\n"
        "print('ran once')\n", encoding="utf-8")
    proc = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                          cwd=tmp_path, timeout=300, check=False)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert proc.stdout.count("ran once") == 1
    assert len(list((tmp_path / "out" / "tiny-ring" / "maps").glob("*.png"))) == 7


def test_a_pool_runs_its_preparation_in_every_helper_and_raises_its_error(computed, tmp_path):
    from covergrid.pipeline.figure_pool import FigurePool

    study, ds = computed
    job = figures.figure_jobs(study, ds)[0]
    with FigurePool(2, prepare=figures.prepare_job(study)) as pool:
        pool.submit([job], tmp_path / "good")
        assert _names(pool.collect([job]), tmp_path / "good") == ["maps/max_gap.png",
                                                                  "maps/max_gap.pdf"]
    broken = figures.FigureJob("drawing set-up", render_maps.prepare_drawing, ("nowhere",))
    with FigurePool(1, prepare=broken) as pool:
        pool.submit([job], tmp_path / "bad")
        with pytest.raises(CovergridError, match="'nowhere' is unknown"):
            pool.collect([job])
