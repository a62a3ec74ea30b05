"""Worker processes on this machine (``distributed.LocalCluster``): the laptop default."""

from __future__ import annotations

import os

from scatter_pop.ensemble.cluster_kinds.base import ClusterKind
from scatter_pop.ensemble.stop_signals import silence_worker_stderr

__all__ = ["KIND"]


class Local(ClusterKind):
    name = "local"

    def start(self, config):
        from distributed import Client, LocalCluster

        n = config.workers or len(os.sched_getaffinity(0))
        extra = {"local_directory": config.local_directory} if config.local_directory else {}
        # preload: the workers run stop_signals.dask_setup at their start (Ctrl-C is the driver's)
        cluster = LocalCluster(
            n_workers=n,
            threads_per_worker=1,
            processes=True,
            preload=["scatter_pop.ensemble.stop_signals"],
            dashboard_address=f":{config.dashboard_port}",
            **extra,
        )
        return cluster, Client(cluster)

    def on_stop(self, client) -> None:
        # the workers share the user's terminal: quiet them before they are closed mid-task
        try:
            client.run(silence_worker_stderr, on_error="ignore")
        except (OSError, RuntimeError):  # scheduler already gone: nothing left to quiet
            pass


KIND = Local()
