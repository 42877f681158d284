"""Every writer of covergrid's outputs: atomic files, tables, netCDF and figures.

Each file is written to a temporary name in its final folder, flushed and renamed into
place (:mod:`covergrid.io.atomic`); failures become one-line
:class:`~covergrid.errors.OutputError` messages naming the path.
"""

from __future__ import annotations

from covergrid.errors import OutputError
from covergrid.io.atomic import atomic_path, check_writable, explain_os_error, study_output_dir
from covergrid.io.figures import save_figure
from covergrid.io.files import json_safe, write_csv, write_json, write_text, write_yaml
from covergrid.io.netcdf import FILL_DOUBLE, netcdf_encoding, write_netcdf

__all__ = [
    "FILL_DOUBLE",
    "OutputError",
    "atomic_path",
    "check_writable",
    "explain_os_error",
    "json_safe",
    "netcdf_encoding",
    "save_figure",
    "study_output_dir",
    "write_csv",
    "write_json",
    "write_netcdf",
    "write_text",
    "write_yaml",
]
