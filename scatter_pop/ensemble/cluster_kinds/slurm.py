"""SLURM worker jobs (``dask_jobqueue.SLURMCluster``, submitted with ``sbatch``)."""

from __future__ import annotations

from scatter_pop.ensemble.cluster_kinds.jobqueue import JobQueueKind

__all__ = ["KIND"]


class Slurm(JobQueueKind):
    name = "slurm"
    submit_command = "sbatch"

    def job_class(self):
        from dask_jobqueue.slurm import SLURMJob

        return SLURMJob

    def cluster_class(self):
        from dask_jobqueue import SLURMCluster

        return SLURMCluster


KIND = Slurm()
