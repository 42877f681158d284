"""Running many designs: concurrently on the study's scheduler, each row stored as it ends.

:func:`run_designs` reads the rows already in the store, submits the others (one future per
design, :func:`covergrid.trade.evaluate.evaluate_design`) to a :class:`DesignRunner` and
writes each row to the store the moment it finishes, so an interrupted run loses only the
designs still running. A stored row that lacks a column or holds a value of the wrong kind
(a damaged or hand-edited record) is not used: its design is computed again.
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
from collections.abc import Callable, Iterator, Sequence
from typing import TYPE_CHECKING, Any

from covergrid.pipeline.schedulers import open_scheduler
from covergrid.trade.designs import EvalContext, WalkerDesign
from covergrid.trade.evaluate import evaluate_design, row_columns
from covergrid.trade.store import result_key

if TYPE_CHECKING:
    from covergrid.study.build import ComputeOptions

__all__ = ["DesignRunner", "design_runner", "run_designs", "usable_row"]


class _Deferred:
    """A future of the synchronous runner: computed when its result is asked for."""

    def __init__(self, fn: Callable, args: tuple) -> None:
        self._fn, self._args = fn, args

    def result(self) -> Any:
        return self._fn(*self._args)

    def cancel(self) -> bool:
        return True


class DesignRunner:
    """Submit design evaluations and iterate over them as they finish."""

    def __init__(self, kind: str, executor: Any = None, client: Any = None) -> None:
        self.kind, self.executor, self.client = kind, executor, client

    def submit(self, fn: Callable, *args: Any) -> Any:
        if self.kind == "synchronous":
            return _Deferred(fn, args)
        if self.client is not None:
            return self.client.submit(fn, *args, pure=False)
        return self.executor.submit(fn, *args)

    def as_completed(self, futures: Sequence[Any]) -> Iterator[Any]:
        if self.kind == "synchronous":
            return iter(futures)
        if self.client is not None:
            from distributed import as_completed

            return iter(as_completed(list(futures)))
        import concurrent.futures as cf

        return cf.as_completed(futures)

    def cancel(self, futures: Sequence[Any]) -> None:
        for f in futures:
            with contextlib.suppress(Exception):
                f.cancel()


@contextlib.contextmanager
def design_runner(compute: ComputeOptions, scheduler: str | None = None
                  ) -> Iterator[DesignRunner]:
    """Where designs run: the study's ``compute.scheduler`` (or ``scheduler``).

    ``compute`` is the resolved study's :class:`~covergrid.study.build.ComputeOptions`.

    ``threads``: a thread pool of one thread per core (the kernel releases the GIL);
    ``processes``: a process pool (spawned); ``synchronous``: one after the other;
    ``local-cluster`` or an address: futures of a dask.distributed Client (the rows come
    back to this process, which writes the store, so workers need no shared disk).
    """
    name = scheduler or compute.scheduler
    if name == "synchronous":
        yield DesignRunner("synchronous")
        return
    if name in ("threads", "processes"):
        import concurrent.futures as cf

        workers = os.cpu_count() or 1
        if name == "threads":
            pool: Any = cf.ThreadPoolExecutor(max_workers=workers,
                                              thread_name_prefix="covergrid-design")
        else:
            import multiprocessing

            pool = cf.ProcessPoolExecutor(max_workers=workers,
                                          mp_context=multiprocessing.get_context("spawn"))
        try:
            yield DesignRunner(name, executor=pool)
        except BaseException:
            pool.shutdown(wait=False, cancel_futures=True)
            raise
        pool.shutdown(wait=True)
        return
    with open_scheduler(compute, name) as client:
        yield DesignRunner("client", client=client)


def run_designs(designs: Sequence[WalkerDesign], context: EvalContext, store,
                runner: DesignRunner, *,
                progress: bool = False, desc: str = "designs") -> tuple[list[dict], int]:
    """Rows of many designs: stored ones read back, the others computed and stored at once.

    Parameters
    ----------
    designs : sequence of WalkerDesign
        Designs to evaluate (duplicates are evaluated once).
    context : EvalContext
        Evaluation context shared by all.
    store : ResultStore or MemoryStore
        Where finished rows are kept.
    runner : object
        From :func:`design_runner`.
    progress : bool
        Show a progress bar with the ETA (stderr).
    desc : str
        Label of the progress bar.

    Returns
    -------
    tuple
        (rows in the order of ``designs``, each with its ``key``; number computed now).
    """
    keys = [result_key(context.inputs(d)) for d in designs]
    columns = row_columns(context.nfold_max, context.requirement is not None,
                          context.dop is not None)
    rows: dict[str, dict] = {}
    todo: dict[str, WalkerDesign] = {}
    for key, d in zip(keys, designs, strict=True):
        if key in rows or key in todo:
            continue
        row = store.get(key)
        if row is None or not usable_row(row, columns):
            todo[key] = d
        else:
            rows[key] = row
    bar = None
    if progress and todo:
        from tqdm import tqdm

        # at a terminal, lively; into a log file, one line every 30 s at most
        bar = tqdm(total=len(rows) + len(todo), initial=len(rows), desc=desc, unit="design",
                   dynamic_ncols=True, mininterval=0.2 if sys.stderr.isatty() else 30.0)
    futures = {}
    try:
        for key, d in todo.items():
            futures[runner.submit(evaluate_design, d, context)] = key
        for fut in runner.as_completed(list(futures)):
            key = futures.pop(fut)
            row = {"key": key, **fut.result()}
            store.put(key, row, context.inputs(todo[key]))
            rows[key] = row
            if bar is not None:
                bar.update(1)
    except BaseException:
        runner.cancel(list(futures))
        raise
    finally:
        if bar is not None:
            bar.close()
    return [_restore(rows[k]) for k in keys], len(todo)


_TEXT_COLUMNS = frozenset({"key", "pattern", "lost_satellite"})
_COUNT_COLUMNS = frozenset({"total", "planes", "phasing"})


def usable_row(row: dict, columns) -> bool:
    """Whether a stored row holds every column with a value of the right kind (text, a
    whole number, true/false or a number/null); a damaged or foreign record is not, and its
    design is computed again."""
    for c in columns:
        if c == "key":
            continue
        if c not in row:
            return False
        v = row[c]
        if c in _TEXT_COLUMNS:
            ok = isinstance(v, str)
        elif c == "meets":
            ok = isinstance(v, bool)
        elif c in _COUNT_COLUMNS:
            ok = isinstance(v, int) and not isinstance(v, bool)
        else:
            ok = v is None or (isinstance(v, int | float) and not isinstance(v, bool))
        if not ok:
            return False
    return True


def _restore(row: dict) -> dict:
    """A stored row with JSON nulls turned back into NaN (strict JSON has no NaN)."""
    return {k: (math.nan if v is None else v) for k, v in row.items()}
