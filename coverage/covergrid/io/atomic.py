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

from covergrid.errors import OutputError

__all__ = ["atomic_path", "check_writable", "explain_os_error", "study_output_dir"]


def _current_umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


_UMASK = _current_umask()


def explain_os_error(exc: OSError, path: Path) -> OutputError:
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
        raise explain_os_error(exc, probe) from None


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
