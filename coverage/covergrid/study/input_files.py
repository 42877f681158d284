"""Reading the files a study names: bounded, regular files only.

The study file itself, and the files it refers to (a region's GeoJSON, a target list), are
read the same way: opened without blocking and checked before they are read, so a device
(``/dev/zero``), a pipe or a socket is refused instead of read without end, and at most
:data:`MAX_INPUT_FILE_BYTES` are read.
"""

from __future__ import annotations

import os
import stat

__all__ = ["MAX_INPUT_FILE_BYTES", "InputFileError", "read_input_file"]

#: Largest file read [bytes]. A constellation listed one satellite per line takes about 100
#: bytes a satellite, so 100,000 satellites (the most a Walker group may hold) fit in about
#: 10 MB; so do 100,000 targets and a detailed coastline polygon.
MAX_INPUT_FILE_BYTES = 16 * 2**20


class InputFileError(Exception):
    """A file cannot be read as an input; ``reason`` says why (without the path)."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def read_input_file(path: str | os.PathLike, what: str = "a file",
                    max_bytes: int = MAX_INPUT_FILE_BYTES) -> bytes:
    """The bytes of an input file: a regular file of at most ``max_bytes``.

    ``what`` names the file in the messages (``"a study file"``).

    Raises
    ------
    InputFileError
        Missing, a folder, not a regular file, too large or unreadable.
    """
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise InputFileError("no such file") from None
    except IsADirectoryError:
        raise InputFileError(f"is a folder, not {what}") from None
    except OSError as exc:
        raise InputFileError(f"cannot read: {exc.strerror or exc}") from None
    mode = os.fstat(fd).st_mode
    if not stat.S_ISREG(mode):
        os.close(fd)
        if stat.S_ISDIR(mode):
            raise InputFileError(f"is a folder, not {what}")
        raise InputFileError("is not a regular file (a device, pipe or socket); allowed: "
                             f"{what}")
    with os.fdopen(fd, "rb") as fh:
        try:
            raw = fh.read(max_bytes + 1)
        except OSError as exc:
            raise InputFileError(f"cannot read: {exc.strerror or exc}") from None
    if len(raw) > max_bytes:
        raise InputFileError(f"is larger than {max_bytes // 2**20} MiB; allowed: "
                             f"{what.removeprefix('a ')}s of at most {max_bytes // 2**20} MiB")
    return raw
