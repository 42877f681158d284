"""Text, JSON, CSV and YAML outputs, each written atomically (see :mod:`covergrid.io.atomic`)."""

from __future__ import annotations

import csv
import json
import math
import os
from pathlib import Path
from typing import Any

import numpy as np
import yaml

from covergrid.io.atomic import atomic_path

__all__ = ["json_safe", "write_csv", "write_json", "write_text", "write_yaml"]


def write_text(text: str, path: str | os.PathLike) -> Path:
    """Write UTF-8 text atomically; returns the final path."""
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)
    return Path(path)


def json_safe(obj: Any) -> Any:
    """Replace NaN/inf by None and numpy scalars by Python ones (strict JSON)."""
    if isinstance(obj, dict):
        return {str(k): json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return json_safe(obj.tolist())
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def write_json(obj: Any, path: str | os.PathLike) -> Path:
    """Write strict JSON (non-finite numbers become null) atomically."""
    text = json.dumps(json_safe(obj), indent=2, allow_nan=False) + "\n"
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
    return write_text(yaml.safe_dump(json_safe(obj), sort_keys=False), path)
