"""CF netCDF-4 output, written atomically (see :mod:`covergrid.io.atomic`)."""

from __future__ import annotations

import errno
import os
import shutil
from pathlib import Path
from typing import Any

import numpy as np

from covergrid.io.atomic import atomic_path

__all__ = ["FILL_DOUBLE", "netcdf_encoding", "write_netcdf"]

#: netCDF default fill value of a double (netcdf-c NC_FILL_DOUBLE).
FILL_DOUBLE = 9.969209968386869e36
_COORDINATE_LIKE = frozenset({"lat", "lon", "k", "lat_bnds", "lon_bnds", "nv"})


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
