"""Atomic files: written under a temporary name in their final folder, then renamed.

Every file is written to a temporary name in its final folder, flushed to disk with
``fsync`` and then renamed over the final name with :func:`os.replace` (atomic on POSIX
file systems). An interrupted write therefore never leaves a partial file at a final path,
only a hidden ``.<name>.*.tmp`` file that is removed when the error is caught. Operating
system errors become one-line :class:`~covergrid.errors.OutputError` messages.
"""

from __future__ import annotations

import contextlib
import errno
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from covergrid.errors import OutputError, OutputRefused

__all__ = ["atomic_path", "explain_os_error"]


def _current_umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


_UMASK = _current_umask()


def explain_os_error(exc: OSError, path: Path, *, refused: bool = False) -> OutputError:
    """A one-line OutputError naming ``path`` and the cause of an operating-system error.

    ``refused``: the error happened before any work (exit status 2,
    :class:`~covergrid.errors.OutputRefused`), not while running (exit status 3).
    """
    why = {
        errno.ENOSPC: "no space left on the device; free some space or choose another --out",
        errno.EDQUOT: "disk quota exceeded; free some space or choose another --out",
        errno.EACCES: "permission denied; choose a folder you can write to with --out",
        errno.EPERM: "operation not permitted; choose a folder you can write to with --out",
        errno.EROFS: "the file system is read-only; choose another --out",
        errno.ENOTDIR: "a part of the path is a file, not a folder; choose another --out",
        errno.EEXIST: "a file of that name is in the way; choose another --out",
    }.get(exc.errno or -1, f"{exc.strerror or exc}; choose another --out")
    cls = OutputRefused if refused else OutputError
    return cls(f"cannot write: {why}", field=str(path))


def _mkdir(folder: Path) -> None:
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise explain_os_error(exc, folder) from None
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
        raise explain_os_error(exc, final) from None
    tmp = Path(tmp_name)
    try:
        yield tmp
        _fsync_path(tmp)
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; give the usual permissions
        os.replace(tmp, final)
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise explain_os_error(exc, final) from None
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise
    _fsync_dir(final.parent)
