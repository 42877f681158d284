"""Writing outputs: atomic files (netCDF, JSON, CSV, YAML, figures) in a study's folder.

Every file is written to a temporary name in its final folder, flushed to disk with
``fsync`` and then renamed over the final name with :func:`os.replace` (atomic on POSIX
file systems). An interrupted write therefore never leaves a partial file at a final path,
only a hidden ``.<name>.*.tmp`` file that is removed when the error is caught.
"""

from __future__ import annotations

import contextlib
import csv
import errno
import json
import math
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import yaml

from covergrid.errors import CovergridError

__all__ = [
    "OutputError",
    "study_output_dir",
    "check_writable",
    "atomic_path",
    "write_text",
    "write_json",
    "write_csv",
    "write_yaml",
    "write_netcdf",
    "save_figure",
    "netcdf_encoding",
]

#: netCDF default fill value of a double (netcdf-c NC_FILL_DOUBLE).
FILL_DOUBLE = 9.969209968386869e36
_COORDINATE_LIKE = frozenset({"lat", "lon", "k", "lat_bnds", "lon_bnds", "nv"})


def _current_umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


_UMASK = _current_umask()


class OutputError(CovergridError):
    """An output cannot be written (folder unwritable, disk full, path outside the root)."""


def _explain(exc: OSError, path: Path) -> OutputError:
    why = {
        errno.ENOSPC: "no space left on the device; free some space or choose another --out",
        errno.EDQUOT: "disk quota exceeded; free some space or choose another --out",
        errno.EACCES: "permission denied; choose a folder you can write to with --out",
        errno.EPERM: "operation not permitted; choose a folder you can write to with --out",
        errno.EROFS: "the file system is read-only; choose another --out",
        errno.ENOTDIR: "a part of the path is a file, not a folder; choose another --out",
        errno.EEXIST: "a file of that name is in the way; choose another --out",
    }.get(exc.errno or -1, f"{exc.strerror or exc}; choose another --out")
    return OutputError(f"cannot write: {why}", field=str(path))


def study_output_dir(out_root: str | os.PathLike, study_name: str) -> Path:
    """The folder ``out_root/<study_name>/``, refusing any name that would land elsewhere.

    Parameters
    ----------
    out_root : path-like
        The output root (the ``--out`` folder).
    study_name : str
        A plain file name (validated by the study model; checked again here).

    Returns
    -------
    pathlib.Path
        The absolute study folder (not created).

    Raises
    ------
    OutputError
        If the name is not a plain file name or resolves outside ``out_root``.
    """
    root = Path(out_root).expanduser().resolve()
    name = str(study_name)
    if (not name or name in (".", "..") or "/" in name or "\\" in name
            or any(ord(c) < 32 for c in name)):
        raise OutputError(f"study name {name!r} is not a plain file name", field="study")
    target = (root / name).resolve()
    if target.parent != root:
        raise OutputError(f"study name {name!r} would write outside {str(root)!r}",
                          field="study")
    return target


def check_writable(folder: str | os.PathLike) -> None:
    """Check, before any work, that ``folder`` can be created and written to.

    Creates nothing that stays: the nearest existing ancestor is probed with a temporary
    file that is removed at once.

    Raises
    ------
    OutputError
        If the folder (or its nearest existing ancestor) is not a writable folder.
    """
    path = Path(folder)
    probe = path
    while not probe.exists():
        if probe.parent == probe:
            break
        probe = probe.parent
    if not probe.is_dir():
        raise OutputError("cannot write: a part of the path is a file, not a folder; "
                          "choose another --out", field=str(probe))
    try:
        fd, name = tempfile.mkstemp(prefix=".covergrid-probe.", dir=probe)
        os.close(fd)
        os.unlink(name)
    except OSError as exc:
        raise _explain(exc, probe) from None


def _mkdir(folder: Path) -> None:
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise _explain(exc, folder) from None
    if not folder.is_dir():
        raise OutputError("cannot write: a file is in the way of the folder", field=str(folder))


def _fsync_path(path: str | os.PathLike) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(folder: Path) -> None:
    with contextlib.suppress(OSError):  # not every file system lets a folder be fsynced
        _fsync_path(folder)


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success fsync it and rename it into place.

    Parameters
    ----------
    path : path-like
        Final file name. Its folder is created if missing.

    Yields
    ------
    pathlib.Path
        A temporary file name in the same folder (the file exists, empty).

    Raises
    ------
    OutputError
        On an operating-system error (disk full, permission denied ...). The temporary file
        is removed and the final path is left as it was.
    """
    final = Path(path)
    _mkdir(final.parent)
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{final.name}.", suffix=".tmp", dir=final.parent)
        os.close(fd)
    except OSError as exc:
        raise _explain(exc, final) from None
    tmp = Path(tmp_name)
    try:
        yield tmp
        _fsync_path(tmp)
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; give the usual permissions
        os.replace(tmp, final)
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise _explain(exc, final) from None
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise
    _fsync_dir(final.parent)


def write_text(text: str, path: str | os.PathLike) -> Path:
    """Write UTF-8 text atomically; returns the final path."""
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)
    return Path(path)


def _json_safe(obj: Any) -> Any:
    """Replace NaN/inf by None and numpy scalars by Python ones (strict JSON)."""
    if isinstance(obj, dict):
        return {str(k): _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _json_safe(obj.tolist())
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def write_json(obj: Any, path: str | os.PathLike) -> Path:
    """Write strict JSON (non-finite numbers become null) atomically."""
    text = json.dumps(_json_safe(obj), indent=2, allow_nan=False) + "\n"
    return write_text(text, path)


def write_csv(rows: list[dict[str, Any]], path: str | os.PathLike,
              columns: tuple[str, ...] | list[str]) -> Path:
    """Write rows (dicts keyed by ``columns``) as CSV atomically; NaN is written empty."""
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(columns), extrasaction="raise")
        writer.writeheader()
        for row in rows:
            writer.writerow({k: ("" if isinstance(v, float) and not math.isfinite(v) else
                                 (repr(v) if isinstance(v, float) else v))
                             for k, v in row.items()})
    return Path(path)


def write_yaml(obj: Any, path: str | os.PathLike) -> Path:
    """Write plain data as YAML (safe dumper) atomically."""
    return write_text(yaml.safe_dump(_json_safe(obj), sort_keys=False), path)


def netcdf_encoding(ds, complevel: int = 4) -> dict[str, dict[str, Any]]:
    """Encoding for :meth:`xarray.Dataset.to_netcdf`: zlib for data, fill values for floats.

    Coordinates and bounds get no ``_FillValue`` (CF 1.8 sec. 2.5.1: a coordinate variable
    must not hold missing values); float metrics get the netCDF default double fill value so
    NaN cells are marked missing; integer counts are never missing and get none; 64-bit
    integers (not among the CF 1.8 sec. 2.2 data types) are stored as doubles.
    """
    enc: dict[str, dict[str, Any]] = {}
    for name, var in ds.variables.items():
        if name in _COORDINATE_LIKE or name in ds.dims:
            enc[name] = {"_FillValue": None}
            continue
        e: dict[str, Any] = {}
        if var.ndim >= 1 and var.dtype.kind in "fiub":
            e.update(zlib=True, complevel=complevel, shuffle=True)
        if var.dtype.kind == "f":
            e["_FillValue"] = FILL_DOUBLE if var.dtype == np.float64 else np.float32(FILL_DOUBLE)
        elif var.dtype.kind in "iub":
            e["_FillValue"] = None
            if var.dtype.itemsize == 8:
                # CF 1.8 sec. 2.2 lists no 64-bit integers; a double holds counts exactly
                # up to 2**53.
                e["dtype"] = "f8"
        enc[name] = e
    return enc


def write_netcdf(ds, path: str | os.PathLike) -> Path:
    """Write a Dataset as compressed netCDF-4 atomically (see :func:`netcdf_encoding`)."""
    with atomic_path(path) as tmp:
        try:
            ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=netcdf_encoding(ds))
        except RuntimeError as exc:
            raise _netcdf_write_error(exc, tmp, ds.nbytes) from None
    return Path(path)


def _netcdf_write_error(exc: RuntimeError, tmp: Path, data_bytes: int) -> OSError:
    """The OSError behind a failed netCDF write, for :func:`atomic_path` to explain.

    netCDF-C and HDF5 report a failed write (a full disk among others) as a RuntimeError
    ("NetCDF: HDF error") without an errno. If the folder has less free space than the
    uncompressed data, the disk filling up is taken to be the cause.
    """
    try:
        free = shutil.disk_usage(tmp.parent).free
    except OSError:
        free = None
    if free is not None and free < max(int(data_bytes), 2**20):
        return OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
    return OSError(errno.EIO, f"the netCDF library could not write the file ({exc})")


def save_figure(fig, path: str | os.PathLike, **savefig_kw: Any) -> Path:
    """Save a matplotlib figure atomically; the format follows the final suffix."""
    final = Path(path)
    fmt = savefig_kw.pop("format", final.suffix.lstrip(".") or "png")
    with atomic_path(final) as tmp:
        fig.savefig(tmp, format=fmt, **savefig_kw)
    return final
