"""A resumable result store for trade studies: one small JSON file per evaluated design.

Each record is written atomically (temporary file in the same folder, fsync, rename: see
:func:`covergrid.io.atomic.atomic_path`) the moment its design finishes, so an interrupted sweep
(Ctrl-C, SIGKILL, power loss) loses only the designs that were still running. A record is
filed under a key that is the SHA-256 of everything that determines its result (see
:func:`result_key`): a changed study (other grid, step, span, epoch, sensor, requirement,
software) gives other keys and never reuses a stale record.

Records are plain JSON (no pickle): ``{"format": 1, "key": ..., "inputs": {...},
"row": {...}}``. A record that cannot be read, is not valid JSON, or whose ``key`` or
``format`` does not match is treated as missing, so the design is computed again.
"""

from __future__ import annotations

import ast
import hashlib
import importlib.util
import json
import math
import os
import re
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

from covergrid import io
from covergrid.errors import CovergridError

__all__ = ["EVALUATION_MODULE", "STORE_FORMAT", "MemoryStore", "ResultStore", "result_key",
           "result_modules", "software_fingerprint"]

#: Version of the record layout; a record of another format is ignored (recomputed).
STORE_FORMAT = 1
_KEY_RE = re.compile(r"^[0-9a-f]{64}$")
#: The module that evaluates a design: it and every covergrid module it imports (directly or
#: through others, at module level or inside functions) decide a row's numbers.
EVALUATION_MODULE = "covergrid.trade.evaluate"


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
    if isinstance(obj, bytes):  # a region's areas (well-known binary): by their digest
        return "sha256:" + hashlib.sha256(obj).hexdigest()
    if hasattr(obj, "item"):  # numpy scalar
        return _canonical(obj.item())
    raise TypeError(f"cannot hash a {type(obj).__name__} into a result key")


def result_modules(root: str = EVALUATION_MODULE) -> list[tuple[str, Path]]:
    """Every covergrid module the evaluation imports, with its source file, in name order.

    Found by reading the sources (``import`` and ``from ... import`` statements anywhere in a
    module, relative ones and those inside functions included; those under
    ``if TYPE_CHECKING:`` are skipped, as they never run), not from what happens to be
    loaded, so every process computes the same list. The packages holding each module are
    included, as their ``__init__`` runs first.

    Raises
    ------
    CovergridError
        If an imported covergrid module has no readable source: keying without it would
        let an edit to it reuse stale results.
    """
    found: dict[str, Path] = {}
    todo = [root]
    while todo:
        name = todo.pop()
        if name in found:
            continue
        path = _source_of(name)
        found[name] = path
        parts = name.split(".")
        todo += [".".join(parts[:n]) for n in range(1, len(parts))]
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        todo += _imported_covergrid_modules(ast.parse(path.read_bytes(), filename=str(path)),
                                            package)
    return sorted(found.items())


def _source_of(name: str) -> Path:
    """The ``.py`` file of a covergrid module (raises CovergridError if there is none)."""
    spec = importlib.util.find_spec(name)
    origin = getattr(spec, "origin", None)
    if origin is None or not origin.endswith(".py") or not os.path.isfile(origin):
        raise CovergridError(f"no Python source for module {name!r}; the result store keys "
                             "designs by the sources that compute them", field="store.software")
    return Path(origin)


def _imported_covergrid_modules(tree: ast.AST, package: str) -> list[str]:
    """Names of the covergrid modules a module's source imports (see result_modules)."""
    out: list[str] = []

    def visit(node: ast.AST) -> None:
        if (isinstance(node, ast.If) and isinstance(node.test, ast.Name)
                and node.test.id == "TYPE_CHECKING"):
            for branch in node.orelse:
                visit(branch)
            return
        if isinstance(node, ast.Import):
            out.extend(a.name for a in node.names if a.name.split(".")[0] == "covergrid")
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parts = package.split(".")[: len(package.split(".")) - (node.level - 1)]
                base = ".".join(parts + ([base] if base else []))
            if base.split(".")[0] == "covergrid":
                out.append(base)
                spec = importlib.util.find_spec(base)
                if spec is not None and spec.submodule_search_locations is not None:
                    # "from covergrid.compute import kernel" imports a module by its name
                    out.extend(f"{base}.{a.name}" for a in node.names
                               if importlib.util.find_spec(f"{base}.{a.name}") is not None)
        for child in ast.iter_child_nodes(node):
            visit(child)

    visit(tree)
    return out


def software_fingerprint() -> str:
    """covergrid's version plus a SHA-256 of the sources that decide a design's result.

    Returns
    -------
    str
        ``"<version>+<first 16 hex digits>"`` over every module of :func:`result_modules`
        (its dotted name and its source bytes).
    """
    from covergrid import __version__

    h = hashlib.sha256()
    for name, path in result_modules():
        h.update(name.encode())
        h.update(path.read_bytes())
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


class MemoryStore:
    """A store that forgets on exit (no output folder given); the interface of ResultStore."""

    def __init__(self) -> None:
        self._rows: dict[str, dict] = {}

    def get(self, key: str) -> dict | None:
        """The stored row of ``key``, or None."""
        return self._rows.get(key)

    def __contains__(self, key: str) -> bool:
        return key in self._rows

    def put(self, key: str, row: Mapping[str, Any], inputs: Mapping[str, Any]) -> None:
        """Keep one row."""
        self._rows[key] = dict(row)

    def keys(self) -> Iterator[str]:
        """Keys of the rows kept."""
        return iter(list(self._rows))

    def __len__(self) -> int:
        return len(self._rows)
