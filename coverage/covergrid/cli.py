"""The ``covergrid`` command line: a thin layer over the Python API.

Commands: ``run`` (compute a study and write its outputs, :mod:`covergrid.pipeline.run`),
``sweep`` and ``size`` (trade studies, :mod:`covergrid.trade.sweep`,
:mod:`covergrid.trade.sizing`), ``check`` (validate and estimate
without computing), ``elements`` (state vector <-> Keplerian elements for one orbit) and
``schema`` (print the study file's JSON Schema).

Every failure ends the command with one line on stderr and its exit status
(:mod:`covergrid.errors`): 2 for bad input or work refused before it starts, 3 for a
failure while running, 130 and 143 for SIGINT and SIGTERM (whose handler raises
:class:`~covergrid.errors.Terminated`, so that the same cleanup runs as for Ctrl-C). No
traceback is shown unless ``--debug`` is given.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
import os
import signal
import sys
import threading
import traceback
from collections.abc import Sequence

from covergrid import __version__
from covergrid.constants import EARTH_SOI_RADIUS_KM
from covergrid.errors import (
    EXIT_BAD_INPUT,
    EXIT_OK,
    EXIT_REQUIREMENT_NOT_MET,
    EXIT_RUN_FAILED,
    EXIT_SIGINT,
    EXIT_SIGTERM,
    CovergridError,
    Terminated,
)

__all__ = ["main", "build_parser"]

EXIT_INTERRUPTED = EXIT_SIGINT

_EPILOG = """\
exit status:
  0   success (and, for run, the study's requirement is met or none is given)
  1   run: the study's requirement is not met (all outputs are still written)
      size: no design up to sizing.total.max meets the requirement
  2   bad input or refused before any work: invalid study file or option, work or memory
      over the limits (see check), output folder not writable or taken by another run;
      nothing is written
  3   a failure while running: out of memory, disk full, an output that cannot be
      written; the earlier results in DIR/<study>/ are kept
  130 interrupted (SIGINT, Ctrl-C); 143 terminated (SIGTERM); the earlier results kept
Every failure is one line on stderr naming the cause (for input, the study key or option);
--debug adds the traceback.
"""

#: Largest speed the elements command takes [km/s]: far above any Earth orbit's (the
#: escape speed at the surface is 11.2 km/s, common practice).
MAX_SPEED_KM_S = 100.0
#: The gravitational parameter the elements command takes: WGS 84's to within 1 %
#: (398600.4415 of Vallado's examples is inside); results are Earth orbits.
MU_RANGE_KM3_S2 = (0.99 * 398600.4418, 1.01 * 398600.4418)


def _finite(text: str) -> float:
    """argparse type: a finite number (no NaN, no infinity)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a number; got {text[:40]!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number; got {text[:40]!r}")
    return value


class _Parser(argparse.ArgumentParser):
    """ArgumentParser whose usage errors read like ours (one line, exit status 2)."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(EXIT_BAD_INPUT, f"covergrid: error: {message} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``covergrid`` command."""
    fmt = argparse.RawDescriptionHelpFormatter
    p = _Parser(prog="covergrid", formatter_class=fmt, epilog=_EPILOG, allow_abbrev=False,
                description="Satellite-constellation coverage analysis on a global grid.")
    p.add_argument("--version", action="version", version=f"covergrid {__version__}")
    p.add_argument("--debug", action="store_true", help="show the traceback of a failure")
    common = _Parser(add_help=False)
    common.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                        help="show the traceback of a failure")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    r = sub.add_parser("run", help="compute a study and write its outputs", epilog=_EPILOG,
                       formatter_class=fmt, parents=[common],
                       description="Compute a study's coverage metrics and write DIR/<study>/: "
                       "coverage.nc, summary.json, summary.csv, study.resolved.yaml, maps/.")
    r.add_argument("study", metavar="STUDY.yaml", help="the study file")
    r.add_argument("--out", metavar="DIR", default="outputs",
                   help="output root; results go to DIR/<study>/ (default: outputs)")
    r.add_argument("--scheduler", metavar="NAME",
                   help="override compute.scheduler: threads, synchronous, processes, "
                   "local-cluster or tcp://host:port")
    r.add_argument("--force", action="store_true",
                   help="run even if the memory estimate exceeds the limit (the work limits "
                   "still hold)")
    r.add_argument("--no-maps", action="store_true", help="skip the figures")
    r.add_argument("--report", action=argparse.BooleanOptionalAction, default=True,
                   help="write report.html, one self-contained document of the results "
                   "(default: --report)")
    r.add_argument("--quiet", action="store_true",
                   help="no progress bar; print only the requirement's verdict line")

    c = sub.add_parser("check", help="validate a study and estimate its cost", epilog=_EPILOG,
                       formatter_class=fmt, parents=[common],
                       description="Validate a study file and print what a run would compute "
                       "(satellites, samples, cells, estimated work, time and memory; for a "
                       "sweep or sizing block, its designs) without computing it. Exit 2 if "
                       "a run would be refused.")
    c.add_argument("study", metavar="STUDY.yaml", help="the study file")
    c.add_argument("--json", action="store_true", help="print the estimate as JSON")

    e = sub.add_parser(
        "elements", help="convert one orbit between state vector and Keplerian elements",
        epilog=_EPILOG, formatter_class=fmt, parents=[common],
        description="Give --position-km and --velocity-km-s to get the Keplerian elements, or "
        "--a-km, --e, --i-deg, --raan-deg, --argp-deg and --nu-deg (or --mean-anomaly-deg) "
        "to get the inertial position and velocity.")
    e.add_argument("--position-km", nargs=3, type=_finite, metavar=("X", "Y", "Z"))
    e.add_argument("--velocity-km-s", nargs=3, type=_finite, metavar=("VX", "VY", "VZ"))
    e.add_argument("--a-km", type=_finite, help="semi-major axis [km]")
    e.add_argument("--altitude-km", type=_finite,
                   help="a minus the WGS-84 equatorial radius [km]")
    e.add_argument("--e", type=_finite, default=None, help="eccentricity (default 0)")
    e.add_argument("--i-deg", type=_finite, help="inclination [deg]")
    e.add_argument("--raan-deg", type=_finite, default=0.0, help="RAAN [deg] (default 0)")
    e.add_argument("--argp-deg", type=_finite, default=0.0,
                   help="argument of perigee [deg] (default 0)")
    e.add_argument("--nu-deg", type=_finite, help="true anomaly [deg]")
    e.add_argument("--mean-anomaly-deg", type=_finite, help="mean anomaly [deg]")
    e.add_argument("--mu-km3-s2", type=_finite, default=None,
                   help="gravitational parameter [km^3/s^2] (default WGS 84: 398600.4418)")

    for name, what, files in (
            ("sweep", "evaluate every design of the study's sweep block",
             "sweep.csv, sweep.nc, store/, trades/"),
            ("size", "find the smallest constellation meeting the requirement (sizing block)",
             "sizing.csv, sizing.json, sizing_designs.csv/.nc, store/, trades/")):
        t = sub.add_parser(name, help=what, epilog=_EPILOG, formatter_class=fmt, parents=[common],
                           description=f"{what[0].upper()}{what[1:]} and write DIR/<study>/: "
                           f"{files}. Finished designs are kept in store/; a rerun computes "
                           "only the designs not stored yet.")
        t.add_argument("study", metavar="STUDY.yaml", help="the study file")
        t.add_argument("--out", metavar="DIR", default="outputs",
                       help="output root; results go to DIR/<study>/ (default: outputs)")
        t.add_argument("--scheduler", metavar="NAME",
                       help="override compute.scheduler: threads, synchronous, processes, "
                       "local-cluster or tcp://host:port")
        t.add_argument("--no-figures", action="store_true", help="skip the trade figures")
        t.add_argument("--report", action=argparse.BooleanOptionalAction, default=True,
                       help="write report.html, one self-contained document of the results "
                       "(default: --report)")
        t.add_argument("--force", action="store_true",
                       help="run even if the memory estimate exceeds the limit (the work and "
                       "design limits still hold)")
        t.add_argument("--quiet", action="store_true",
                       help="no progress bar; print only the verdict line")

    sub.add_parser("schema", help="print the JSON Schema of a study file", epilog=_EPILOG,
                   formatter_class=fmt, parents=[common],
                   description="Print the JSON Schema (draft 2020-12) of a study file, for "
                   "editors that check YAML against a schema.")
    return p


def _fail(message: str, status: int = EXIT_BAD_INPUT) -> int:
    """Print one error line (newlines folded) and return the exit status."""
    sys.stderr.write(f"covergrid: error: {' '.join(message.split())}\n")
    return status


def _on_sigterm(signum, frame):  # noqa: ARG001 - the signal handler's signature
    raise Terminated


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``covergrid`` command; returns the exit status (see ``covergrid --help``)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version and usage errors
        return int(exc.code or 0) if isinstance(exc.code, int) else EXIT_BAD_INPUT
    in_main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGTERM, _on_sigterm) if in_main else None
    try:
        return _dispatch(args)
    except CovergridError as exc:
        _debug(args)
        return _fail(str(exc), exc.exit_status)
    except Terminated:
        _debug(args)
        sys.stderr.write("covergrid: terminated (SIGTERM); nothing of this run was kept, "
                         "earlier results are as they were\n")
        return EXIT_SIGTERM
    except KeyboardInterrupt:
        _debug(args)
        sys.stderr.write("covergrid: interrupted; nothing of this run was kept, earlier "
                         "results are as they were\n")
        return EXIT_SIGINT
    except MemoryError:
        _debug(args)
        return _fail("out of memory while running; use a coarser grid.resolution_deg, fewer "
                     "satellites or a machine with more memory (covergrid check estimates "
                     "the need)", EXIT_RUN_FAILED)
    except OSError as exc:
        from pathlib import Path

        from covergrid.io import explain_os_error

        _debug(args)
        where = Path(str(exc.filename)) if exc.filename else Path("output")
        return _fail(str(explain_os_error(exc, where)), EXIT_RUN_FAILED)
    except Exception as exc:  # a failure of a library or of covergrid itself
        _debug(args)
        text = f"{type(exc).__name__}: {exc}"
        text = text if len(text) <= 300 else text[:297] + "..."
        return _fail(f"the run failed: {text} (run again with --debug for the traceback)",
                     EXIT_RUN_FAILED)
    finally:
        if in_main:
            signal.signal(signal.SIGTERM, previous)


def _debug(args: argparse.Namespace) -> None:
    if getattr(args, "debug", False):
        traceback.print_exc()


def _dispatch(args: argparse.Namespace) -> int:
    if args.command == "run":
        return _cmd_run(args)
    if args.command == "check":
        return _cmd_check(args)
    if args.command == "elements":
        return _cmd_elements(args)
    if args.command in ("sweep", "size"):
        return _cmd_trade(args)
    if args.command == "schema":
        return _cmd_schema()
    raise AssertionError(f"unhandled command {args.command!r}")  # argparse guards this


def _cmd_run(args: argparse.Namespace) -> int:
    from covergrid.pipeline.run import run_study
    from covergrid.study.loading import load_study

    study = load_study(args.study)
    result = run_study(study, args.out, progress=not args.quiet, scheduler=args.scheduler,
                       maps=not args.no_maps, force=args.force, report=args.report)
    verdict = result.summary.get("requirement")
    on_targets = (result.summary.get("targets") or {}).get("requirement")
    if not args.quiet:
        print(f"covergrid: wrote {len(result.files)} files to {result.out_dir}")
    if verdict is not None:  # the verdict lines, --quiet or not
        print(_verdict_text(verdict))
    if on_targets is not None:
        print(_target_verdict_text(on_targets))
    if result.requirement_met is False:
        return EXIT_REQUIREMENT_NOT_MET
    return EXIT_OK


def _target_verdict_text(v: dict) -> str:
    """The target verdict line, numbers as the grid's verdict line shows them."""
    sense = "at most" if v["sense"] == "at_most" else "at least"
    state = "MET" if v["met"] else "NOT MET"
    q = _quantity
    return (f"target requirement {v['metric']} {sense} {q(v['threshold'], v['metric'])} at "
            f"{100 * v['share']:g} % of the targets: {state} (achieved "
            f"{q(v['achieved'], v['metric'])}, margin {q(v['margin'], v['metric'], signed=True)}"
            f"; {100 * v['share_met']:.1f} % of the targets meet it)")


def _verdict_text(v: dict) -> str:
    """The verdict line: units and one number of decimals for threshold, achieved and margin
    (seconds stay seconds: ``achieved 2044.6 s, margin +655.4 s``)."""
    from covergrid.compute.quantities import verdict_text

    return "requirement " + verdict_text(v, long_name=v["metric"], kind=_kind(v["metric"]),
                                         stored_units=True)


def _kind(metric: str) -> str | None:
    from covergrid.compute.metrics import METRICS

    info = METRICS.get(metric)
    return info.kind if info is not None else None


def _quantity(value: float, metric: str, *, signed: bool = False) -> str:
    """A value of a metric in its stored units (seconds stay seconds), e.g. ``+655.4 s``."""
    from covergrid.compute.metrics import METRICS
    from covergrid.compute.quantities import DisplayUnit, format_values, unit_for

    info = METRICS.get(metric)
    units = info.units if info is not None else None
    unit = (DisplayUnit("s", 1.0) if units == "s"
            else unit_for(metric, units, abs(value), _kind(metric)))
    return format_values([value], unit, signed=[0] if signed else [])[0]


def _cmd_trade(args: argparse.Namespace) -> int:
    """``sweep`` and ``size``: exit 0, or 1 when size finds no design meeting the requirement."""
    from covergrid.pipeline.run import resolve_for_run
    from covergrid.study.loading import load_study

    study = load_study(args.study)
    block = "sweep" if args.command == "sweep" else "sizing"
    if getattr(study, block) is None:
        return _fail(f"{block}: the study file has no {block} block; see the README's study "
                     "file reference")
    resolved = resolve_for_run(study, args.scheduler)
    if args.command == "sweep":
        from covergrid.trade.sweep import run_sweep

        res = run_sweep(resolved, args.out, progress=not args.quiet,
                        figures=not args.no_figures, force=args.force, report=args.report)
        if not args.quiet:
            print(f"covergrid: {len(res.rows)} designs ({res.computed} computed, "
                  f"{len(res.rows) - res.computed} from the store); wrote {len(res.files or [])} "
                  f"files to {res.out_dir}")
        if resolved.requirement is not None:  # the verdict line, --quiet or not
            met = sum(1 for r in res.rows if r.get("meets") is True)
            print(f"{met} of {len(res.rows)} designs meet the requirement")
        return EXIT_OK
    from covergrid.trade.sizing import run_sizing

    sized = run_sizing(resolved, args.out, progress=not args.quiet,
                       figures=not args.no_figures, force=args.force, report=args.report)
    sizing_max = resolved.sizing.total.max if resolved.sizing is not None else None
    metric = resolved.requirement.metric if resolved.requirement is not None else ""
    if not args.quiet:
        print(f"covergrid: wrote {len(sized.files or [])} files to {sized.out_dir}")
        for r in sized.results:
            where = f"{r['altitude_km']:g} km, {r['inclination_deg']:g} deg"
            if r["feasible"]:
                loss = f", worst loss {r['worst_loss']}" if r["worst_loss"] else ""
                print(f"  {where}: {r['pattern']} {r['total']}/{r['planes']}/{r['phasing']} "
                      f"(achieved {_quantity(r['achieved'], metric)}, margin "
                      f"{_quantity(r['margin'], metric, signed=True)}{loss})")
            else:
                print(f"  {where}: none up to {sizing_max} satellites")
    b = sized.best  # the verdict line, --quiet or not
    if b is not None:
        print(f"smallest design meeting the requirement: {b['pattern']} "
              f"{b['total']}/{b['planes']}/{b['phasing']} at {b['altitude_km']:g} km, "
              f"{b['inclination_deg']:g} deg (achieved {_quantity(b['achieved'], metric)}, "
              f"margin {_quantity(b['margin'], metric, signed=True)})")
    else:
        print(f"no design up to {sizing_max} satellites meets the requirement")
    if not args.quiet:
        s = sized.search
        print(f"  designs: {s['designs_in_space']} in the space, {s['full_evaluated']} "
              f"evaluated at full resolution, {s['pruned']} pruned coarsely, "
              f"{s['skipped_by_early_stop']} skipped after the first feasible total")
    return EXIT_OK if sized.best is not None else EXIT_REQUIREMENT_NOT_MET


def _cmd_check(args: argparse.Namespace) -> int:
    """Validate, print the estimate (text or JSON), then refuse as ``run`` would (exit 2)."""
    from covergrid.io import json_safe
    from covergrid.pipeline.resources import (
        check_resources,
        check_trade_resources,
        estimate,
        estimate_trade,
    )
    from covergrid.study.build import resolve
    from covergrid.study.loading import load_study

    study = load_study(args.study)
    resolved = resolve(study)
    est = estimate(resolved)
    blocks = [b for b in ("sweep", "sizing") if getattr(resolved, b) is not None]
    trades = {b: estimate_trade(resolved, b) for b in blocks}
    derived = [dataclasses.asdict(d) for d in resolved.derived]
    if args.json:
        print(json.dumps(json_safe({**est, **trades, "derived": derived}), indent=2,
                         allow_nan=False))
    else:
        print(_estimate_text(study, est, trades, derived))
    check_resources(resolved, est)
    for b in blocks:
        check_trade_resources(resolved, b)
    return EXIT_OK


def _estimate_text(study, est: dict, trades: dict, derived: list[dict]) -> str:
    from covergrid.pipeline.resources import format_bytes, format_seconds

    def gb(n):
        return "unknown" if n is None else format_bytes(n)

    def memory(e: dict) -> str:
        parts = ", ".join(f"{k} {format_bytes(v)}" for k, v in e["memory_parts"].items() if v)
        return (f"about {gb(e['memory_bytes'])} ({parts}; limit {gb(e['memory_limit_bytes'])}"
                f", available {gb(e['memory_available_bytes'])})")

    groups = []
    for g in study.constellation:
        if g.walker is not None:
            w, t = g.walker, g.template
            alt = t.a_km - 6378.137
            sso = " (sun-synchronous)" if t.sun_synchronous else ""
            groups.append(f"Walker {w.pattern} {w.total}/{w.planes}/{w.phasing} at "
                          f"{alt:.0f} km, {t.inclination_value_deg:.4g} deg{sso}")
        else:
            groups.append(f"{len(g.satellites)} listed satellite(s)")
    s = study.sensor
    limits = [f"min elevation {s.min_elevation_deg:g} deg"]
    if s.min_off_nadir_deg is not None:
        limits.append(f"min off-nadir {s.min_off_nadir_deg:g} deg")
    if s.max_off_nadir_deg is not None:
        limits.append(f"max off-nadir {s.max_off_nadir_deg:g} deg")
    if s.look_side != "both":
        limits.append(f"looking {s.look_side} of the Earth-fixed velocity")
    if s.max_range_km is not None:
        limits.append(f"max range {s.max_range_km:g} km")
    if s.min_sun_elevation_deg is not None:
        limits.append(f"daylight only (Sun at least {s.min_sun_elevation_deg:g} deg high)")
    if study.dop is not None:
        limits.append(f"dilution of precision (PDOP threshold {study.dop.pdop_threshold:g})")
    lines = [
        f"study {study.study}: valid",
        f"  constellation   {est['satellites']} satellites: " + "; ".join(groups),
        f"  sensor          {', '.join(limits)}",
        f"  span            {study.duration_h:g} h from {study.epoch}, step {study.step_s:g} s"
        f" -> {est['steps']:,} samples, {est['satellite_samples']:,} satellite positions "
        f"(limits {est['limits']['max_samples']:,} and "
        f"{est['limits']['max_satellite_samples']:,})",
        f"  grid            {study.grid.resolution_deg:g} deg, latitudes "
        f"{study.grid.lat_min_deg:g} to {study.grid.lat_max_deg:g} deg"
        + (f", longitudes {study.grid.lon_min_deg:g} to {study.grid.lon_max_deg:g} deg"
           if (study.grid.lon_min_deg, study.grid.lon_max_deg) != (-180.0, 180.0) else "")
        + (f", region {study.region.title()}" if study.region is not None else "")
        + f" -> {est['grid_rows']} x {est['grid_columns']} = {est['cells']:,} cells"
        + (" computed in the region's window" if study.region is not None else ""),
        f"  work            about {est['visits']:.3g} satellite-sample-cell visibilities in "
        f"{est['bands']} latitude bands, {est['tasks_at_once']} at once",
        f"  time            about {format_seconds(est['seconds'])} (computing "
        f"{format_seconds(est['compute_s'])}, figures {format_seconds(est['figures_s'])})",
        f"  memory          {memory(est)}",
    ]
    if study.targets is not None:
        lines.append(f"  targets         {len(study.targets.entries):,} point targets")
    for d in derived:
        lines.append(f"  derived         {d['path']} = {d['value']:.4f} {d['unit']} "
                     f"({d['how']})")
    if study.requirement is not None:
        from covergrid.compute.metrics import METRICS
        from covergrid.compute.quantities import requirement_text

        r = study.requirement
        info = METRICS.get(r.metric)
        text = requirement_text({"metric": r.metric, "k": r.k, "at_most": r.at_most,
                                 "at_least": r.at_least, "area_fraction": r.area_fraction},
                                long_name=r.metric, units=info.units if info else None,
                                kind=info.kind if info else None, stored_units=True)
        lines.append(f"  requirement     {text}")
    for block, t in trades.items():
        what = (f"will run {t['designs']:,} designs" if block == "sweep" else
                f"{t['designs']:,} designs in the search space, will run at most "
                f"{t['evaluations']:,} evaluations")
        lines.append(f"  {block:<15} {what}; estimated time about "
                     f"{format_seconds(t['seconds'])} ({t['designs_at_once']} at once; about "
                     f"{t['visits']:.3g} visibilities); memory {memory(t)}")
    return "\n".join(lines)


def _cmd_elements(args: argparse.Namespace) -> int:
    import numpy as np

    from covergrid.constants import DEG, MU_EARTH_KM3_S2, WGS84_A_KM
    from covergrid.orbits.anomalies import mean_to_true, true_to_mean
    from covergrid.orbits.elements import cartesian_to_kepler, kepler_to_cartesian, validate_state

    mu = MU_EARTH_KM3_S2 if args.mu_km3_s2 is None else args.mu_km3_s2
    lo, hi = MU_RANGE_KM3_S2
    if not lo <= mu <= hi:
        return _fail(f"--mu-km3-s2: must be the Earth's gravitational parameter; allowed: "
                     f"{lo:.1f} to {hi:.1f} (WGS 84's 398600.4418 within 1 %); got {mu:g}")
    for name in ("raan_deg", "argp_deg", "nu_deg", "mean_anomaly_deg"):
        value = getattr(args, name)
        if value is not None and not -360.0 <= value <= 360.0:
            return _fail(f"--{name.replace('_', '-')}: out of range; allowed: -360 to 360; "
                         f"got {value:g}")
    state_given = args.position_km is not None or args.velocity_km_s is not None
    kepler_given = [n for n in ("a_km", "altitude_km", "e", "i_deg", "nu_deg",
                                "mean_anomaly_deg") if getattr(args, n) is not None]
    if state_given and kepler_given:
        return _fail(f"--{kepler_given[0].replace('_', '-')}: give either a state vector "
                     "(--position-km, --velocity-km-s) or elements, not both")
    if state_given:
        if args.position_km is None or args.velocity_km_s is None:
            missing = "--position-km" if args.position_km is None else "--velocity-km-s"
            return _fail(f"{missing}: is required with a state vector (three numbers)")
        r = np.array(args.position_km)
        v = np.array(args.velocity_km_s)
        r_km, v_km_s = math.hypot(*r), math.hypot(*v)  # hypot: no overflow on the way
        if not 1.0 <= r_km < EARTH_SOI_RADIUS_KM:
            return _fail(f"--position-km: |r| = {r_km:.6g} km; allowed: 1 km <= |r| < "
                         f"{EARTH_SOI_RADIUS_KM:,.0f} km (the Earth's sphere of influence)")
        if not v_km_s < MAX_SPEED_KM_S:
            return _fail(f"--velocity-km-s: |v| = {v_km_s:.6g} km/s; allowed: |v| < "
                         f"{MAX_SPEED_KM_S:g} km/s (far above any Earth orbit's speed)")
        try:  # zero or parallel vectors: a clear error naming the option
            validate_state(r, v)
        except CovergridError as exc:
            return _fail(str(exc).replace("position_km", "--position-km")
                         .replace("velocity_km_s", "--velocity-km-s"))
        k = cartesian_to_kepler(r, v, mu)
        a = float(k.a_km)
        e = float(k.e)
        rows = [
            ("semi-latus rectum p", f"{float(k.p_km):.6f}", "km"),
            ("semi-major axis a", f"{a:.6f}", "km"),
            ("eccentricity e", f"{e:.8f}", ""),
            ("inclination i", f"{float(k.i_rad) / DEG:.6f}", "deg"),
            ("RAAN", f"{float(k.raan_rad) / DEG:.6f}", "deg"),
            ("argument of perigee", f"{float(k.argp_rad) / DEG:.6f}", "deg"),
            ("true anomaly nu", f"{float(k.nu_rad) / DEG:.6f}", "deg"),
        ]
        if e < 1.0 and a > 0:
            mean = float(true_to_mean(k.nu_rad, k.e)) % (2 * math.pi)
            rows += [
                ("mean anomaly M", f"{mean / DEG:.6f}", "deg"),
                ("period", f"{2 * math.pi * math.sqrt(a**3 / mu):.3f}", "s"),
                ("perigee altitude", f"{a * (1 - e) - WGS84_A_KM:.3f}", "km"),
                ("apogee altitude", f"{a * (1 + e) - WGS84_A_KM:.3f}", "km"),
            ]
            if a * (1 - e) < WGS84_A_KM:
                rows.append(("note", "perigee below the Earth's surface", ""))
            if a * (1 + e) >= EARTH_SOI_RADIUS_KM:
                rows.append(("note", "apogee beyond the Earth's sphere of influence", ""))
        else:
            rows.append(("orbit", "open (e >= 1): no period or apogee", ""))
        print(_table(rows))
        return EXIT_OK
    if not kepler_given:
        return _fail("elements: give --position-km and --velocity-km-s, or --a-km (or "
                     "--altitude-km), --i-deg and --nu-deg (or --mean-anomaly-deg); see "
                     "covergrid elements --help")
    if (args.a_km is None) == (args.altitude_km is None):
        return _fail("--a-km: give exactly one of --a-km or --altitude-km")
    size_option = "--a-km" if args.a_km is not None else "--altitude-km"
    a = args.a_km if args.a_km is not None else WGS84_A_KM + args.altitude_km
    e = 0.0 if args.e is None else args.e
    if args.i_deg is None:
        return _fail("--i-deg: is required with elements (0 to 180 deg)")
    if (args.nu_deg is None) == (args.mean_anomaly_deg is None):
        return _fail("--nu-deg: give exactly one of --nu-deg or --mean-anomaly-deg")
    if not (math.isfinite(e) and 0.0 <= e < 1.0):
        return _fail(f"--e: must be in [0, 1) for a closed orbit; got {e:g}")
    if not a > 0:
        given = (f"{args.a_km:g}" if args.a_km is not None else
                 f"{args.altitude_km:g}, so a = {a:.6g} km")
        allowed = "a > 0" if args.a_km is not None else f"--altitude-km > -{WGS84_A_KM}"
        return _fail(f"{size_option}: must give a positive semi-major axis; allowed: "
                     f"{allowed}; got {given}")
    if not a * (1.0 + e) < EARTH_SOI_RADIUS_KM:
        return _fail(f"{size_option}: the apogee radius a(1+e) = {a * (1 + e):.6g} km is beyond "
                     f"the Earth's sphere of influence; allowed: a(1+e) < "
                     f"{EARTH_SOI_RADIUS_KM:,.0f} km")
    if not 0.0 <= args.i_deg <= 180.0:
        return _fail(f"--i-deg: must be in [0, 180]; got {args.i_deg:g}")
    nu = (args.nu_deg * DEG if args.nu_deg is not None
          else float(mean_to_true(args.mean_anomaly_deg * DEG, e)))
    r, v = kepler_to_cartesian(a, e, args.i_deg * DEG, args.raan_deg * DEG,
                               args.argp_deg * DEG, nu, mu)
    r = np.asarray(r, dtype=float).ravel()
    v = np.asarray(v, dtype=float).ravel()
    rows = [
        ("position r", " ".join(f"{x:.6f}" for x in r), "km"),
        ("velocity v", " ".join(f"{x:.9f}" for x in v), "km/s"),
        ("|r|", f"{np.linalg.norm(r):.6f}", "km"),
        ("|v|", f"{np.linalg.norm(v):.9f}", "km/s"),
        ("true anomaly nu", f"{nu / DEG:.6f}", "deg"),
        ("period", f"{2 * math.pi * math.sqrt(a**3 / mu):.3f}", "s"),
        ("perigee altitude", f"{a * (1 - e) - WGS84_A_KM:.3f}", "km"),
    ]
    if e < 1.0 and a * (1 - e) < WGS84_A_KM:
        rows.append(("note", "perigee below the Earth's surface", ""))
    print(_table(rows))
    return EXIT_OK


def _table(rows) -> str:
    width = max(len(r[0]) for r in rows)
    return "\n".join(f"{name:<{width}}  {value} {unit}".rstrip() for name, value, unit in rows)


def _cmd_schema() -> int:
    from covergrid.study.loading import export_schema

    sys.stdout.write(json.dumps(export_schema(), indent=2) + "\n")
    return EXIT_OK


def command() -> None:
    """The ``covergrid`` program: :func:`main`, then the process ends at once with its status.

    Every output is written and closed (atomically) before :func:`main` returns, so the
    interpreter's teardown (finalising numba, llvmlite, xarray, dask: 0.3-0.6 s measured
    after a run, about a tenth of a whole study) is skipped with ``os._exit`` once the
    standard streams are flushed. Callers of :func:`main` in a program of their own keep
    their interpreter.
    """
    code = main()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a closed pipe: nothing more can be said
            pass
    os._exit(code)


if __name__ == "__main__":
    command()
