"""Processes that draw figure jobs: started early, fed from one queue, answers in job order.

A :class:`FigurePool` starts its helper processes when it is made. A run makes it before
computing the coverage, so the helpers import matplotlib and cartopy (about a second of a
core each) and draw the figures that need no coverage (the ground tracks) while this process
computes; the maps are queued as soon as the coverage is known, and this process writes the
data files while the helpers draw them. With no helpers the jobs are drawn in this process
when they are collected.

Helpers are fresh interpreters started with ``python -c`` (:func:`serve_figure_jobs`), fed
pickled jobs over a pipe, not ``multiprocessing``: its ``spawn`` and ``forkserver`` re-import
the caller's ``__main__`` (a user's script calling :func:`covergrid.run` without an
``if __name__ == "__main__"`` guard would run again in every helper), and ``fork`` copies a
process whose dask threads may hold locks.

A job is any object with a ``name`` and a ``run(folder)`` returning the paths it wrote
(:class:`covergrid.pipeline.figures.FigureJob`), defined at module level so it pickles.
"""

from __future__ import annotations

import collections
import contextlib
import os
import pickle
import signal
import struct
import subprocess
import sys
import threading
from collections.abc import Sequence
from pathlib import Path
from typing import Any

__all__ = ["FigurePool", "serve_figure_jobs"]

#: How long a helper may take to end once asked [s] (a figure takes well under a second).
HELPER_EXIT_S = 30.0


def _send(stream, obj: Any) -> None:
    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    stream.write(struct.pack("<Q", len(data)))
    stream.write(data)
    stream.flush()


def _receive(stream) -> Any:
    head = stream.read(8)
    if len(head) < 8:
        raise EOFError("the other end closed the pipe")
    (size,) = struct.unpack("<Q", head)
    return pickle.loads(stream.read(size))


def serve_figure_jobs() -> None:
    """The loop of a helper process: draw each job sent on stdin, answer on stdout.

    Started by :class:`FigurePool` as ``python -c`` (a fresh interpreter that imports nothing
    of the caller's program). It imports the drawing libraries first, before any job
    arrives. Messages are pickles, each preceded by its length; an answer is
    ``("done", paths)`` or ``("error", exception)``. Anything the drawing code prints goes
    to stderr. Ends when stdin closes (at once, with ``os._exit``: nothing is left to
    write), or quietly on an interrupt (the file being written is removed as the drawing
    unwinds).
    """
    try:
        import matplotlib

        matplotlib.use("Agg")
        import covergrid.render  # noqa: F401  (matplotlib, cartopy and the bundled coast)

        answers = os.fdopen(os.dup(1), "wb")
        os.dup2(2, 1)  # stray prints must not corrupt the answers
        jobs = sys.stdin.buffer
        while True:
            try:
                job, folder = _receive(jobs)
            except EOFError:
                # every answer is sent and every file closed: end without the interpreter's
                # teardown of matplotlib, cartopy and numpy (about 0.4 s the caller waits)
                sys.stderr.flush()
                os._exit(0)
            try:
                answer: tuple[str, Any] = ("done", job.run(folder))
            except Exception as exc:  # sent back and raised by the caller
                answer = ("error", exc)
            try:
                _send(answers, answer)
            except (pickle.PicklingError, TypeError, AttributeError):
                _send(answers, ("error", RuntimeError(f"{job.name}: {answer[1]!r}")))
    except KeyboardInterrupt:  # the caller was interrupted
        return


class _Helper:
    """One helper process drawing figure jobs (see :func:`serve_figure_jobs`)."""

    def __init__(self) -> None:
        self.proc = subprocess.Popen(
            [sys.executable, "-c",
             "from covergrid.pipeline.figure_pool import serve_figure_jobs; "
             "serve_figure_jobs()"],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE)

    def run(self, job, folder: Path) -> list[Path]:
        assert self.proc.stdin is not None and self.proc.stdout is not None
        try:
            _send(self.proc.stdin, (job, folder))
            kind, value = _receive(self.proc.stdout)
        except (EOFError, BrokenPipeError):
            code = self.proc.wait()
            raise RuntimeError(f"the process drawing the {job.name} figure ended "
                               f"(exit status {code})") from None
        if kind == "error":
            raise value
        return value

    def close(self, interrupt: bool) -> None:
        """Let the helper end (after an interrupt, stop its drawing first)."""
        if interrupt and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGINT)  # its files are removed as it unwinds
        with contextlib.suppress(OSError):
            assert self.proc.stdin is not None
            self.proc.stdin.close()
        try:
            self.proc.wait(timeout=HELPER_EXIT_S)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        if self.proc.stdout is not None:
            self.proc.stdout.close()


class FigurePool:
    """Helper processes drawing figure jobs from one queue (see the module docstring).

    Use it as a context manager: leaving the block waits for the helpers to end, and on an
    exception (an interrupt) stops their drawing first.

    Parameters
    ----------
    helpers : int
        Helper processes to start now (0: every job is drawn in this process by
        :meth:`collect`).
    prepare : job, optional
        Run by every helper before it takes a job (its files, if any, are not collected):
        :func:`covergrid.render.maps.prepare_drawing`, so a helper's first map costs what
        the others do.
    """

    def __init__(self, helpers: int, prepare=None) -> None:
        self._prepare = prepare
        self._cond = threading.Condition()
        self._queue: collections.deque = collections.deque()
        self._results: dict[int, list[Path]] = {}
        self._submitted: set[int] = set()
        self._errors: list[BaseException] = []
        self._running = 0
        self._closing = False
        self._helpers: list[_Helper] = []
        self._threads: list[threading.Thread] = []
        try:
            for n in range(max(int(helpers), 0)):
                helper = _Helper()
                self._helpers.append(helper)
                thread = threading.Thread(target=self._keep_busy, args=(helper,), daemon=True,
                                          name=f"covergrid-figures-{n}")
                thread.start()
                self._threads.append(thread)
        except BaseException:
            self.close(interrupt=True)
            raise

    @property
    def helpers(self) -> int:
        """Helper processes started."""
        return len(self._helpers)

    def __enter__(self) -> FigurePool:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        self.close(interrupt=exc_type is not None)

    def submit(self, jobs: Sequence, folder: str | os.PathLike) -> None:
        """Queue jobs to draw into ``folder`` (every file is written inside it); a job
        already submitted (the same object) is not queued again."""
        folder = Path(os.fspath(folder)).absolute()
        with self._cond:
            for job in jobs:
                if id(job) not in self._submitted:
                    self._submitted.add(id(job))
                    self._queue.append((job, folder))
            self._cond.notify_all()

    def _take(self, front: bool, wait: bool):
        """The next job (``front``: the oldest), or None when there is none to take."""
        with self._cond:
            while wait and not self._queue and not self._closing:
                self._cond.wait()
            if not self._queue or self._errors or self._closing:
                return None
            self._running += 1
            return self._queue.popleft() if front else self._queue.pop()

    def _done(self, job, paths: list[Path] | None, exc: BaseException | None) -> None:
        with self._cond:
            self._running -= 1
            if exc is not None:
                self._errors.append(exc)
                self._queue.clear()
            else:
                assert paths is not None
                self._results[id(job)] = paths
            self._cond.notify_all()

    def _keep_busy(self, helper: _Helper) -> None:
        """Give one helper jobs from the back of the queue, one at a time, until closed."""
        if self._prepare is not None:
            with self._cond:
                self._running += 1
            try:
                helper.run(self._prepare, Path(os.devnull))
            except BaseException as exc:  # raised by collect in the caller's thread
                self._done(self._prepare, None, exc)
                return
            with self._cond:
                self._running -= 1
                self._cond.notify_all()
        while (item := self._take(front=False, wait=True)) is not None:
            job, folder = item
            try:
                paths = helper.run(job, folder)
            except BaseException as exc:  # raised by collect in the caller's thread
                self._done(job, None, exc)
            else:
                self._done(job, paths, None)

    def collect(self, jobs: Sequence, *, here: bool = False) -> list[Path]:
        """Wait for submitted jobs and return the files they wrote, in the order of ``jobs``.

        With ``here`` (or without helpers) this process also draws queued jobs, from the
        front of the queue, while the helpers take them from the back. If a job fails, no
        new job starts, and the first error is raised once the jobs already running have
        ended.
        """
        here = here or not self._helpers
        wanted = [id(job) for job in jobs]
        while here and (item := self._take(front=True, wait=False)) is not None:
            job, folder = item
            try:
                paths = job.run(folder)
            except Exception as exc:
                self._done(job, None, exc)
            else:
                self._done(job, paths, None)
        with self._cond:
            while not self._errors and not all(w in self._results for w in wanted):
                self._cond.wait()
            while self._running:  # let the jobs already running end before raising
                self._cond.wait()
            if self._errors:
                raise self._errors[0]
            return [p for w in wanted for p in self._results[w]]

    def close(self, interrupt: bool = False) -> None:
        """Let the helpers end (after an interrupt, stop their drawing first)."""
        with self._cond:
            self._closing = True
            self._queue.clear()
            self._cond.notify_all()
        for helper in self._helpers:
            helper.close(interrupt)
        for thread in self._threads:
            thread.join(timeout=HELPER_EXIT_S)
