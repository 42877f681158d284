"""The time span of a computation: N equal steps from an epoch, sampled at their starts.

The span is propagated in blocks of samples whose position buffer stays near
:data:`POSITION_BLOCK_BYTES` (:func:`position_block_length`).

One rule lives here: a span is a whole number of steps. A span of ``T = N * step_s`` is
sampled at ``t_i = i * step_s``, ``i = 0 .. N-1``; a duration that is not a whole number of
steps is refused, so that the span analysed is exactly the one asked for. The study file's
validation, the engine and the sizing search's coarse step all apply it through
:func:`count_steps`.
"""

from __future__ import annotations

import math

from covergrid.errors import CovergridError

__all__ = ["POSITION_BLOCK_BYTES", "STEP_COUNT_TOLERANCE", "count_steps", "dividing_steps",
           "position_block_length"]

#: The span must be a whole number of steps to this relative precision [unitless].
STEP_COUNT_TOLERANCE = 1e-6


def dividing_steps(span_s: float, step_s: float) -> str:
    """A few steps near ``step_s`` that divide the span into whole steps, as text [s]."""
    n = span_s / step_s
    options = sorted({span_s / max(1, math.floor(n)), span_s / math.ceil(n)})
    return " or ".join(f"{x:g} s" for x in options)


def count_steps(duration_s: float, step_s: float, *, field: str = "step_s") -> int:
    """Number of samples N of a span: ``duration_s / step_s``, which must be whole.

    Parameters
    ----------
    duration_s : float
        Span [s], > 0.
    step_s : float
        Sample spacing [s], in (0, duration_s].
    field : str
        Dotted name of the step in messages.

    Returns
    -------
    int
        N >= 1.

    Raises
    ------
    CovergridError
        If either is not a positive finite number, the step exceeds the span, or the span
        is not a whole number of steps (the message suggests steps that divide it).
    """
    if not (math.isfinite(step_s) and step_s > 0.0):
        raise CovergridError(f"must be a positive number of seconds; got {step_s!r}", field)
    if not (math.isfinite(duration_s) and duration_s > 0.0):
        raise CovergridError(f"must be a positive span; got {duration_s!r} s", "duration_h")
    if step_s > duration_s:
        raise CovergridError(f"must not exceed the span {duration_s:g} s", field)
    n = duration_s / step_s
    if not n < 2.0**53:  # beyond exact counting (and beyond any run's reach)
        raise CovergridError(f"gives {n:.3g} samples over the span {duration_s:g} s; allowed: "
                             "a step giving fewer than 2**53 samples", field)
    if abs(n - round(n)) > STEP_COUNT_TOLERANCE * n:
        raise CovergridError(
            f"must divide the span {duration_s:g} s into a whole number of steps (it gives "
            f"{n:.4f}); allowed: e.g. {dividing_steps(duration_s, step_s)}", field)
    return int(round(n))


#: Satellite-position buffer per task (n_sat x block x 3 float64) is kept near this size
#: [bytes]; the memory estimate (:mod:`covergrid.pipeline.resources`) counts one per running task.
POSITION_BLOCK_BYTES = 16 * 2**20


def position_block_length(n_sat: int, n_steps: int, with_velocity: bool = False) -> int:
    """Samples per propagated block: the position buffer (and the velocity buffer, when the
    kernel works in continuous time) stays near POSITION_BLOCK_BYTES together."""
    per_sample = (48 if with_velocity else 24) * max(n_sat, 1)
    return max(1, min(n_steps, POSITION_BLOCK_BYTES // per_sample))
