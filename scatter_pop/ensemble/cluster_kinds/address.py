"""A Dask scheduler that is already running (its address, or its scheduler file)."""

from __future__ import annotations

import warnings
from pathlib import Path

from scatter_pop.ensemble.cluster_kinds.base import ClusterKind
from scatter_pop.errors import InputError
from scatter_pop.spec.keys import toml_repr

__all__ = ["KIND"]


class Address(ClusterKind):
    name = "address"

    def start(self, config):
        from distributed import Client

        address = config.address
        try:
            if address.endswith(".json"):
                if not Path(address).is_file():
                    raise InputError(f"cluster.address = {toml_repr(address)}: no such scheduler file")
                client = Client(scheduler_file=address)
            else:
                client = Client(address)
        except OSError as exc:
            raise InputError(
                f"cluster.address = {toml_repr(address)}: no Dask scheduler answered ({type(exc).__name__})"
            ) from None
        _warn_scheduler_settings(client)
        return None, client


def _warn_scheduler_settings(client) -> None:
    from scatter_pop.ensemble.cluster import ALLOWED_FAILURES

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
            stacklevel=5,
        )


KIND = Address()
