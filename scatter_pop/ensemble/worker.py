"""The task a Dask worker runs: integrate a batch of systems and return their records.

Runs in the worker process; writes nothing but the checkpoints of capped systems (the driver writes
the part files).  Test-only fault injection: a task about to integrate a system whose index is listed
in the environment variable ``SCATTER_POP_TEST_KILL_SYSTEMS`` (comma-separated) sends SIGKILL to its
own process.  Nothing else reads it; never set it outside tests.
"""

from __future__ import annotations

import math
import os
import signal

from scatter_pop.engine.backends import backend
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, SystemRecord
from scatter_pop.spec.reader import EnsembleSpec
from scatter_pop.store.run_folder import RunFolder

__all__ = ["integrate_batch", "failed_record", "deaths_on_scheduler", "FAULT_ENV"]

FAULT_ENV = "SCATTER_POP_TEST_KILL_SYSTEMS"


def integrate_batch(
    spec: EnsembleSpec, indices: tuple[int, ...], folder: str, budgets: tuple[float, ...] | None = None
) -> list[SystemRecord]:
    """Worker task: integrate systems ``indices`` (together, if the back end does so).

    Parameters
    ----------
    spec : EnsembleSpec
    indices : tuple of int
        System indices of the batch.
    folder : str
        The run folder (must be visible to the worker: checkpoints are read and written there).
    budgets : tuple of float, optional
        Per system, the wall-clock cap to use instead of ``integration.wall_seconds_max``, s
        (time already spent on a continued system counts against it).
    """
    from scatter_pop.engine.integrate import integrate_systems
    from scatter_pop.ensemble.stop_signals import worker_ignores_sigint

    doomed = {int(x) for x in os.environ.get(FAULT_ENV, "").split(",") if x.strip()}
    run = RunFolder(folder)
    together = backend(spec.integration.integrator).integrates_together
    positions = list(range(len(indices)))
    groups = [positions] if together else [[k] for k in positions]
    records = []
    for group in groups:
        if any(indices[k] in doomed for k in group):  # test-only fault injection
            os.kill(os.getpid(), signal.SIGKILL)
        while True:
            try:
                records += integrate_systems(
                    spec,
                    [indices[k] for k in group],
                    checkpoint_paths=[run.checkpoint_path(indices[k]) for k in group],
                    budgets=None if budgets is None else [budgets[k] for k in group],
                )
                break
            except KeyboardInterrupt:
                # REBOUND turns a SIGINT during its integration into KeyboardInterrupt.  A local
                # worker gets the terminal's Ctrl-C together with its driver, which decides whether
                # the run stops (and then closes this worker): integrate the system again, from its
                # start or checkpoint (nothing was written), so it ends as it would have anyway.
                if not worker_ignores_sigint():
                    raise
    return records


def deaths_on_scheduler(key, dask_scheduler=None) -> int:
    """Runs on the scheduler: how many workers died while running task ``key``."""
    ts = dask_scheduler.tasks.get(key)
    return int(ts.suspicious) if ts is not None else 0


def failed_record(spec: EnsembleSpec, index: int, attempts: int) -> SystemRecord:
    """Record of a system with no result: initial conditions drawn again, finals missing (NaN)."""
    from scatter_pop.engine.initial_conditions import draw_system

    ic = draw_system(spec, index)
    nan = math.nan
    planets = tuple(
        PlanetRecord(
            mass_initial=float(m),
            a_initial=float(a),
            e_initial=float(e),
            inc_initial=float(i),
            radius_initial=float(r),
            mass_final=nan,
            a_final=nan,
            e_final=nan,
            inc_final=nan,
            q_final=nan,
            radius_final=nan,
            fate=Fate.SURVIVED,
            t_fate=nan,
        )  # fate: -1 in the dataset
        for m, a, e, i, r in zip(ic.mass, ic.a, ic.e, ic.inc, ic.radius)
    )
    return SystemRecord(
        index=index,
        seed=int(ic.seed),
        planets=planets,
        t_end=nan,
        end_reason=EndReason.FAILED,
        attempts=attempts,
        integrator=spec.integration.integrator,
    )
