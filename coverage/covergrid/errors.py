"""Exceptions and warnings raised by covergrid.

All input errors are subclasses of :class:`ValueError` so that callers that only know
the standard library still catch them.
"""

from __future__ import annotations


class CovergridError(ValueError):
    """Base class for covergrid input errors.

    Parameters
    ----------
    message : str
        What is wrong, the offending value and what is allowed.
    field : str, optional
        Dotted path of the offending field (``constellation.0.walker.planes``).
    """

    def __init__(self, message: str, field: str | None = None) -> None:
        self.field = field
        super().__init__(f"{field}: {message}" if field else message)


class ElementError(CovergridError):
    """An orbital element set is invalid (a <= 0, e < 0, NaN, perigee underground ...)."""


class StudyError(CovergridError):
    """A study file is invalid; carries the dotted path of the field."""


class ResourceError(CovergridError):
    """A study would exceed the memory or work available."""


class OutputError(CovergridError):
    """An output cannot be written (folder unwritable, disk full, path outside the root)."""


class CovergridWarning(UserWarning):
    """Warnings of our own; the test suite turns them into errors."""
