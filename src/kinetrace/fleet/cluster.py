"""Where a backfill runs: an embedded ``LocalCluster`` of processes, or an existing Dask scheduler."""

from __future__ import annotations

import logging
import os
from contextlib import contextmanager

#: Environment variable naming the scheduler of an existing cluster (e.g. ``tcp://10.0.0.5:8786``).
SCHEDULER_ENV = "KINETRACE_DASK_SCHEDULER"
#: Memory limit of each local worker process; a worker above it is restarted by its nanny and its
#: task retried. [Dask size string]
DEFAULT_MEMORY_LIMIT = "2GiB"


def scheduler_address(cfg=None, *, address: str | None = None, environ=None) -> str | None:
    """The scheduler to connect to, or None for an embedded local cluster.

    Taken, in this order, from ``address`` (the command line), the environment variable
    :data:`SCHEDULER_ENV`, the environment variable named by ``fleet.scheduler_env`` of the config,
    and ``fleet.scheduler`` of the config.

    >>> from types import SimpleNamespace as NS
    >>> cfg = NS(fleet=NS(scheduler="tcp://10.1.2.3:8786", scheduler_env=None))
    >>> scheduler_address(cfg, environ={})
    'tcp://10.1.2.3:8786'
    >>> scheduler_address(cfg, environ={"KINETRACE_DASK_SCHEDULER": "tcp://h:1"})
    'tcp://h:1'
    >>> scheduler_address(None, environ={}) is None
    True
    """
    environ = os.environ if environ is None else environ
    if address:
        return address
    if environ.get(SCHEDULER_ENV):
        return environ[SCHEDULER_ENV]
    fleet = getattr(cfg, "fleet", None)
    if fleet is not None:
        if fleet.scheduler_env and environ.get(fleet.scheduler_env):
            return environ[fleet.scheduler_env]
        if fleet.scheduler:
            return fleet.scheduler
    return None


def quiet_distributed(level: int = logging.WARNING) -> None:
    """Raise Dask distributed's loggers of this process to ``level``: their INFO lines (workers
    registered, connections opened) would bury the progress lines; warnings and errors stay."""
    import distributed  # noqa: F401 - its loggers exist once it is imported

    for name in list(logging.root.manager.loggerDict):
        if name == "distributed" or name.startswith("distributed."):
            logging.getLogger(name).setLevel(level)


@contextmanager
def open_client(address: str | None = None, *, workers: int = 2, memory_limit: str = DEFAULT_MEMORY_LIMIT,
                quiet: bool = False):
    """A ``dask.distributed.Client``: to ``address``, or to a new local cluster of worker processes.

    Parameters
    ----------
    address : str, optional
        Scheduler address of an existing cluster; None starts a ``LocalCluster`` of ``workers``
        processes with one thread each (the pipeline holds the GIL in pandas; processes scale).
    workers : int
        Local worker processes. [-]
    memory_limit : str
        Memory limit per local worker. [Dask size string, e.g. "2GiB"]
    quiet : bool
        Keep distributed's INFO lines out of the log (:func:`quiet_distributed`).

    Yields
    ------
    distributed.Client
    """
    from distributed import Client, LocalCluster

    if quiet:
        quiet_distributed()
    if address:
        with Client(address, timeout="30s") as client:
            yield client
        return
    nanny_log = logging.getLogger("distributed.nanny")
    level = nanny_log.level
    try:
        with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, memory_limit=memory_limit,
                          dashboard_address=":0") as cluster, Client(cluster) as client:
            try:
                yield client
            finally:
                # on close, a worker slow to exit is killed by its nanny: expected, not worth a warning
                nanny_log.setLevel(logging.ERROR)
    finally:
        nanny_log.setLevel(level)
