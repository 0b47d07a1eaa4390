"""Dask clusters for tiles and divide segments: a local one by default, or an existing one by address."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

from divides.errors import ParameterError

__all__ = ["cluster_client", "DEFAULT_LOCAL_WORKERS"]

#: Workers of the default LocalCluster (this machine's two cores).
DEFAULT_LOCAL_WORKERS = 2

# Seconds to wait for an existing scheduler before giving up with one line.
_CONNECT_TIMEOUT_S = 10


@contextlib.contextmanager
def cluster_client(scheduler: str | None = None, *, workers: int | None = None,
                   processes: bool = True) -> Iterator:
    """A ``dask.distributed.Client``: to ``scheduler`` if given, else to a new ``LocalCluster``.

    Parameters
    ----------
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``).
    workers : int, optional
        Workers of the local cluster (default :data:`DEFAULT_LOCAL_WORKERS`); ignored with ``scheduler``.
    processes : bool
        Local workers as processes (True) or threads in this process.

    Raises
    ------
    ParameterError
        The scheduler cannot be reached (one line naming the address).
    """
    import logging

    from distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            client = Client(scheduler, timeout=_CONNECT_TIMEOUT_S)
        except (OSError, TimeoutError, ValueError) as exc:
            raise ParameterError(
                f"--scheduler {scheduler!r}: no Dask scheduler answers there ({type(exc).__name__}); "
                "give the address a scheduler prints, e.g. tcp://10.0.0.5:8786"
            ) from None
        with client:
            yield client
        return
    n = workers or DEFAULT_LOCAL_WORKERS
    # dashboard on a free port: 8787 may belong to another cluster on this machine
    with LocalCluster(n_workers=n, threads_per_worker=1, processes=processes, dashboard_address=":0",
                      silence_logs=logging.ERROR) as cluster, Client(cluster) as client:
        yield client
