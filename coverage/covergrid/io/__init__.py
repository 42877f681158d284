"""Every writer of covergrid's outputs: result folders, atomic files, tables, netCDF, figures.

A study's result folder is written whole: under a lock, into a staging folder that is
swapped in once every file is written (:mod:`covergrid.io.folders`). Each file is written
to a temporary name in its final folder, flushed and renamed into place
(:mod:`covergrid.io.atomic`); failures become one-line
:class:`~covergrid.errors.OutputError` messages naming the path.
"""

from __future__ import annotations

from covergrid.errors import OutputError, OutputRefused
from covergrid.io.atomic import atomic_path, explain_os_error
from covergrid.io.figures import save_figure
from covergrid.io.files import json_safe, write_csv, write_json, write_text, write_yaml
from covergrid.io.folders import (
    ResultFolder,
    deferred_signals,
    real_subfolder,
    remove_tree,
    study_output_dir,
)
from covergrid.io.netcdf import FILL_DOUBLE, netcdf_encoding, write_netcdf

__all__ = [
    "FILL_DOUBLE",
    "OutputError",
    "OutputRefused",
    "ResultFolder",
    "atomic_path",
    "deferred_signals",
    "explain_os_error",
    "json_safe",
    "netcdf_encoding",
    "real_subfolder",
    "remove_tree",
    "save_figure",
    "study_output_dir",
    "write_csv",
    "write_json",
    "write_netcdf",
    "write_text",
    "write_yaml",
]
