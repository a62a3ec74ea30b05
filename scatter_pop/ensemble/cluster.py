"""Where an ensemble runs: a local Dask cluster, SLURM or PBS worker jobs, or an existing scheduler.

The spec's optional ``[cluster]`` table (or a separate TOML file whose top level is that table) is
read once into a frozen :class:`ClusterConfig` (:mod:`scatter_pop.spec.cluster_table`).  :func:`connect` starts the cluster, or attaches to
a running scheduler, and yields a :class:`distributed.Client`; leaving the ``with`` block closes
the client and cancels every worker job.  The batch systems are driven by dask-jobqueue
(``SLURMCluster``, ``PBSCluster``): this module only translates the table into their arguments and
adds what a long run on an allocation needs:

* one single-threaded worker process per core, the nanny kept (it restarts killed workers);
* worker lifetime (``--lifetime``/``--lifetime-stagger``) derived from the job walltime so
  that workers retire before the batch system kills them, and a refusal when the walltime cannot
  hold the longest expected batch (a retiring worker interrupts its running task);
* a fixed number of jobs is kept by ``adapt(minimum_jobs=N, maximum_jobs=N)``, so a lost job
  is replaced (``scale`` would not replace it); ``minimum_jobs``/``maximum_jobs`` adapt to load;
* a refused submission (bad partition, account, ...) raises :class:`InputError` at once instead
  of leaving the run waiting for workers that never come;
* SIGTERM to the driver unwinds the ``with`` block, so the worker jobs are cancelled; it is taken
  at safe points only (:mod:`scatter_pop.ensemble.stop_signals`), and after it local workers'
  stderr is silenced so the user sees one line.
"""

from __future__ import annotations

import os
import sys
import time
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

from scatter_pop.ensemble.stop_signals import (
    check_terminated,
    deferred_stop,
    sigterm_unwinds,
    silence_worker_stderr,
    stop_requested,
)
from scatter_pop.errors import InputError
from scatter_pop.spec.cluster_table import (
    BATCH,
    KINDS,
    ClusterConfig,
    WalltimeWarning,
    apply_overrides,
    check_walltime,
    load_cluster_file,
    toml_repr,
    walltime_seconds,
    worker_lifetime,
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
JOB_NAME = "scatter-pop"  # name of the worker jobs in squeue / qstat
SUBMIT_WAIT_SECONDS = 60.0
_PLACEHOLDER_ADDRESS = "tcp://<insert-scheduler-address-here>:8786"  # dask-jobqueue's own


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


def _source_root() -> str | None:
    """The folder holding the scatter_pop package if it is a source checkout, else None."""
    root = Path(__file__).resolve().parents[2]
    return None if root.name in ("site-packages", "dist-packages") else str(root)


def _job_class(kind: str):
    from dask_jobqueue.pbs import PBSJob
    from dask_jobqueue.slurm import SLURMJob

    return SLURMJob if kind == "slurm" else PBSJob


def _job_kwargs(c: ClusterConfig) -> dict:
    wall = walltime_seconds(c.walltime)
    lifetime, stagger = worker_lifetime(wall)
    prologue = list(c.job_script_prologue)
    if _source_root() is not None:  # workers import scatter_pop from the same checkout
        prologue.append(f"export PYTHONPATH={_source_root()}${{PYTHONPATH:+:$PYTHONPATH}}")
    walltime = c.walltime
    if c.kind == "pbs":  # PBS takes hours beyond 24, not days
        walltime = f"{wall // 3600:02d}:{wall % 3600 // 60:02d}:{wall % 60:02d}"
    kwargs = dict(
        queue=c.queue,
        account=c.account,
        cores=c.cores,
        processes=c.cores,
        memory=c.memory,
        walltime=walltime,
        job_name=JOB_NAME,
        nanny=True,
        job_script_prologue=prologue,
        job_extra_directives=list(c.job_extra_directives),
        interface=c.interface,
        log_directory=c.log_directory,
        local_directory=c.local_directory,
        python=c.python or sys.executable,
        worker_extra_args=["--lifetime", f"{lifetime:.0f}s", "--lifetime-stagger", f"{stagger:.0f}s"],
    )
    if c.kind == "pbs":
        kwargs["resource_spec"] = c.resource_spec
    return kwargs


def job_script(config: ClusterConfig, *, longest_task_seconds: float | None = None) -> str:
    """The worker job script dask-jobqueue would submit for ``config`` (kind slurm or pbs).

    Nothing is submitted and no scheduler is started; the scheduler address in the script is
    dask-jobqueue's placeholder (the real one is known only when the run starts).
    """
    if config.kind not in BATCH:
        raise InputError(f"cluster.kind = {toml_repr(config.kind)}: a job script exists only for kind slurm or pbs")
    check_walltime(config.walltime, longest_task_seconds)
    kwargs = _job_kwargs(config)
    kwargs.pop("nanny")
    return _job_class(config.kind)(_PLACEHOLDER_ADDRESS, name=f"{JOB_NAME}-0", **kwargs).job_script()


_SUBMIT_ERRORS: dict[str, list[str]] = {}  # scheduler address -> refused submissions


def _recording(job_cls):
    """``job_cls`` whose refused submissions are recorded, so connect() can report them."""

    class Recorded(job_cls):
        async def start(self):
            try:
                await super().start()
            except RuntimeError as exc:
                from distributed.core import Status

                self.status = Status.failed  # lets the cluster close cleanly afterwards
                text = str(exc).split("stderr:", 1)[-1]
                lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
                _SUBMIT_ERRORS.setdefault(self.scheduler, []).append(" | ".join(lines[:2]))
                raise

    Recorded.__name__ = Recorded.__qualname__ = job_cls.__name__
    return Recorded


def _wait_for_submission(cluster, kind: str) -> None:
    """Return once a worker job is submitted; raise InputError if the batch system refuses it."""
    command = "sbatch" if kind == "slurm" else "qsub"
    deadline = time.monotonic() + SUBMIT_WAIT_SECONDS
    while time.monotonic() < deadline:
        errors = _SUBMIT_ERRORS.get(cluster.scheduler_address)
        if errors:
            raise InputError(
                f"cluster: {command} refused the worker job ({errors[0]}); check "
                "queue, account, cores, memory and walltime (--dry-run prints the "
                "job script)"
            )
        if any(getattr(job, "job_id", None) for job in cluster.workers.values()):
            return
        check_terminated()
        time.sleep(0.1)
    warnings.warn(
        f"no worker job submitted by {command} within {SUBMIT_WAIT_SECONDS:.0f} s; continuing to wait for workers",
        RuntimeWarning,
        stacklevel=3,
    )


def _close(client, cluster, kind: str) -> None:
    """Close the client, then the cluster (which closes its workers, or cancels its jobs)."""
    terminating = stop_requested()
    try:
        if client is not None:
            if terminating and kind == "local":
                try:
                    client.run(silence_worker_stderr, on_error="ignore")
                except (OSError, RuntimeError):  # scheduler already gone: nothing left to quiet
                    pass
            client.close()
    finally:
        if cluster is not None:
            _SUBMIT_ERRORS.pop(cluster.scheduler_address, None)
            cluster.close()


def _start_cluster(c: ClusterConfig):
    if c.kind == "local":
        from distributed import LocalCluster

        n = c.workers or len(os.sched_getaffinity(0))
        extra = {"local_directory": c.local_directory} if c.local_directory else {}
        # preload: the workers run stop_signals.dask_setup at their start (Ctrl-C is the driver's)
        return LocalCluster(
            n_workers=n,
            threads_per_worker=1,
            processes=True,
            preload=["scatter_pop.ensemble.stop_signals"],
            dashboard_address=f":{c.dashboard_port}",
            **extra,
        )
    from dask_jobqueue import PBSCluster, SLURMCluster

    cls = SLURMCluster if c.kind == "slurm" else PBSCluster
    cluster = cls(
        job_cls=_recording(_job_class(c.kind)),
        scheduler_options={"dashboard_address": f":{c.dashboard_port}"},
        **_job_kwargs(c),
    )
    cluster.adapt(minimum_jobs=c.minimum_jobs, maximum_jobs=c.maximum_jobs)
    return cluster


def _client_for_address(address: str):
    from distributed import Client

    try:
        if address.endswith(".json"):
            if not Path(address).is_file():
                raise InputError(f"cluster.address = {toml_repr(address)}: no such scheduler file")
            return Client(scheduler_file=address)
        return Client(address)
    except OSError as exc:
        raise InputError(
            f"cluster.address = {toml_repr(address)}: no Dask scheduler answered ({type(exc).__name__})"
        ) from None


def _warn_scheduler_settings(client) -> None:
    def settings():
        import dask

        return (
            dask.config.get("distributed.scheduler.worker-saturation"),
            dask.config.get("distributed.scheduler.allowed-failures"),
        )

    saturation, failures = client.run_on_scheduler(settings)
    if float(saturation) != 1.0 or int(failures) < ALLOWED_FAILURES:
        warnings.warn(
            f"the scheduler runs with worker-saturation {saturation} and allowed-failures "
            f"{failures}; start it with DASK_DISTRIBUTED__SCHEDULER__WORKER_SATURATION=1.0 "
            f"DASK_DISTRIBUTED__SCHEDULER__ALLOWED_FAILURES={ALLOWED_FAILURES} so a lost "
            "worker costs only its own task",
            RuntimeWarning,
            stacklevel=4,
        )


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
    if config.kind in BATCH:
        check_walltime(config.walltime, longest_task_seconds)
    configure_dask()
    from distributed import Client

    with sigterm_unwinds():
        cluster = client = None
        try:
            with deferred_stop():  # starting up is not interrupted half-way
                if config.kind == "address":
                    client = _client_for_address(config.address)
                    _warn_scheduler_settings(client)
                else:
                    cluster = _start_cluster(config)
                    client = Client(cluster)
                    if config.kind in BATCH:
                        _wait_for_submission(cluster, config.kind)
            yield client
        finally:
            with deferred_stop():  # nor is the clean-up
                _close(client, cluster, config.kind)
