"""Where an ensemble runs: a local Dask cluster, SLURM or PBS worker jobs, or an existing scheduler.

The spec's optional ``[cluster]`` table (or a separate TOML file whose top level is that table) is
read once into a frozen :class:`ClusterConfig` (:mod:`scatter_pop.spec.cluster_table`).  :func:`connect`
starts the cluster through its kind (:mod:`scatter_pop.ensemble.cluster_kinds`: one module per kind —
local, slurm, pbs, address — behind :class:`~scatter_pop.ensemble.cluster_kinds.base.ClusterKind`) and
yields a :class:`distributed.Client`; leaving the ``with`` block closes the client and cancels every
worker job.  What this module adds for every kind:

* scheduler settings for long independent tasks (:func:`configure_dask`);
* the walltime refused before anything starts when it cannot hold the longest expected batch;
* start-up and clean-up taken whole: SIGTERM to the driver unwinds the ``with`` block at safe points
  only (:mod:`scatter_pop.ensemble.stop_signals`), so worker jobs are cancelled and local workers'
  stderr is silenced first, and the user sees one line.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING

from scatter_pop.ensemble.cluster_kinds import cluster_kind, kind_names
from scatter_pop.ensemble.cluster_kinds.jobqueue import forget_submissions
from scatter_pop.ensemble.stop_signals import deferred_stop, sigterm_unwinds, stop_requested
from scatter_pop.errors import InputError
from scatter_pop.spec.cluster_table import (
    KINDS,
    ClusterConfig,
    WalltimeWarning,
    apply_overrides,
    check_walltime,
    load_cluster_file,
    toml_repr,
)

if TYPE_CHECKING:
    import distributed

__all__ = [
    "ClusterConfig",
    "KINDS",
    "ALLOWED_FAILURES",
    "WalltimeWarning",
    "load_cluster_file",
    "apply_overrides",
    "connect",
    "job_script",
    "configure_dask",
    "check_walltime",
]

ALLOWED_FAILURES = 5  # worker deaths a task may witness before it is declared failed


def configure_dask() -> None:
    """Scheduler settings for long independent tasks (set before a scheduler is created).

    ``worker-saturation`` 1.0 queues no second task on a one-thread worker, so a worker's
    death is charged only to the task it was running; ``allowed-failures`` lets a task survive
    that many worker deaths (lost jobs, retiring workers) before it is declared failed.
    """
    import dask

    dask.config.set(
        {"distributed.scheduler.worker-saturation": 1.0, "distributed.scheduler.allowed-failures": ALLOWED_FAILURES}
    )


def job_script(config: ClusterConfig, *, longest_task_seconds: float | None = None) -> str:
    """The worker job script dask-jobqueue would submit for ``config`` (a batch kind: slurm, pbs).

    Nothing is submitted and no scheduler is started; the scheduler address in the script is
    dask-jobqueue's placeholder (the real one is known only when the run starts).  The walltime is
    checked as the run would check it.
    """
    kind = cluster_kind(config.kind)
    if not kind.batch:
        batch = " or ".join(k for k in kind_names() if cluster_kind(k).batch)
        raise InputError(f"cluster.kind = {toml_repr(config.kind)}: a job script exists only for kind {batch}")
    check_walltime(config.walltime, longest_task_seconds)
    return kind.job_script(config)


def _close(client, cluster, kind) -> None:
    """Close the client, then the cluster (which closes its workers, or cancels its jobs)."""
    try:
        if client is not None:
            if stop_requested():
                kind.on_stop(client)
            client.close()
    finally:
        if cluster is not None:
            forget_submissions(cluster)
            cluster.close()


@contextmanager
def connect(
    config: ClusterConfig,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    longest_task_seconds: float | None = None,
) -> Iterator[distributed.Client]:
    """Start (or attach to) the cluster and yield a Client; on exit close it and cancel worker jobs.

    Parameters
    ----------
    config : ClusterConfig
        The checked ``[cluster]`` table.
    workers : int, optional
        ``--workers N``: local worker processes, or for slurm/pbs ceil(N / cores) jobs.
    scheduler : str, optional
        ``--scheduler ADDRESS``: attach to this scheduler (kind ``"address"``) instead.
    longest_task_seconds : float, optional
        Expected wall time of the longest task (one batch of systems), s; the walltime of
        slurm/pbs jobs is checked against it (refused if too short, warned if tight).

    Yields
    ------
    distributed.Client
        Connected client; ``client.dashboard_link`` is the dashboard address.
    """
    config = apply_overrides(config, workers, scheduler)
    kind = cluster_kind(config.kind)
    if kind.batch:
        check_walltime(config.walltime, longest_task_seconds)
    configure_dask()

    with sigterm_unwinds():
        cluster = client = None
        try:
            with deferred_stop():  # starting up is not interrupted half-way
                cluster, client = kind.start(config)
                kind.after_start(cluster, client)
            yield client
        finally:
            with deferred_stop():  # nor is the clean-up
                _close(client, cluster, kind)
