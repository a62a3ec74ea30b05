"""PBS / Torque worker jobs (``dask_jobqueue.PBSCluster``, submitted with ``qsub``)."""

from __future__ import annotations

from scatter_pop.ensemble.cluster_kinds.jobqueue import JobQueueKind
from scatter_pop.spec.cluster_table import walltime_seconds

__all__ = ["KIND"]


class Pbs(JobQueueKind):
    name = "pbs"
    submit_command = "qsub"

    def job_class(self):
        from dask_jobqueue.pbs import PBSJob

        return PBSJob

    def cluster_class(self):
        from dask_jobqueue import PBSCluster

        return PBSCluster

    def walltime_text(self, config) -> str:
        wall = walltime_seconds(config.walltime)  # PBS takes hours beyond 24, not days
        return f"{wall // 3600:02d}:{wall % 3600 // 60:02d}:{wall % 60:02d}"

    def extra_kwargs(self, config) -> dict:
        return {"resource_spec": config.resource_spec}


KIND = Pbs()
