"""Result folders written whole: one writer at a time, a staging folder, one swap.

A study's results live in ``ROOT/<study>/``. A run never writes there file by file; it

1. takes the study's lock, ``ROOT/.<study>.lock`` (an advisory ``flock`` held for the whole
   run: a second writer of the same study is refused at once, naming the holder's process;
   the operating system releases the lock of a process that dies, so a lock left by a
   killed run never blocks the next one);
2. clears what an earlier run killed outright (SIGKILL, power loss) left beside the folder:
   staging folders are removed, and a results folder caught between the two renames of a
   swap is put back;
3. writes every file into a new staging folder beside the target,
   ``ROOT/.<study>.staging-<random>/``, on the same file system;
4. once every file is written, swaps the staging folder in: the old folder is renamed
   aside (``ROOT/.<study>.previous-<random>``), the staging folder is renamed to
   ``ROOT/<study>`` and the old one is removed. SIGINT and SIGTERM are held back for the
   two renames.

So ``ROOT/<study>/`` always holds the files of one run: the earlier run's until the swap,
the new run's after it. A run that fails or is interrupted removes its staging folder and
leaves the earlier results as they were. Subfolders named in ``carry`` (a trade study's
``store/``, whose records are written in place as designs finish, so that an interrupted
sweep keeps them) are carried into the new folder as hard links.

Nothing is written through a symbolic link: a link at ``ROOT/<study>`` or at a carried
subfolder is refused before any work (:class:`~covergrid.errors.OutputRefused`).
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import errno
import fcntl
import os
import re
import secrets
import shutil
import signal
import socket
import stat
import threading
from collections.abc import Iterator, Sequence
from pathlib import Path
from types import TracebackType

from covergrid.errors import OutputError, OutputRefused
from covergrid.io.atomic import explain_os_error

__all__ = ["ResultFolder", "deferred_signals", "real_subfolder", "remove_tree",
           "study_output_dir"]


def study_output_dir(out_root: str | os.PathLike, study_name: str) -> Path:
    """The folder ``out_root/<study_name>/``, refusing any name or link that leads elsewhere.

    Parameters
    ----------
    out_root : path-like
        The output root (the ``--out`` folder); a link there is followed.
    study_name : str
        A plain file name (validated by the study model; checked again here).

    Returns
    -------
    pathlib.Path
        The absolute study folder (not created).

    Raises
    ------
    OutputRefused
        If the name is not a plain file name, or ``out_root/<study_name>`` is a symbolic
        link or a file.
    """
    root = Path(out_root).expanduser().resolve()
    name = str(study_name)
    if (not name or name in (".", "..") or name.startswith(".") or "/" in name
            or "\\" in name or any(ord(c) < 32 for c in name)):
        raise OutputRefused(f"study name {name[:100]!r} is not a plain file name",
                            field="study")
    target = root / name
    if target.is_symlink():
        raise OutputRefused("is a symbolic link; covergrid replaces a result folder whole and "
                            "writes through no link; remove the link or choose another --out",
                            field=str(target))
    if target.exists() and not target.is_dir():
        raise OutputRefused("a file is in the way of the result folder; remove it or choose "
                            "another --out", field=str(target))
    return target


def real_subfolder(folder: Path, name: str) -> Path:
    """``folder/name``, refused if it is a symbolic link or a file (before any work).

    Raises
    ------
    OutputRefused
        Naming the path.
    """
    path = folder / name
    if path.is_symlink():
        raise OutputRefused("is a symbolic link; covergrid writes through no link; remove it "
                            "or choose another --out", field=str(path))
    if path.exists() and not path.is_dir():
        raise OutputRefused("a file is in the way of a folder; remove it or choose another "
                            "--out", field=str(path))
    return path


@contextlib.contextmanager
def deferred_signals() -> Iterator[None]:
    """Hold SIGINT and SIGTERM back while the block runs, then deliver them.

    Only the main thread can set signal handlers; elsewhere the block runs unprotected
    (signals are delivered to the main thread's handlers anyway).
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    pending: list[int] = []
    saved = {int(s): signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM)}

    def hold(signum, frame):  # noqa: ARG001 - the signal handler's signature
        pending.append(signum)

    for signum in saved:
        signal.signal(signum, hold)
    try:
        yield
    finally:
        for signum, handler in saved.items():
            signal.signal(signum, handler)
        for signum in dict.fromkeys(pending):
            signal.raise_signal(signum)


def remove_tree(path: Path) -> bool:
    """Remove a folder and all it holds (read-only folders included); True if it is gone."""

    def retry(func, name, _exc):
        # a folder without write permission cannot lose its entries: grant it and retry
        with contextlib.suppress(OSError):
            parent = os.path.dirname(name)
            os.chmod(parent, os.stat(parent).st_mode | stat.S_IRWXU)
            if os.path.isdir(name) and not os.path.islink(name):
                os.chmod(name, os.stat(name).st_mode | stat.S_IRWXU)
            func(name)

    with contextlib.suppress(FileNotFoundError):
        shutil.rmtree(path, onerror=retry)
    return not os.path.lexists(path)


class _Lock:
    """The advisory lock ``ROOT/.<study>.lock`` of one study's results."""

    def __init__(self, path: Path, target: Path) -> None:
        self.path, self.target = path, target
        self.fd: int | None = None

    def acquire(self) -> None:
        flags = os.O_RDWR | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0)
        while True:
            try:
                fd = os.open(self.path, flags, 0o644)
            except OSError as exc:
                if exc.errno == errno.ELOOP:
                    raise OutputRefused("is a symbolic link; remove it", field=str(self.path)
                                        ) from None
                raise explain_os_error(exc, self.path, refused=True) from None
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError as exc:
                holder = _read_holder(fd)
                os.close(fd)
                if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                    raise OutputRefused(
                        f"another covergrid process{holder} is writing these results; wait "
                        "for it to end or choose another --out", field=str(self.target)
                    ) from None
                raise explain_os_error(exc, self.path, refused=True) from None
            # the holder before us may have removed the file after we opened it: the lock
            # counts only if it is on the file now at the path
            try:
                same = os.stat(self.path, follow_symlinks=False).st_ino == os.fstat(fd).st_ino
            except FileNotFoundError:
                same = False
            if same:
                break
            os.close(fd)
        self.fd = fd
        now = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
        with contextlib.suppress(OSError):
            os.ftruncate(fd, 0)
            os.write(fd, f"{os.getpid()} {socket.gethostname()} {now}\n".encode())

    def release(self) -> None:
        if self.fd is None:
            return
        with contextlib.suppress(OSError):
            os.unlink(self.path)  # while still holding it: no one can take a stale file
        os.close(self.fd)
        self.fd = None


def _read_holder(fd: int) -> str:
    """`` (pid 123 on host, since ...)`` from a lock file, or an empty string."""
    try:
        text = os.pread(fd, 200, 0).decode("utf-8", "replace").split()
    except OSError:
        return ""
    if len(text) >= 3 and text[0].isdigit():
        return f" (pid {text[0]} on {text[1][:64]}, since {text[2][:32]})"
    return ""


class ResultFolder:
    """A study's result folder, written whole (see the module notes).

    Parameters
    ----------
    out_root : path-like
        The output root; created if missing.
    name : str
        The study name: the folder is ``out_root/<name>``.
    carry : sequence of str
        Subfolders of the current results carried into the new folder (hard links).

    Use as a context manager: entering takes the lock and makes the staging folder
    (:attr:`path`); leaving without an exception swaps it in, leaving with one (an error,
    Ctrl-C, SIGTERM) removes it, and both release the lock.

    Raises
    ------
    OutputRefused
        On entering: the folder cannot be created or written, a link or a file is in the
        way, or another process holds the lock.
    OutputError
        On leaving: the swap failed (the earlier results are kept).
    """

    def __init__(self, out_root: str | os.PathLike, name: str, *,
                 carry: Sequence[str] = ()) -> None:
        self.target = study_output_dir(out_root, name)
        self.root = self.target.parent
        self.name = name
        self.carry = tuple(carry)
        for sub in self.carry:
            real_subfolder(self.target, sub)
        self._lock = _Lock(self.root / f".{name}.lock", self.target)
        self._leftover = re.compile(rf"\.{re.escape(name)}\.(staging|previous)-[0-9a-f]{{16}}")
        self._made_root = False
        self.stage: Path | None = None

    @property
    def path(self) -> Path:
        """The staging folder: write every output here."""
        if self.stage is None:
            raise OutputError("the result folder is not open", field=str(self.target))
        return self.stage

    def final(self, path: Path) -> Path:
        """Where a file written under :attr:`path` is once the folder is swapped in."""
        return self.target / Path(path).relative_to(self.path)

    def __enter__(self) -> ResultFolder:
        if not self.root.exists():
            try:
                self.root.mkdir(parents=True)
                self._made_root = True
            except FileExistsError:
                pass
            except OSError as exc:
                raise explain_os_error(exc, self.root, refused=True) from None
        if not self.root.is_dir():
            raise OutputRefused("cannot write: a part of the path is a file, not a folder; "
                                "choose another --out", field=str(self.root))
        self._lock.acquire()
        try:
            self._recover()
            stage = self.root / f".{self.name}.staging-{secrets.token_hex(8)}"
            os.mkdir(stage)
        except OSError as exc:
            self._release()
            raise explain_os_error(exc, self.root, refused=True) from None
        except BaseException:
            self._release()
            raise
        self.stage = stage
        return self

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        if isinstance(exc, OutputError) and self.stage is not None:
            _name_final_paths(exc, self.stage, self.target)
        try:
            if exc_type is None:
                self._commit()
        finally:
            with deferred_signals():
                if self.stage is not None and self.stage.exists():
                    remove_tree(self.stage)
                self.stage = None
                self._release()

    # --- the steps -------------------------------------------------------------------
    def _leftovers(self) -> list[Path]:
        try:
            return sorted(p for p in self.root.iterdir() if self._leftover.fullmatch(p.name))
        except OSError:
            return []

    def _recover(self) -> None:
        """Undo what a run killed outright left beside the folder (we hold the lock)."""
        for p in self._leftovers():
            if ".previous-" in p.name and not os.path.lexists(self.target):
                os.rename(p, self.target)  # killed between the two renames of a swap
            else:
                remove_tree(p)

    def _commit(self) -> None:
        stage = self.path
        try:
            for sub in self.carry:
                _carry(self.target / sub, stage / sub)
            for folder, _, _ in os.walk(stage):  # the files are fsynced as they are written
                _fsync_dir(Path(folder))
        except OSError as exc:
            raise explain_os_error(exc, stage) from None
        previous = None
        with deferred_signals():
            try:
                if os.path.lexists(self.target):
                    previous = self.root / f".{self.name}.previous-{secrets.token_hex(8)}"
                    os.rename(self.target, previous)
                os.rename(stage, self.target)
            except OSError as exc:
                if previous is not None and not os.path.lexists(self.target):
                    with contextlib.suppress(OSError):
                        os.rename(previous, self.target)
                raise explain_os_error(exc, self.target) from None
            self.stage = None
            _fsync_dir(self.root)
        if previous is not None:
            remove_tree(previous)  # if it stays (permissions), the next run removes it

    def _release(self) -> None:
        self._lock.release()
        if self._made_root:
            with contextlib.suppress(OSError):
                self.root.rmdir()  # only if empty: nothing else was written


def _name_final_paths(exc: OutputError, stage: Path, target: Path) -> None:
    """Name the final path, not the staging folder's, in an error raised while writing."""
    old, new = str(stage), str(target)
    exc.args = tuple(a.replace(old, new) if isinstance(a, str) else a for a in exc.args)
    if exc.field:
        exc.field = exc.field.replace(old, new)


def _carry(source: Path, dest: Path) -> None:
    """Hard-link every regular file under ``source`` into ``dest`` (copy where the file
    system has no hard links); links and other special files are left out."""
    if not source.is_dir() or source.is_symlink():
        return
    dest.mkdir(exist_ok=True)
    with os.scandir(source) as entries:
        for entry in entries:
            if entry.is_symlink():
                continue
            if entry.is_dir():
                _carry(Path(entry.path), dest / entry.name)
            elif entry.is_file():
                try:
                    os.link(entry.path, dest / entry.name)
                except OSError as exc:
                    if exc.errno not in (errno.EPERM, errno.EXDEV, errno.EMLINK,
                                         errno.EOPNOTSUPP):
                        raise
                    shutil.copy2(entry.path, dest / entry.name)


def _fsync_dir(folder: Path) -> None:
    with contextlib.suppress(OSError):  # not every file system lets a folder be fsynced
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
