"""Where the work runs: the dask scheduler of a run, started and stopped around it.

:func:`open_scheduler` gives what :func:`covergrid.compute.engine.compute_coverage` and the
trade runner take: the name of a local dask scheduler (``threads``, ``synchronous``,
``processes``), or a ``dask.distributed`` Client of a LocalCluster started on 127.0.0.1
for the run (``local-cluster``) or of an existing scheduler (``tcp://host:port``,
``tls://host:port``). ``distributed`` is imported only for the last two.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import TYPE_CHECKING, Any

from covergrid.errors import ResourceError

if TYPE_CHECKING:
    from covergrid.study.build import ComputeOptions

__all__ = ["CONNECT_TIMEOUT_S", "LOCAL_SCHEDULERS", "open_scheduler"]

#: Schedulers that need no dask.distributed.
LOCAL_SCHEDULERS = ("threads", "synchronous", "processes")
#: How long to wait for an existing dask scheduler to answer [s].
CONNECT_TIMEOUT_S = 30


@contextlib.contextmanager
def open_scheduler(compute: ComputeOptions, override: str | None = None) -> Iterator[Any]:
    """The scheduler argument for the engine; starts and stops a LocalCluster if asked.

    Parameters
    ----------
    compute : ComputeOptions
        The study's ``compute`` options (scheduler name, local-cluster size).
    override : str, optional
        A scheduler name or address used instead of ``compute.scheduler``.

    Yields
    ------
    str or distributed.Client

    Raises
    ------
    ResourceError
        If an existing scheduler cannot be reached (naming ``compute.scheduler``).
    """
    name = override or compute.scheduler
    if name in LOCAL_SCHEDULERS:
        yield name
        return
    from distributed import Client, LocalCluster

    if name == "local-cluster":
        with LocalCluster(n_workers=compute.workers, threads_per_worker=compute.threads_per_worker,
                          host="127.0.0.1", dashboard_address=None,
                          processes=True) as cluster, Client(cluster) as client, \
                _quiet_when_interrupted(client):
            yield client
        return
    try:
        client = Client(name, timeout=f"{CONNECT_TIMEOUT_S}s")
    except OSError as exc:  # refused, unreachable or timed out (TimeoutError is an OSError)
        raise ResourceError(
            f"cannot reach the dask scheduler ({exc}); start it "
            "first or check the address (an SSH tunnel or VPN for a remote cluster); got "
            f"{name!r}", field="compute.scheduler") from None
    with client, _quiet_when_interrupted(None):
        yield client


def _silence_logs() -> None:
    import logging

    for name in ("asyncio", "distributed", "tornado"):
        logging.getLogger(name).setLevel(logging.CRITICAL)


async def _silence_worker_logs() -> None:
    """_silence_logs in a worker (a coroutine: the client runs it without waiting)."""
    _silence_logs()


@contextlib.contextmanager
def _quiet_when_interrupted(own_cluster: Any) -> Iterator[None]:
    """On Ctrl-C or SIGTERM, silence the shutdown chatter of the client and of the workers
    of our own cluster (``own_cluster``: its client; None for an existing cluster).

    Cancelling a distributed computation leaves pending gather tasks whose exceptions the
    asyncio and distributed loggers print as tracebacks while the client closes, and each
    worker warns about every task cancelled; the interruption itself is reported in one
    line by the command, so those loggers are lowered to CRITICAL in the (ending)
    processes.
    """
    try:
        yield
    except KeyboardInterrupt:
        _silence_logs()
        if own_cluster is not None:
            with contextlib.suppress(Exception):
                own_cluster.run(_silence_worker_logs, wait=False)
        raise
