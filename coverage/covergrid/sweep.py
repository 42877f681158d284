"""Batch trade studies: every combination of altitude, inclination, T/P/F and elevation.

A *design* is one Walker constellation with one sensor elevation limit. Each design is one
engine call (:func:`covergrid.engine.compute_coverage`) on the study with the design's
values substituted, run as a single latitude band (one task per design) so that the
parallelism is across designs; its result reduces to one *row*: the parameters, the
area-weighted statistics of every metric (:func:`covergrid.summary.area_statistics`) and,
when the study states a requirement, its verdict (:func:`covergrid.summary.
requirement_verdict`).

Designs run concurrently on the study's scheduler (threads, processes, synchronous, a local
dask.distributed cluster or an existing scheduler's address): each is submitted as one
future and, as soon as it finishes, its row is written to the :class:`covergrid.store.
ResultStore` under a key hashing every input that decides it (:meth:`EvalContext.inputs`).
A rerun skips the designs already stored; an interrupted run loses only the designs still
running.

Outputs of ``covergrid sweep`` (:func:`run_sweep`) in ``DIR/<study>/``: ``sweep.csv`` and
``sweep.nc`` (one row / one point on dimension ``design`` per design), ``store/`` (the
per-design records) and ``trades/sweep/`` (trade figures, PNG 200 dpi and PDF).
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import asdict, dataclass, replace
from pathlib import Path
from typing import Any

from covergrid.constants import DEG, WGS84_A_KM
from covergrid.errors import StudyError

__all__ = [
    "Design",
    "EvalContext",
    "SweepResult",
    "STATISTICS",
    "divisors",
    "walker_options",
    "sweep_designs",
    "evaluate_design",
    "design_runner",
    "run_designs",
    "row_columns",
    "run_sweep",
    "write_table",
    "trade_figures",
]

#: Area-weighted statistics of each metric kept in a design's row (see
#: :func:`covergrid.summary.area_statistics`); column ``<metric>_<statistic>``.
STATISTICS = ("mean", "min", "max", "p50", "p90", "p95")
#: Columns describing the design and how it was evaluated, in table order.
DESIGN_COLUMNS = ("key", "pattern", "total", "planes", "phasing", "altitude_km",
                  "inclination_deg", "min_elevation_deg", "lost_satellite", "resolution_deg",
                  "step_s")
#: Requirement columns (present when the study has a requirement).
VERDICT_COLUMNS = ("meets", "achieved", "margin", "area_fraction_met")


@dataclass(frozen=True)
class Design:
    """One Walker constellation and elevation limit to evaluate.

    Attributes
    ----------
    pattern : str
        ``"delta"`` or ``"star"``.
    total, planes, phasing : int
        Walker T/P/F.
    altitude_km : float
        Semi-major axis minus the WGS-84 equatorial radius [km].
    inclination_deg : float
        Inclination [deg].
    min_elevation_deg : float
        Minimum elevation of the sensor [deg].
    eccentricity, raan_deg, arg_perigee_deg, mean_anomaly_deg : float
        The rest of the Walker template (from the study's group) [unitless, deg].
    lost : int or None
        Index of a satellite removed from the pattern (robustness cases); None: intact.
    """

    pattern: str
    total: int
    planes: int
    phasing: int
    altitude_km: float
    inclination_deg: float
    min_elevation_deg: float
    eccentricity: float = 0.0
    raan_deg: float = 0.0
    arg_perigee_deg: float = 0.0
    mean_anomaly_deg: float = 0.0
    lost: int | None = None

    def full_elements(self):
        """Mean elements of the intact pattern [km, rad] (ids ``S-P<plane>-<slot>``)."""
        from covergrid.orbits.walker import walker

        return walker(self.pattern, self.total, self.planes, self.phasing,
                      a_km=WGS84_A_KM + self.altitude_km, e=self.eccentricity,
                      i_rad=self.inclination_deg * DEG, raan0_rad=self.raan_deg * DEG,
                      argp_rad=self.arg_perigee_deg * DEG, M0_rad=self.mean_anomaly_deg * DEG,
                      id_prefix="S")

    def elements(self):
        """Mean elements of the design (without satellite ``lost``, if set) [km, rad]."""
        import numpy as np

        el = self.full_elements()
        if self.lost is None:
            return el
        keep = np.ones(len(el), dtype=bool)
        keep[self.lost] = False
        return el.subset(keep)

    @property
    def lost_id(self) -> str:
        """Id of the satellite removed, or ``""``."""
        return "" if self.lost is None else self.full_elements().ids[self.lost]

    def intact(self) -> Design:
        """The same design with no satellite removed."""
        return replace(self, lost=None)

    @property
    def label(self) -> str:
        """``T/P/F`` text."""
        return f"{self.total}/{self.planes}/{self.phasing}"


@dataclass(frozen=True)
class EvalContext:
    """Everything besides the design that decides a row: span, grid, sensor, requirement.

    Attributes
    ----------
    epoch : str
        ISO 8601 UTC start.
    duration_s, step_s : float
        Span and step [s].
    resolution_deg, lat_min_deg, lat_max_deg : float
        Grid [deg].
    max_off_nadir_deg, max_range_km : float or None
        Other sensor limits [deg, km].
    nfold_max : int
        K of ``nfold_fraction``.
    requirement : tuple or None
        ``(metric, at_most, at_least, area_fraction, k)``.
    refine_transitions : bool
        Gap boundaries at limit-crossing times (see :func:`covergrid.engine.compute_coverage`).
    software : str
        :func:`covergrid.store.software_fingerprint`.
    """

    epoch: str
    duration_s: float
    step_s: float
    resolution_deg: float
    lat_min_deg: float
    lat_max_deg: float
    max_off_nadir_deg: float | None
    max_range_km: float | None
    nfold_max: int
    requirement: tuple | None
    software: str
    refine_transitions: bool = True

    @classmethod
    def from_study(cls, study, *, resolution_deg: float | None = None,
                   step_s: float | None = None) -> EvalContext:
        """The study's context, optionally with another grid cell size or step."""
        from covergrid.store import software_fingerprint

        r = study.requirement
        req = None if r is None else (r.metric, r.at_most, r.at_least, r.area_fraction, r.k)
        return cls(
            epoch=study.epoch, duration_s=float(study.duration_s),
            step_s=float(step_s if step_s is not None else study.step_s),
            resolution_deg=float(resolution_deg if resolution_deg is not None
                                 else study.grid.resolution_deg),
            lat_min_deg=float(study.grid.lat_min_deg), lat_max_deg=float(study.grid.lat_max_deg),
            max_off_nadir_deg=study.sensor.max_off_nadir_deg,
            max_range_km=study.sensor.max_range_km, nfold_max=int(study.nfold_max),
            requirement=req, software=software_fingerprint(),
            refine_transitions=bool(study.refine_transitions))

    def requirement_dict(self) -> dict | None:
        """Keyword arguments of :func:`covergrid.summary.requirement_verdict`."""
        if self.requirement is None:
            return None
        metric, at_most, at_least, area_fraction, k = self.requirement
        return {"metric": metric, "at_most": at_most, "at_least": at_least,
                "area_fraction": area_fraction, "k": k}

    def inputs(self, design: Design) -> dict[str, Any]:
        """Every input of a design's row: hashed into its store key."""
        return {"design": asdict(design), "context": asdict(self)}

    def grid(self):
        """The engine's grid specification."""
        from covergrid.grid import GridSpec

        return GridSpec(resolution_deg=self.resolution_deg, lat_min_deg=self.lat_min_deg,
                        lat_max_deg=self.lat_max_deg)


def divisors(n: int) -> list[int]:
    """Every divisor of ``n`` in increasing order."""
    return [d for d in range(1, n + 1) if n % d == 0]


def walker_options(total: int, planes, phasing) -> list[tuple[int, int]]:
    """Valid (P, F) pairs of a total for ``planes``/``phasing`` given as ``"all"`` or lists.

    Planes that do not divide the total, and phasings not below the planes, are left out.
    """
    p_list = divisors(total) if planes == "all" else [p for p in dict.fromkeys(planes)
                                                      if total % p == 0]
    out = []
    for p in p_list:
        f_list = range(p) if phasing == "all" else [f for f in dict.fromkeys(phasing) if f < p]
        out += [(p, f) for f in f_list]
    return out


def _template(study) -> tuple[Any, Any]:
    """The study's Walker group (walker, template), or (None, None)."""
    for g in study.constellation:
        if g.walker is not None:
            return g.walker, g.template
    return None, None


def _template_extras(template) -> dict[str, Any]:
    if template is None:
        return {}
    return {"eccentricity": template.eccentricity, "raan_deg": template.raan_deg,
            "arg_perigee_deg": template.arg_perigee_deg,
            "mean_anomaly_deg": template.mean_anomaly_deg}


def sweep_designs(study) -> list[Design]:
    """Every design of the study's ``sweep:`` block, in file order of the axes.

    Order: altitude, inclination, minimum elevation, total, planes, phasing (the last
    varies fastest). Values not listed keep the study's Walker group or sensor value.

    Raises
    ------
    StudyError
        If the study has no sweep block or no combination is a valid Walker pattern.
    """
    sw = study.sweep
    if sw is None:
        raise StudyError("the study has no sweep block; add sweep: {altitude_km, "
                         "inclination_deg, total, planes, phasing, min_elevation_deg}",
                         field="sweep")
    w, t = _template(study)
    assert w is not None and t is not None  # the study model requires one Walker group
    alts = sw.altitude_km or [t.a_km - WGS84_A_KM]
    incs = sw.inclination_deg or [t.inclination_deg]
    els = sw.min_elevation_deg or [study.sensor.min_elevation_deg]
    totals = sw.total or [w.total]
    planes = sw.planes if sw.planes is not None else [w.planes]
    phasing = sw.phasing if sw.phasing is not None else [w.phasing]
    pattern = sw.pattern or w.pattern
    extras = _template_extras(t)
    designs = []
    for alt in dict.fromkeys(alts):
        for inc in dict.fromkeys(incs):
            for el in dict.fromkeys(els):
                for total in dict.fromkeys(totals):
                    for p, f in walker_options(total, planes, phasing):
                        designs.append(Design(pattern, int(total), p, f, float(alt), float(inc),
                                              float(el), **extras))
    if not designs:
        raise StudyError(f"no combination of total {list(totals)}, planes {planes} and "
                         f"phasing {phasing} is a Walker pattern (planes must divide the "
                         "total, phasing must be below the planes)", field="sweep")
    return designs


def _statistics_row(ds) -> dict[str, float]:
    """``<metric>_<statistic>`` (and ``nfold_fraction_k<k>_<statistic>``) of a Dataset."""
    from covergrid.metrics import METRICS
    from covergrid.summary import area_statistics

    area = ds["cell_area"].transpose("lat", "lon").values
    row: dict[str, float] = {}
    for name in METRICS:
        var = ds[name]
        fields = ([(f"{name}_k{int(k)}", var.sel(k=k)) for k in var["k"].values]
                  if "k" in var.dims else [(name, var)])
        for prefix, da in fields:
            stats = area_statistics(da.transpose("lat", "lon").values, area)
            for s in STATISTICS:
                row[f"{prefix}_{s}"] = float(stats[s])
    return row


def evaluate_design(design: Design, context: EvalContext) -> dict[str, Any]:
    """Coverage of one design reduced to one row (one engine call, one band task).

    Parameters
    ----------
    design : Design
        The constellation and elevation limit.
    context : EvalContext
        Span, grid, other sensor limits, requirement.

    Returns
    -------
    dict
        The columns of :func:`row_columns` for this design (the key is added by
        :func:`run_designs`); ``elapsed_s`` is the wall time of the evaluation [s].
    """
    from covergrid.engine import SensorSpec, compute_coverage
    from covergrid.summary import requirement_verdict

    start = time.perf_counter()
    grid = context.grid()
    sensor = SensorSpec(min_elevation_deg=design.min_elevation_deg,
                        max_off_nadir_deg=context.max_off_nadir_deg,
                        max_range_km=context.max_range_km)
    ds = compute_coverage(design.elements(), context.epoch, context.duration_s, context.step_s,
                          grid, sensor, nfold_max=context.nfold_max, chunk_rows=grid.n_lat,
                          scheduler="synchronous",
                          refine_transitions=context.refine_transitions)
    row: dict[str, Any] = {
        "pattern": design.pattern, "total": design.total, "planes": design.planes,
        "phasing": design.phasing, "altitude_km": design.altitude_km,
        "inclination_deg": design.inclination_deg,
        "min_elevation_deg": design.min_elevation_deg, "lost_satellite": design.lost_id,
        "resolution_deg": context.resolution_deg, "step_s": context.step_s,
    }
    row.update(_statistics_row(ds))
    req = context.requirement_dict()
    if req is not None:
        v = requirement_verdict(ds, **req)
        row.update(meets=bool(v["met"]), achieved=v["achieved"], margin=v["margin"],
                   area_fraction_met=v["area_fraction_met"])
    row["elapsed_s"] = time.perf_counter() - start
    return row


def row_columns(nfold_max: int, requirement: bool) -> list[str]:
    """Column order of a design table."""
    from covergrid.metrics import METRICS

    cols = list(DESIGN_COLUMNS)
    for name in METRICS:
        prefixes = ([f"{name}_k{k}" for k in range(1, nfold_max + 1)]
                    if name == "nfold_fraction" else [name])
        cols += [f"{p}_{s}" for p in prefixes for s in STATISTICS]
    if requirement:
        cols += list(VERDICT_COLUMNS)
    return cols + ["elapsed_s"]


# --- running many designs ---------------------------------------------------------------
class _Deferred:
    """A future of the synchronous runner: computed when its result is asked for."""

    def __init__(self, fn: Callable, args: tuple) -> None:
        self._fn, self._args = fn, args

    def result(self) -> Any:
        return self._fn(*self._args)

    def cancel(self) -> bool:
        return True


class _Runner:
    """Submit design evaluations and iterate over them as they finish."""

    def __init__(self, kind: str, executor: Any = None, client: Any = None) -> None:
        self.kind, self.executor, self.client = kind, executor, client

    def submit(self, fn: Callable, *args: Any) -> Any:
        if self.kind == "synchronous":
            return _Deferred(fn, args)
        if self.client is not None:
            return self.client.submit(fn, *args, pure=False)
        return self.executor.submit(fn, *args)

    def as_completed(self, futures: Sequence[Any]) -> Iterator[Any]:
        if self.kind == "synchronous":
            return iter(futures)
        if self.client is not None:
            from distributed import as_completed

            return iter(as_completed(list(futures)))
        import concurrent.futures as cf

        return cf.as_completed(futures)

    def cancel(self, futures: Sequence[Any]) -> None:
        for f in futures:
            with contextlib.suppress(Exception):
                f.cancel()


@contextlib.contextmanager
def design_runner(study, scheduler: str | None = None) -> Iterator[_Runner]:
    """Where designs run: the study's ``compute.scheduler`` (or ``scheduler``).

    ``threads``: a thread pool of one thread per core (the kernel releases the GIL);
    ``processes``: a process pool (spawned); ``synchronous``: one after the other;
    ``local-cluster`` or an address: futures of a dask.distributed Client (the rows come
    back to this process, which writes the store, so workers need no shared disk).
    """
    name = scheduler or study.compute.scheduler
    if name == "synchronous":
        yield _Runner("synchronous")
        return
    if name in ("threads", "processes"):
        import concurrent.futures as cf

        workers = os.cpu_count() or 1
        if name == "threads":
            pool: Any = cf.ThreadPoolExecutor(max_workers=workers,
                                              thread_name_prefix="covergrid-design")
        else:
            import multiprocessing

            pool = cf.ProcessPoolExecutor(max_workers=workers,
                                          mp_context=multiprocessing.get_context("spawn"))
        try:
            yield _Runner(name, executor=pool)
        except BaseException:
            pool.shutdown(wait=False, cancel_futures=True)
            raise
        pool.shutdown(wait=True)
        return
    from covergrid.pipeline import _scheduler

    with _scheduler(study, name) as client:
        yield _Runner("client", client=client)


def run_designs(designs: Sequence[Design], context: EvalContext, store, runner: _Runner, *,
                progress: bool = False, desc: str = "designs") -> tuple[list[dict], int]:
    """Rows of many designs: stored ones read back, the others computed and stored at once.

    Parameters
    ----------
    designs : sequence of Design
        Designs to evaluate (duplicates are evaluated once).
    context : EvalContext
        Evaluation context shared by all.
    store : covergrid.store.ResultStore
        Where finished rows are kept.
    runner : object
        From :func:`design_runner`.
    progress : bool
        Show a progress bar with the ETA (stderr).
    desc : str
        Label of the progress bar.

    Returns
    -------
    tuple
        (rows in the order of ``designs``, each with its ``key``; number computed now).
    """
    from covergrid.store import result_key

    keys = [result_key(context.inputs(d)) for d in designs]
    rows: dict[str, dict] = {}
    todo: dict[str, Design] = {}
    for key, d in zip(keys, designs, strict=True):
        if key in rows or key in todo:
            continue
        row = store.get(key)
        if row is None:
            todo[key] = d
        else:
            rows[key] = row
    bar = None
    if progress and todo:
        from tqdm import tqdm

        # at a terminal, lively; into a log file, one line every 30 s at most
        bar = tqdm(total=len(rows) + len(todo), initial=len(rows), desc=desc, unit="design",
                   dynamic_ncols=True, mininterval=0.2 if sys.stderr.isatty() else 30.0)
    futures = {}
    try:
        for key, d in todo.items():
            futures[runner.submit(evaluate_design, d, context)] = key
        for fut in runner.as_completed(list(futures)):
            key = futures.pop(fut)
            row = {"key": key, **fut.result()}
            store.put(key, row, context.inputs(todo[key]))
            rows[key] = row
            if bar is not None:
                bar.update(1)
    except BaseException:
        runner.cancel(list(futures))
        raise
    finally:
        if bar is not None:
            bar.close()
    return [_restore(rows[k]) for k in keys], len(todo)


def _restore(row: dict) -> dict:
    """A stored row with JSON nulls turned back into NaN (strict JSON has no NaN)."""
    return {k: (math.nan if v is None else v) for k, v in row.items()}


# --- the sweep command ------------------------------------------------------------------
@dataclass
class SweepResult:
    """What :func:`run_sweep` produced.

    Attributes
    ----------
    rows : list of dict
        One row per design, in design order (columns :func:`row_columns`).
    computed : int
        Designs computed in this run (the others were read from the store).
    out_dir : pathlib.Path or None
        The study's output folder.
    files : list of pathlib.Path
        Files written (not counting the store records).
    """

    rows: list[dict]
    computed: int
    out_dir: Path | None = None
    files: list[Path] | None = None


def _columns_table(rows: list[dict], columns: Sequence[str]) -> dict[str, Any]:
    import numpy as np

    table: dict[str, Any] = {}
    for c in columns:
        values = [r.get(c, math.nan) for r in rows]
        if c in ("key", "pattern", "lost_satellite"):
            table[c] = np.array([str(v) for v in values], dtype=object)
        elif c == "meets":
            table[c] = np.array([bool(v) for v in values], dtype=bool)
        elif c in ("total", "planes", "phasing"):
            table[c] = np.array(values, dtype=np.int64)
        else:
            table[c] = np.array(values, dtype=float)
    return table


def write_table(rows: list[dict], study, folder: Path, stem: str) -> list[Path]:
    """Write a design table as ``<stem>.csv`` and ``<stem>.nc`` (dimension ``design``)."""
    import numpy as np
    import xarray as xr

    from covergrid import __version__, io
    from covergrid.metrics import METRICS

    columns = row_columns(study.nfold_max, study.requirement is not None)
    files = [io.write_csv([{c: r.get(c, math.nan) for c in columns} for r in rows],
                          folder / f"{stem}.csv", columns)]
    table = _columns_table(rows, columns)
    data = {}
    for c in columns:
        attrs = _column_attrs(c, METRICS, study)
        values = table[c]
        if values.dtype == object:
            values = values.astype(str)
        data[c] = (("design",), values, attrs)
    ds = xr.Dataset(data, coords={"design": ("design", np.arange(len(rows), dtype=np.int32),
                                             {"long_name": "design number"})})
    ds.attrs.update({
        "Conventions": "CF-1.8",
        "title": f"covergrid trade study {study.study}: one point per design",
        "source": f"covergrid {__version__}",
        "history": f"created by covergrid {__version__}",
        "covergrid_study_name": study.study,
        "covergrid_study": study.dump_resolved_yaml(),
    })
    files.append(io.write_netcdf(ds, folder / f"{stem}.nc"))
    return files


def _column_attrs(column: str, metrics, study) -> dict[str, str]:
    fixed = {
        "key": ("result-store key (SHA-256 of every input)", ""),
        "pattern": ("Walker pattern", ""), "total": ("total satellites T", "1"),
        "planes": ("orbit planes P", "1"), "phasing": ("relative phasing F", "1"),
        "altitude_km": ("altitude a - R_E", "km"), "inclination_deg": ("inclination", "degree"),
        "min_elevation_deg": ("minimum elevation", "degree"),
        "lost_satellite": ("satellite removed (robustness case); empty: none", ""),
        "resolution_deg": ("grid cell size of the evaluation", "degree"),
        "step_s": ("time step of the evaluation", "s"),
        "meets": ("requirement met", ""),
        "area_fraction_met": ("share of the area meeting the requirement's threshold", "1"),
        "elapsed_s": ("wall time of the evaluation", "s"),
    }
    if column in fixed:
        name, units = fixed[column]
        return {"long_name": name, **({"units": units} if units else {})}
    if column in ("achieved", "margin") and study.requirement is not None:
        r = study.requirement
        info = metrics[r.metric]
        what = ("requirement's achieved value" if column == "achieved"
                else "requirement's margin (positive: met)")
        return {"long_name": f"{what} of {r.metric}", "units": info.units}
    base, _, stat = column.rpartition("_")
    name = base.split("_k")[0] if base.startswith("nfold_fraction_k") else base
    info = metrics.get(name)
    if info is None:
        return {"long_name": column}
    return {"long_name": f"area-weighted {stat} of {info.long_name}"
            + (f" (k = {base.rpartition('_k')[2]})" if name != base else ""),
            "units": info.units}


def trade_figures(rows: list[dict], study, folder: Path, *, caption: str) -> list[Path]:
    """The trade figures of a design table in ``folder`` (see :mod:`covergrid.render.trades`).

    The metric traded is the requirement's achieved value when the study has one (with its
    threshold drawn), else the area-weighted mean of the first mapped metric.
    """
    import numpy as np

    from covergrid.metrics import METRICS
    from covergrid.render.trades import save_trade_figures

    if not rows:
        return []
    has_req = study.requirement is not None
    columns = row_columns(study.nfold_max, has_req)
    table = _columns_table(rows, columns)
    if has_req:
        r = study.requirement
        info = METRICS[r.metric]
        metric, better, units = "achieved", info.better, info.units
        threshold = r.at_most if r.at_most is not None else r.at_least
        fold = f" (k = {r.k})" if r.k else ""
        long_name = (f"{info.long_name}{fold} met over {100 * r.area_fraction:g} % of the "
                     "area")
    else:
        name = next((m for m in study.maps.metrics if m != "nfold_fraction"),
                    "coverage_fraction")
        metric, better, units, threshold = f"{name}_mean", METRICS[name].better, None, None
        long_name = f"area-weighted mean {METRICS[name].long_name}"
        table.pop("meets", None)
    by = ("altitude_km" if np.unique(table["altitude_km"]).size > 1
          or np.unique(table["inclination_deg"]).size == 1 else "inclination_deg")
    return save_trade_figures(table, metric, folder, caption=caption, by=by, better=better,
                              units=units, requirement=threshold, long_name=long_name)


def _caption(study, designs: Sequence[Design], what: str) -> str:
    alts = sorted({d.altitude_km for d in designs})
    incs = sorted({d.inclination_deg for d in designs})
    els = sorted({d.min_elevation_deg for d in designs})

    def span(v: list[float], unit: str) -> str:
        return f"{v[0]:g} {unit}" if len(v) == 1 else f"{v[0]:g}-{v[-1]:g} {unit}"

    text = (f"{what}: {len(designs)} Walker {designs[0].pattern} designs, altitude "
            f"{span(alts, 'km')}, inclination {span(incs, 'deg')}, min elevation "
            f"{span(els, 'deg')}; {study.grid.resolution_deg:g} deg grid, "
            f"{study.duration_h:g} h at {study.step_s:g} s from {study.epoch}.")
    r = study.requirement
    if r is not None:
        sense = "at most" if r.at_most is not None else "at least"
        value = r.at_most if r.at_most is not None else r.at_least
        k = f" (k = {r.k})" if r.k is not None else ""
        from covergrid.metrics import METRICS

        units = METRICS[r.metric].units
        value_text = f"{value:g}" + (f" {units}" if units not in ("", "1") else "")
        text += (f" Requirement: {r.metric}{k} {sense} {value_text} over "
                 f"{100 * r.area_fraction:g} % of the area.")
    return text


def run_sweep(study, out_dir: str | os.PathLike | None = None, *, scheduler: str | None = None,
              progress: bool = False, figures: bool = True) -> SweepResult:
    """Evaluate every design of the study's sweep block; write the table and figures.

    Parameters
    ----------
    study : Study
        A validated study with a ``sweep:`` block.
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/`` (the store to
        ``out_dir/<study>/store/``). Without it the store is kept in memory only.
    scheduler : str, optional
        Overrides ``compute.scheduler``.
    progress : bool
        Show a progress bar with ETA.
    figures : bool
        Draw the trade figures.

    Returns
    -------
    SweepResult
    """
    from covergrid import io
    from covergrid.store import ResultStore

    designs = sweep_designs(study)
    context = EvalContext.from_study(study)
    folder = None
    if out_dir is not None:
        folder = io.study_output_dir(out_dir, study.study)
        io.check_writable(folder)
        store: Any = ResultStore(folder / "store")
    else:
        store = _MemoryStore()
    with design_runner(study, scheduler) as runner:
        rows, computed = run_designs(designs, context, store, runner, progress=progress,
                                     desc=f"sweep {study.study}")
    if folder is None:
        return SweepResult(rows, computed)
    files = write_table(rows, study, folder, "sweep")
    files.append(io.write_text(study.dump_resolved_yaml(), folder / "study.resolved.yaml"))
    if figures:
        files += trade_figures(rows, study, folder / "trades" / "sweep",
                               caption=_caption(study, designs, "Sweep"))
    return SweepResult(rows, computed, folder, files)


class _MemoryStore:
    """A store that forgets on exit (no output folder given)."""

    def __init__(self) -> None:
        self._rows: dict[str, dict] = {}

    def get(self, key: str) -> dict | None:
        return self._rows.get(key)

    def put(self, key: str, row: dict, inputs: dict) -> None:
        self._rows[key] = dict(row)
