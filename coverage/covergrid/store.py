"""A resumable result store for trade studies: one small JSON file per evaluated design.

Each record is written atomically (temporary file in the same folder, fsync, rename: see
:func:`covergrid.io.atomic_path`) the moment its design finishes, so an interrupted sweep
(Ctrl-C, SIGKILL, power loss) loses only the designs that were still running. A record is
filed under a key that is the SHA-256 of everything that determines its result (see
:func:`result_key`): a changed study (other grid, step, span, epoch, sensor, requirement,
software) gives other keys and never reuses a stale record.

Records are plain JSON (no pickle): ``{"format": 1, "key": ..., "inputs": {...},
"row": {...}}``. A record that cannot be read, is not valid JSON, or whose ``key`` or
``format`` does not match is treated as missing, so the design is computed again.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

from covergrid import io
from covergrid.errors import CovergridError

__all__ = ["STORE_FORMAT", "ResultStore", "result_key", "software_fingerprint"]

#: Version of the record layout; a record of another format is ignored (recomputed).
STORE_FORMAT = 1
_KEY_RE = re.compile(r"^[0-9a-f]{64}$")
#: Modules whose source decides a design's numbers: any edit to them changes every key.
_RESULT_MODULES = (
    "engine.py", "kernel.py", "metrics.py", "grid.py", "summary.py",
    "orbits/j2.py", "orbits/walker.py", "orbits/elements.py", "earth/time.py", "earth/frames.py",
    "constants.py", "sweep.py",
)


def _canonical(obj: Any) -> Any:
    """Plain JSON data with floats written exactly (repr) so equal inputs hash equally."""
    if isinstance(obj, Mapping):
        return {str(k): _canonical(v) for k, v in sorted(obj.items(), key=lambda kv: str(kv[0]))}
    if isinstance(obj, (list, tuple)):
        return [_canonical(v) for v in obj]
    if isinstance(obj, bool) or obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, int):
        return int(obj)
    if isinstance(obj, float):
        if not math.isfinite(obj):
            return repr(obj)
        # integral floats and ints hash alike (altitude 550 and 550.0 are one design)
        return int(obj) if obj.is_integer() and abs(obj) < 2**53 else repr(obj)
    if hasattr(obj, "item"):  # numpy scalar
        return _canonical(obj.item())
    raise TypeError(f"cannot hash a {type(obj).__name__} into a result key")


def software_fingerprint() -> str:
    """covergrid's version plus a SHA-256 of the sources that decide a design's result.

    Returns
    -------
    str
        ``"<version>+<first 16 hex digits>"``; a source that cannot be read contributes its
        name only (an installed build without sources is keyed by its version).
    """
    from covergrid import __version__

    root = Path(__file__).resolve().parent
    h = hashlib.sha256()
    for name in _RESULT_MODULES:
        h.update(name.encode())
        try:
            h.update((root / name).read_bytes())
        except OSError:
            pass
    return f"{__version__}+{h.hexdigest()[:16]}"


def result_key(inputs: Mapping[str, Any]) -> str:
    """The store key of a design: SHA-256 of its canonical JSON inputs.

    Parameters
    ----------
    inputs : mapping
        Everything that decides the result: the design's parameters and the evaluation
        context (grid, span, step, epoch, sensor, requirement, software fingerprint).

    Returns
    -------
    str
        64 lower-case hex digits.
    """
    text = json.dumps(_canonical(inputs), sort_keys=True, separators=(",", ":"),
                      allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


class ResultStore:
    """A folder of per-design JSON records, keyed by :func:`result_key`.

    Parameters
    ----------
    folder : path-like
        Where the records live (created on the first write).
    """

    def __init__(self, folder: str | os.PathLike) -> None:
        self.folder = Path(folder)

    def _path(self, key: str) -> Path:
        if not isinstance(key, str) or not _KEY_RE.match(key):
            raise CovergridError(f"{key!r} is not a result key; allowed: 64 hex digits",
                                 field="store.key")
        return self.folder / f"{key}.json"

    def get(self, key: str) -> dict[str, Any] | None:
        """The stored row of ``key``, or None when absent or unreadable."""
        path = self._path(key)
        try:
            record = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        if (not isinstance(record, dict) or record.get("format") != STORE_FORMAT
                or record.get("key") != key or not isinstance(record.get("row"), dict)):
            return None
        return record["row"]

    def __contains__(self, key: str) -> bool:
        return self.get(key) is not None

    def put(self, key: str, row: Mapping[str, Any], inputs: Mapping[str, Any]) -> Path:
        """Write one record atomically; returns its path."""
        record = {"format": STORE_FORMAT, "key": key, "inputs": _canonical(inputs),
                  "row": dict(row)}
        return io.write_json(record, self._path(key))

    def keys(self) -> Iterator[str]:
        """Keys of the records present (readable or not)."""
        if not self.folder.is_dir():
            return iter(())
        return (p.stem for p in sorted(self.folder.glob("*.json")) if _KEY_RE.match(p.stem))

    def __len__(self) -> int:
        return sum(1 for _ in self.keys())
