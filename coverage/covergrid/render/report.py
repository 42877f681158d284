"""``report.html``: one self-contained document of a run, a sweep or a sizing search.

The page is rendered from a jinja2 template (``render/templates/report.html.j2``, HTML
escaped automatically) and holds everything in the one file: the style sheet inline, every
figure embedded as a ``data:image/png;base64`` URI, no script and no address outside the
file, so it opens offline, can be mailed or archived as it is, and shows the same wherever it
is opened. What goes in it is assembled by :mod:`covergrid.pipeline.report`; this module only
turns that plain data into HTML.
"""

from __future__ import annotations

import base64
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

__all__ = ["TEMPLATE", "data_uri", "render_report"]

#: The template, inside the package (``render/templates``).
TEMPLATE = "report.html.j2"


def data_uri(path: str | os.PathLike, mime: str = "image/png") -> str:
    """A file's contents as a ``data:`` URI (RFC 2397), base64-encoded.

    Parameters
    ----------
    path : path-like
        The file (a figure's PNG).
    mime : str
        Its media type.

    Returns
    -------
    str
        ``data:<mime>;base64,<contents>``.
    """
    encoded = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    return f"data:{mime};base64,{encoded}"


def _environment():
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("covergrid.render", "templates"),
        autoescape=jinja2.select_autoescape(default=True, default_for_string=True),
        undefined=jinja2.StrictUndefined,  # a missing value is an error, never blank text
        trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
    )
    env.filters["data_uri"] = data_uri
    return env


def render_report(context: Mapping[str, Any]) -> str:
    """The report's HTML from its context (see :func:`covergrid.pipeline.report.report_context`).

    Parameters
    ----------
    context : mapping
        ``title``, ``kind`` ("run", "sweep" or "sizing"), ``study`` (name), ``verdict`` (None
        or {``met``, ``text``}), ``notes`` (list of text), ``summary`` (None or {``columns``,
        ``rows``}), ``figures`` (list of {``title``, ``path``, ``file``}), ``tables`` (list of
        {``title``, ``columns``, ``rows``, ``note``}), ``study_yaml``, ``provenance`` (list
        of (name, value)), ``cautions`` (text).

    Returns
    -------
    str
        The whole HTML document.
    """
    return _environment().get_template(TEMPLATE).render(**context)
