"""Stage 4 — the ensemble on Dask: many systems, on a laptop or an HPC allocation, resumable.

``driver`` (:func:`run_ensemble`: plan, submit, gather, resume), ``worker`` (the task a Dask worker
runs: a batch of systems), ``plan`` (what is missing, batches), ``progress`` (tallies and progress
lines), ``cluster`` (starting or attaching a Dask cluster through its kind, one module each under
``cluster_kinds/``: local, SLURM, PBS, an address),
``stop_signals`` (SIGTERM / Ctrl-C taken at safe points), ``bench`` (integrator back ends side by side).
"""

from scatter_pop.ensemble.driver import EnsembleRun, run_ensemble

__all__ = ["run_ensemble", "EnsembleRun"]
