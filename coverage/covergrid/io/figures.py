"""Figures, saved atomically (see :mod:`covergrid.io.atomic`): the one figure saver."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from covergrid.io.atomic import atomic_path

__all__ = ["save_figure"]


def save_figure(fig, path: str | os.PathLike, **savefig_kw: Any) -> Path:
    """Save a matplotlib figure atomically; the format follows the final suffix."""
    final = Path(path)
    fmt = savefig_kw.pop("format", final.suffix.lstrip(".") or "png")
    with atomic_path(final) as tmp:
        fig.savefig(tmp, format=fmt, **savefig_kw)
    return final
