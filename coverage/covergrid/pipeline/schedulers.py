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
                          processes=True) as cluster, Client(cluster) as client:
            yield client
        return
    try:
        client = Client(name, timeout=f"{CONNECT_TIMEOUT_S}s")
    except OSError as exc:  # refused, unreachable or timed out (TimeoutError is an OSError)
        raise ResourceError(
            f"cannot reach the dask scheduler ({exc}); start it "
            "first or check the address (an SSH tunnel or VPN for a remote cluster); got "
            f"{name!r}", field="compute.scheduler") from None
    with client:
        yield client
