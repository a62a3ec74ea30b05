"""What the batch-system kinds share: worker jobs through dask-jobqueue (:class:`JobQueueKind`).

dask-jobqueue writes and submits the job scripts; this module only builds its arguments from the
checked ``[cluster]`` table and adds what a long run on an allocation needs: one single-threaded
worker process per core with its nanny, a worker lifetime derived from the walltime (workers retire
before the batch system kills them), a fixed number of jobs kept by ``adapt`` (a lost job is
replaced), and a refused submission raised at once as an :class:`~scatter_pop.errors.InputError`.
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

from scatter_pop.ensemble.cluster_kinds.base import ClusterKind
from scatter_pop.ensemble.stop_signals import check_terminated
from scatter_pop.errors import InputError
from scatter_pop.spec.cluster_table import walltime_seconds, worker_lifetime

__all__ = ["JobQueueKind", "JOB_NAME"]

JOB_NAME = "scatter-pop"  # name of the worker jobs in squeue / qstat
SUBMIT_WAIT_SECONDS = 60.0
_PLACEHOLDER_ADDRESS = "tcp://<insert-scheduler-address-here>:8786"  # dask-jobqueue's own
_SUBMIT_ERRORS: dict[str, list[str]] = {}  # scheduler address -> refused submissions


def source_root() -> str | None:
    """The folder holding the scatter_pop package if it is a source checkout, else None."""
    root = Path(__file__).resolve().parents[3]
    return None if root.name in ("site-packages", "dist-packages") else str(root)


class JobQueueKind(ClusterKind):
    """A batch system driven by dask-jobqueue; subclasses name its Job and Cluster classes."""

    batch = True

    def job_class(self):
        raise NotImplementedError

    def cluster_class(self):
        raise NotImplementedError

    def walltime_text(self, config) -> str:
        """The walltime as the batch system takes it (the spec's ``[D-]HH:MM:SS`` by default)."""
        return config.walltime

    def extra_kwargs(self, config) -> dict:
        """Job arguments only this batch system takes."""
        return {}

    def job_kwargs(self, config) -> dict:
        lifetime, stagger = worker_lifetime(walltime_seconds(config.walltime))
        prologue = list(config.job_script_prologue)
        if source_root() is not None:  # workers import scatter_pop from the same checkout
            prologue.append(f"export PYTHONPATH={source_root()}${{PYTHONPATH:+:$PYTHONPATH}}")
        return dict(
            queue=config.queue,
            account=config.account,
            cores=config.cores,
            processes=config.cores,
            memory=config.memory,
            walltime=self.walltime_text(config),
            job_name=JOB_NAME,
            nanny=True,
            job_script_prologue=prologue,
            job_extra_directives=list(config.job_extra_directives),
            interface=config.interface,
            log_directory=config.log_directory,
            local_directory=config.local_directory,
            python=config.python or sys.executable,
            worker_extra_args=["--lifetime", f"{lifetime:.0f}s", "--lifetime-stagger", f"{stagger:.0f}s"],
            **self.extra_kwargs(config),
        )

    def job_script(self, config) -> str:
        kwargs = self.job_kwargs(config)
        kwargs.pop("nanny")
        return self.job_class()(_PLACEHOLDER_ADDRESS, name=f"{JOB_NAME}-0", **kwargs).job_script()

    def start(self, config):
        from distributed import Client

        cluster = self.cluster_class()(
            job_cls=_recording(self.job_class()),
            scheduler_options={"dashboard_address": f":{config.dashboard_port}"},
            **self.job_kwargs(config),
        )
        cluster.adapt(minimum_jobs=config.minimum_jobs, maximum_jobs=config.maximum_jobs)
        return cluster, Client(cluster)

    def after_start(self, cluster, client) -> None:
        """Return once a worker job is submitted; raise InputError if the batch system refuses it."""
        deadline = time.monotonic() + SUBMIT_WAIT_SECONDS
        while time.monotonic() < deadline:
            errors = _SUBMIT_ERRORS.get(cluster.scheduler_address)
            if errors:
                raise InputError(
                    f"cluster: {self.submit_command} refused the worker job ({errors[0]}); check "
                    "queue, account, cores, memory and walltime (a dry run prints the job script)"
                )
            if any(getattr(job, "job_id", None) for job in cluster.workers.values()):
                return
            check_terminated()
            time.sleep(0.1)
        warnings.warn(
            f"no worker job submitted by {self.submit_command} within {SUBMIT_WAIT_SECONDS:.0f} s; "
            "continuing to wait for workers",
            RuntimeWarning,
            stacklevel=4,
        )


def forget_submissions(cluster) -> None:
    """Drop the recorded refusals of ``cluster`` (it is closing)."""
    _SUBMIT_ERRORS.pop(cluster.scheduler_address, None)


def _recording(job_cls):
    """``job_cls`` whose refused submissions are recorded, so the run can report them."""

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
