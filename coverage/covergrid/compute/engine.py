"""The coverage engine: latitude bands as dask tasks, assembled into a CF xarray Dataset.

One call, :func:`compute_coverage`, takes plain inputs (an element set, an epoch, span and
step, a grid and a sensor) and returns an ``xarray.Dataset`` of per-cell metrics on
(lat, lon). The grid's rows are split into latitude bands; each band is one dask task that
propagates the constellation itself, block of samples by block of samples, and streams the
blocks through the compiled kernel, so that memory stays bounded by (cells in the band) +
(satellites x block length) whatever the span. Bands are independent, so the same graph runs
on the threaded, synchronous or process schedulers and on a dask.distributed cluster, with
identical values (the kernel is deterministic and each cell is computed by one task).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import xarray as xr

from covergrid import __version__
from covergrid.compute import dop as dop_module
from covergrid.compute import kernel, kernel_state
from covergrid.compute.dop_spec import DopSpec
from covergrid.compute.grid import Grid, GridSpec, row_bands
from covergrid.compute.metrics import (
    COVERAGE_METRICS,
    DOP_METRICS,
    INTEGER_METRICS,
    METRICS,
    MODEL_LIMITS,
    finalise,
)
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import count_steps, position_block_length
from covergrid.earth.time import epoch_to_iso, gmst_rad, parse_epoch
from covergrid.errors import CovergridError
from covergrid.orbits import j2

__all__ = ["PLANAR_METRICS", "band_task", "compute_coverage"]

def band_task(elements: Any, theta0_rad: float, step_s: float, n_steps: int,
              grid_spec: GridSpec, rows: tuple[int, int], sensor: Sensor,
              nfold_max: int, refine: bool = True, dop: DopSpec | None = None,
              epoch: np.datetime64 | None = None) -> np.ndarray:
    """Metrics of the cells of rows [r0, r1): propagate block by block, stream the kernel.

    Returns one float64 stack: the metrics other than ``nfold_fraction`` (order
    :data:`PLANAR_METRICS`), then the K fold planes, then a plane holding the visit count at
    [0, 0], then with ``dop`` the DOP metrics (order
    :data:`covergrid.compute.metrics.DOP_METRICS`). If the kernel's per-sample event queue
    overflowed
    (:func:`covergrid.compute.kernel_state.queue_overflow`), the band is computed again with a
    queue four times longer, so no event is lost. ``epoch`` (the span's start, UTC) places
    the Sun for a sensor with a daylight threshold.
    """
    queue_per_cell = kernel_state.QUEUE_PER_CELL
    while True:
        state, dop_state = _run_band(elements, theta0_rad, step_s, n_steps, grid_spec, rows,
                                     sensor, nfold_max, refine, queue_per_cell, dop, epoch)
        if kernel_state.queue_overflow(state) == 0:
            break
        queue_per_cell *= 4
    r0, r1 = rows
    n_rows, n_lon = r1 - r0, grid_spec.n_lon
    res = finalise(kernel_state.accumulators(state), n_steps, step_s)
    # one float64 stack per band: (metrics except nfold, rows, lon) + nfold (K, rows, lon) +
    # the visit count (+ the DOP metrics), so that the graph has one task per band and no
    # per-metric getitems
    n_planar = len(PLANAR_METRICS)
    n_dop = len(DOP_METRICS) if dop is not None else 0
    out = np.empty((n_planar + nfold_max + 1 + n_dop, n_rows, n_lon))
    out[:n_planar] = [res[m].reshape(n_rows, n_lon) for m in PLANAR_METRICS]
    out[n_planar: n_planar + nfold_max] = res["nfold_fraction"].reshape(nfold_max, n_rows,
                                                                         n_lon)
    visits = n_planar + nfold_max
    out[visits] = 0.0
    out[visits, 0, 0] = float(state["visits"][0])
    if dop_state is not None:
        values = dop_module.dop_metrics(dop_state, n_steps)
        out[visits + 1:] = [values[m].reshape(n_rows, n_lon) for m in DOP_METRICS]
    return out


def _run_band(elements: Any, theta0_rad: float, step_s: float, n_steps: int,
              grid_spec: GridSpec, rows: tuple[int, int], sensor: Sensor, nfold_max: int,
              refine: bool, queue_per_cell: int, dop: DopSpec | None,
              epoch: np.datetime64 | None = None
              ) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray] | None]:
    """The kernel's closed-out state of one band and its DOP state (see :func:`band_task`)."""
    grid = Grid(grid_spec)
    r0, r1 = rows
    geo = {k: np.ascontiguousarray(v[r0:r1]) for k, v in grid.row_geometry.items()}
    n_lon = grid_spec.n_lon
    n_rows = r1 - r0
    n_sat = len(elements.a_km)
    state = kernel_state.new_state(n_rows * n_lon, nfold_max, n_sat, n_rows, queue_per_cell)
    mask = grid.cell_mask
    if mask is not None:
        state["heads"][~mask[r0:r1].ravel()] = -1.0  # outside the region: never computed
    dop_state = None if dop is None else dop_module.new_dop_state(n_rows * n_lon, n_sat)
    el_min, eta_max, range_max = sensor.kernel_args()
    sun_min = math.radians(sensor.min_sun_elevation_deg or 0.0)
    eta_min, side = sensor.side_args()
    # continuous time needs the end of the span as a sample too (the last step's crossings)
    n_samples = n_steps + 1 if refine else n_steps
    # velocities: for the crossings, and for a side-looking sensor's side of the track
    with_velocity = refine or sensor.side_looking
    block = position_block_length(n_sat, n_samples, with_velocity=with_velocity)
    buf = np.empty((n_sat, block, 3))
    vbuf = np.empty((n_sat, block, 3)) if with_velocity else None
    # columns are counted round the circle from the window's western edge; the first n_lon
    # of them are the grid's
    lon0 = math.radians(grid_spec.lon_min_deg)
    dlon = math.radians(grid_spec.resolution_deg)
    n_circle = grid_spec.n_lon_circle
    cap = grid.cap(r0, r1)  # satellites whose footprint cannot reach it are skipped
    for i0 in range(0, n_samples, block):
        nb = min(block, n_samples - i0)
        t = (i0 + np.arange(nb)) * step_s
        # the last, shorter block reuses the front of the same buffer (contiguous view)
        out = _front(buf, nb)
        if vbuf is not None:
            pos, vel = j2.propagate_to_ecef_with_velocity(elements, t, theta0_rad, out=out,
                                                          out_v=_front(vbuf, nb))
        else:
            pos, vel = j2.propagate_to_ecef(elements, t, theta0_rad, out=out), None
        kernel.run_band(state, pos, i0, geo, lon0, dlon, n_circle, el_min, eta_max, range_max,
                        refine, vel, step_s, n_win=n_lon, cap=cap,
                        sun_km=_sun_ecef_km(sensor, epoch, t), min_sun_elevation_rad=sun_min,
                        min_off_nadir_rad=eta_min, look_side=side)
        if dop_state is not None and dop is not None and i0 < n_steps:
            # DOP is sampled (sample and hold): the span's end sample is not one of its own.
            # It runs over the window's n_lon columns, in each row from its first to its
            # last cell in the region (the cells outside are masked afterwards)
            dop_module.run_dop_band(dop_state, pos[:, : n_steps - i0], geo, lon0, dlon, n_lon,
                                    el_min, eta_max, range_max, dop, n_circle=n_circle,
                                    cells=None if mask is None else mask[r0:r1])
    kernel.close_band(state, n_steps)
    return state, dop_state


def _sun_ecef_km(sensor: Sensor, epoch: np.datetime64 | None, t_s: np.ndarray
                 ) -> np.ndarray | None:
    """The Sun's Earth-fixed positions at the samples t_s [km] when the sensor has a daylight
    threshold (Astronomical Almanac low-precision Sun, IAU 1982 sidereal angle), else None."""
    if sensor.min_sun_elevation_deg is None:
        return None
    if epoch is None:
        raise ValueError("a daylight threshold needs the epoch")
    from covergrid.earth.frames import eci_to_ecef
    from covergrid.earth.sun import sun_position_eci_km

    return eci_to_ecef(sun_position_eci_km(epoch, t_s), gmst_rad(epoch, t_s))


def _front(buf: np.ndarray, nb: int) -> np.ndarray:
    """The first nb samples of an (n_sat, block, 3) buffer as a contiguous view."""
    n_sat, block, _ = buf.shape
    return buf if nb == block else buf.reshape(-1)[: n_sat * nb * 3].reshape(n_sat, nb, 3)


#: Metrics on (lat, lon), in the order of a band task's output stack.
PLANAR_METRICS = tuple(m for m in COVERAGE_METRICS if m != "nfold_fraction")


def _grid_dataset(grid: Grid) -> xr.Dataset:
    """Coordinates, bounds and cell areas of a grid as a CF Dataset (no metrics)."""
    lat = xr.Variable("lat", grid.lat_deg, {
        "units": "degrees_north", "standard_name": "latitude", "long_name": "latitude",
        "axis": "Y", "bounds": "lat_bnds"})
    lon = xr.Variable("lon", grid.lon_deg, {
        "units": "degrees_east", "standard_name": "longitude", "long_name": "longitude",
        "axis": "X", "bounds": "lon_bnds"})
    return xr.Dataset(
        {
            "lat_bnds": (("lat", "nv"), grid.lat_bounds_deg, {"units": "degrees_north"}),
            "lon_bnds": (("lon", "nv"), grid.lon_bounds_deg, {"units": "degrees_east"}),
            "cell_area": (("lat", "lon"), np.array(grid.cell_area_km2) * 1e6, {
                "units": "m2", "standard_name": "cell_area", "long_name": "cell area",
                "comment": "Exact area of the cell on the WGS 84 ellipsoid (Snyder, Map "
                           "Projections: A Working Manual, USGS PP 1395, eq. 3-12)."}),
        },
        coords={"lat": lat, "lon": lon},
    )


def compute_coverage(
    elements: Any,
    epoch: np.datetime64 | str,
    duration_s: float,
    step_s: float,
    grid: GridSpec,
    sensor: Sensor,
    *,
    nfold_max: int = 4,
    chunk_rows: int | None = None,
    scheduler: str | Any = "threads",
    progress: bool = False,
    attrs: Mapping[str, Any] | None = None,
    compute: bool = True,
    refine_transitions: bool = True,
    dop: DopSpec | None = None,
) -> xr.Dataset:
    """Per-cell coverage metrics of a constellation over a grid.

    Parameters
    ----------
    elements : ElementSet
        Mean elements at the epoch [km, rad] (:class:`covergrid.orbits.element_set.ElementSet`).
    epoch : numpy.datetime64 or str
        Start of the span, UTC.
    duration_s : float
        Span [s]; a whole number of steps.
    step_s : float
        Sample spacing [s].
    grid : GridSpec
        Cells.
    sensor : Sensor
        Visibility limits.
    nfold_max : int, optional
        K: ``nfold_fraction`` is given for k = 1..K [unitless].
    chunk_rows : int, optional
        Latitude rows per dask task; default about four bands per core.
    scheduler : str or dask.distributed.Client, optional
        ``"threads"`` (default), ``"synchronous"``, ``"processes"``, or a Client.
    progress : bool, optional
        Show a progress bar over the bands (stderr).
    attrs : mapping, optional
        Extra global attributes (the pipeline passes the resolved study).
    compute : bool, optional
        If False return the lazy, dask-backed Dataset.
    refine_transitions : bool, optional
        Continuous time (the default): every rise and set of a satellite over a cell at the
        time its limit is crossed between samples, passes that begin and end between two
        samples included, and every metric an integral over those times; the span's end is
        then a sample too. False gives the pure sampled values (sample and hold). See
        :mod:`covergrid.compute.metrics`.
    dop : DopSpec, optional
        Also compute the dilution-of-precision metrics
        (:data:`covergrid.compute.metrics.DOP_METRICS`, :mod:`covergrid.compute.dop`).

    Returns
    -------
    xarray.Dataset
        Metrics of :data:`covergrid.compute.metrics.METRICS` on (lat, lon) (``nfold_fraction`` on
        (k, lat, lon)), with cell bounds, cell areas and CF attributes.
    """
    import dask

    if isinstance(epoch, str):
        epoch = parse_epoch(epoch)
    n_steps = count_steps(duration_s, step_s)
    if not (isinstance(nfold_max, int | np.integer) and 1 <= nfold_max <= 64):
        raise CovergridError(f"{nfold_max!r} is not allowed; use an integer 1..64", "nfold_max")
    n_sat = len(elements.a_km)
    if n_sat == 0:
        raise CovergridError("the constellation has no satellites", "constellation")
    grid = grid.cropped()  # with a region: the smallest window holding it
    g = Grid(grid)
    theta0 = float(gmst_rad(epoch, 0.0))
    bands = row_bands(grid.n_lat, chunk_rows)
    n_lon = grid.n_lon

    depth = len(PLANAR_METRICS) + nfold_max + 1 + (len(DOP_METRICS) if dop is not None else 0)
    tasks = [dask.delayed(band_task, pure=True)(elements, theta0, float(step_s), n_steps, grid,
                                                 b, sensor, int(nfold_max),
                                                 bool(refine_transitions), dop, epoch)
             for b in bands]
    if compute:
        # run the band tasks and assemble with numpy: no dask-array graph to optimise
        stack = np.concatenate(_compute_tasks(tasks, scheduler, progress), axis=1)
    else:
        import dask.array as da  # about 0.5 s of imports, only for a lazy result

        parts = [da.from_delayed(t, shape=(depth, b[1] - b[0], n_lon), dtype=np.float64)
                 for t, b in zip(tasks, bands, strict=True)]
        stack = da.concatenate(parts, axis=1)
    data: dict[str, Any] = {}
    for idx, name in enumerate(PLANAR_METRICS):
        arr = stack[idx]
        data[name] = arr.astype(np.int32) if name in INTEGER_METRICS else arr
    data["nfold_fraction"] = stack[len(PLANAR_METRICS): len(PLANAR_METRICS) + nfold_max]
    at_visits = len(PLANAR_METRICS) + nfold_max
    visits = stack[at_visits].sum().astype(np.int64)
    if dop is not None:
        for idx, name in enumerate(DOP_METRICS):
            data[name] = stack[at_visits + 1 + idx]

    ds = _grid_dataset(g)
    ds = ds.assign_coords(k=xr.Variable("k", np.arange(1, nfold_max + 1, dtype=np.int32), {
        "long_name": "minimum number of satellites in view", "units": "1"}))
    for name, arr in data.items():
        info = METRICS[name]
        dims = ("k", "lat", "lon") if name == "nfold_fraction" else ("lat", "lon")
        a: dict[str, Any] = dict(info.attrs())
        a["cell_methods"] = "area: point"
        if name == "pdop_fraction" and dop is not None:
            a["threshold"] = float(dop.pdop_threshold)
        ds[name] = (dims, arr, a)
    mask = g.cell_mask
    if mask is not None:
        region = grid.region
        assert region is not None
        for name in data:
            ds[name] = ds[name].where(mask)  # outside the region: NaN (integers as floats)
        ds["in_region"] = (("lat", "lon"), mask.astype(np.int8), {
            "long_name": "cell computed: its centre lies in the region", "units": "1",
            "flag_values": np.array([0, 1], np.int8),
            "flag_meanings": "outside_region inside_region",
            "comment": f"Region: {region.label or region.surface}. Cells outside it are NaN "
                       "in every metric and count as outside the area in every "
                       "area-weighted statistic."})
    ds["visits"] = ((), visits, {
        "long_name": "satellite-sample-cell visibilities counted by the kernel", "units": "1"})
    ds.attrs.update({
        "Conventions": "CF-1.8",
        "title": "covergrid per-cell coverage metrics",
        "institution": "covergrid user",
        "source": f"covergrid {__version__}: secular-J2 mean-element propagation, "
                  "footprint-indexed streaming coverage kernel",
        "history": f"created by covergrid {__version__}",
        "references": METRICS["max_gap"].source,
        "comment": MODEL_LIMITS,
        "covergrid_epoch": epoch_to_iso(epoch),
        "covergrid_duration_s": float(n_steps * step_s),
        "covergrid_step_s": float(step_s),
        "covergrid_n_steps": int(n_steps),
        "covergrid_min_elevation_deg": float(sensor.min_elevation_deg),
        "covergrid_max_off_nadir_deg": float(sensor.max_off_nadir_deg or np.nan),
        "covergrid_max_range_km": float(sensor.max_range_km or np.nan),
        "covergrid_min_off_nadir_deg": float(sensor.min_off_nadir_deg or np.nan),
        "covergrid_look_side": sensor.look_side,
        "covergrid_n_satellites": int(n_sat),
        "covergrid_resolution_deg": float(grid.resolution_deg),
        "covergrid_lon_min_deg": float(grid.lon_min_deg),
        "covergrid_lon_max_deg": float(grid.lon_max_deg),
        "covergrid_region": "" if grid.region is None else (grid.region.label
                                                            or grid.region.surface),
        "covergrid_refine_transitions": int(bool(refine_transitions)),
    })
    if dop is not None:
        ds.attrs["covergrid_pdop_threshold"] = float(dop.pdop_threshold)
    if attrs:
        ds.attrs.update(dict(attrs))
    return ds


def _compute_tasks(tasks: list[Any], scheduler: str | Any, progress: bool) -> list[np.ndarray]:
    """Compute the band tasks on the chosen scheduler, optionally with a progress bar."""
    import dask

    if isinstance(scheduler, str):
        valid = ("threads", "synchronous", "processes")
        if scheduler not in valid:
            raise CovergridError(
                f"{scheduler!r} is not a scheduler here; use one of {', '.join(valid)} or pass "
                "a dask.distributed Client", "compute.scheduler")
        kwargs: dict[str, Any] = {"scheduler": scheduler}
    else:  # a dask.distributed Client
        kwargs = {"scheduler": scheduler}
    if progress:
        with _BandProgress({t.key for t in tasks}):
            return list(dask.compute(*tasks, **kwargs))
    return list(dask.compute(*tasks, **kwargs))


class _BandProgress:
    """A tqdm bar over finished band tasks (local schedulers; a Client reports its own).

    Counts the tasks whose keys it was given, so it is independent of how dask names them.
    """

    def __init__(self, keys: set) -> None:
        self.keys = set(keys)

    def __enter__(self) -> _BandProgress:
        from dask.callbacks import Callback
        from tqdm import tqdm

        bar = tqdm(total=len(self.keys), desc="coverage bands", unit="band", leave=False)
        self._bar = bar
        keys = self.keys

        def posttask(key: Any, result: Any, dsk: Any, state: Any, worker_id: Any) -> None:
            if key in keys:
                bar.update(1)

        self._cb = Callback(posttask=posttask)
        self._cb.__enter__()
        return self

    def __exit__(self, *exc: Any) -> None:
        self._cb.__exit__(*exc)
        self._bar.close()
