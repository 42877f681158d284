"""Exceptions and warnings raised by covergrid, and the exit status each one means.

All input errors are subclasses of :class:`ValueError` so that callers that only know
the standard library still catch them. Each class carries the exit status of the
``covergrid`` command (:attr:`CovergridError.exit_status`): 2 for bad input and for work
refused before it starts, 3 for a failure while running.
"""

from __future__ import annotations

#: Exit statuses of the ``covergrid`` command (documented in the README and ``--help``).
EXIT_OK = 0
EXIT_REQUIREMENT_NOT_MET = 1
EXIT_BAD_INPUT = 2
EXIT_RUN_FAILED = 3
EXIT_SIGINT = 130  # 128 + SIGINT (2), the shell's convention
EXIT_SIGTERM = 143  # 128 + SIGTERM (15)


class CovergridError(ValueError):
    """Base class for covergrid input errors.

    Parameters
    ----------
    message : str
        What is wrong, the offending value and what is allowed.
    field : str, optional
        Dotted path of the offending field (``constellation.0.walker.planes``).
    """

    #: Exit status of the command when this error ends it.
    exit_status = EXIT_BAD_INPUT

    def __init__(self, message: str, field: str | None = None) -> None:
        self.field = field
        super().__init__(f"{field}: {message}" if field else message)


class ElementError(CovergridError):
    """An orbital element set is invalid (a <= 0, e < 0, NaN, perigee underground ...)."""


class StudyError(CovergridError):
    """A study file is invalid; carries the dotted path of the field."""


class ResourceError(CovergridError):
    """A study would exceed the memory or work allowed (refused before it starts)."""


class OutputError(CovergridError):
    """An output cannot be written while running (disk full, unwritable, I/O error)."""

    exit_status = EXIT_RUN_FAILED


class OutputRefused(OutputError):
    """The output folder is refused before any work: not writable, a file or a symbolic
    link in the way, or another run is writing the same results."""

    exit_status = EXIT_BAD_INPUT


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived: raised by the command's handler so that cleanup runs as for Ctrl-C."""


class CovergridWarning(UserWarning):
    """Warnings of our own; the test suite turns them into errors."""
