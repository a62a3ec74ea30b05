"""Run an ensemble through dask.distributed: batches, resume, lost workers, capped systems.

The driver (this module, in the user's process) plans what is missing in the run folder, submits
batches of system indices to Dask, writes each finished batch at once as an atomic part file
(:mod:`scatter_pop.store.run_folder`), and gathers ``ensemble.nc`` at the end.  Each system's result depends
only on the spec and its index (its own seed), so batching, worker count, worker deaths and
interruptions change nothing in the physics variables.

Fault handling
--------------
* A worker that dies mid-task (SIGKILL, node lost) makes the scheduler rerun the task elsewhere;
  the task is charged one death (``distributed.scheduler.allowed-failures`` bounds them).
* A batch that exhausts its deaths is split into single systems; a single system that exhausts
  its deaths is recorded with end reason ``failed``: initial conditions filled in from
  :func:`~scatter_pop.engine.initial_conditions.draw_system`, final values missing, ``attempts`` = deaths.
* A system whose integration raises is likewise isolated and recorded as failed; its traceback
  goes to ``DIR/failures.log``.  ``retry_failed=True`` computes failed systems again.
* A system stopped by the wall-clock cap (end reason ``stopped_by_wall_clock_cap``) leaves a REBOUND
  checkpoint in ``DIR/checkpoints/``; it is continued from there by ``extend=True`` (another
  ``wall_seconds_max`` on top of the time it has used) or by a rerun whose
  ``integration.wall_seconds_max`` exceeds the time it has used (see :mod:`scatter_pop.ensemble.plan`).
* A system stopped at the end time keeps its final state in ``DIR/checkpoints/`` (a few KB); a
  rerun with a raised ``integration.end_time`` / ``end_orbits`` carries it further from there, bit
  for bit as if the later end time had been asked from the start; settled systems are not touched.

Test-only fault injection: a worker task that is about to integrate a system whose index is listed
in the environment variable ``SCATTER_POP_TEST_KILL_SYSTEMS`` (comma-separated) sends SIGKILL to
its own process.  Nothing else reads it; never set it outside tests.
"""

from __future__ import annotations

import dataclasses
import importlib.util
import os
import socket
import time
import traceback
import uuid
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path

import xarray as xr

from scatter_pop.engine.outcome import EndReason, SystemRecord
from scatter_pop.ensemble.plan import Plan, Task, make_plan
from scatter_pop.ensemble.progress import Progress
from scatter_pop.ensemble.worker import deaths_on_scheduler, failed_record, integrate_batch
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import EnsembleSpec, load_spec, parse_spec
from scatter_pop.store.run_folder import atomic_write_text, open_ensemble, prepare_folder
from scatter_pop.store.schema import records_to_dataset

__all__ = ["run_ensemble", "EnsembleRun", "default_out"]

WORKER_POLL_SECONDS = 5.0  # how often the driver re-reads the number of workers
FINISHED_POLL_SECONDS = 0.05  # how often the driver looks for finished tasks (and stop signals)


def default_out(spec: EnsembleSpec) -> Path:
    """Default run folder: ``<folder of the spec file>/<run name>_out`` (``./`` without a file)."""
    safe = "".join(c if c.isalnum() or c in "._-" else "_" for c in spec.run.name)
    base = Path(spec.source).parent if spec.source and Path(spec.source).is_file() else Path(".")
    return base / f"{safe}_out"


# --------------------------------------------------------------------------- driver
@dataclass
class Timings:
    """Where the driver's wall-clock time went (s); filled by :meth:`EnsembleRun.run`."""

    connect: float = 0.0  # starting or attaching to the cluster
    compute: float = 0.0  # first submission to last part written
    gather: float = 0.0  # writing ensemble.nc
    workers: int = 0  # workers seen when the computation started
    systems_computed: int = 0
    integration_seconds: float = 0.0  # sum of wall_seconds of the systems computed
    events: list = field(default_factory=list)


class EnsembleRun:
    """One invocation of the driver on a run folder (what ``scatter-pop run`` does).

    Parameters
    ----------
    spec : EnsembleSpec
    out : path
        Run folder.
    client : distributed.Client, optional
        Use this client; otherwise one is started with :func:`scatter_pop.ensemble.cluster.connect`.
    workers, scheduler, cluster : optional
        Passed to :func:`scatter_pop.ensemble.cluster.connect` (number of local workers, address of a
        running scheduler, ClusterConfig overriding the spec's ``[cluster]`` table).
    fresh, extend, retry_failed : bool
        Move an old run aside; continue capped systems; compute failed systems again.
    batch_size : int, optional
        Systems per task (overrides ``run.batch_size``; 0 = automatic).
    progress_interval : float
        Seconds between progress lines.
    log : callable
        Receives each message line (default ``print``).
    """

    def __init__(
        self,
        spec: EnsembleSpec,
        out,
        *,
        client=None,
        workers=None,
        scheduler=None,
        cluster=None,
        fresh=False,
        extend=False,
        retry_failed=False,
        batch_size=None,
        progress_interval=10.0,
        log=print,
    ):
        if parse_spec(spec.text, spec.source or "<spec>") != spec:
            raise InputError(
                "spec: the EnsembleSpec differs from its own TOML text (spec.text), which "
                "is what the run folder keeps; make specs with load_spec or parse_spec"
            )
        self.spec, self.client, self.log = spec, client, log
        self.workers, self.scheduler, self.cluster = workers, scheduler, cluster
        self.fresh, self.extend, self.retry_failed = fresh, extend, retry_failed
        self.batch_size = spec.run.batch_size if batch_size is None else batch_size
        if self.batch_size < 0:
            raise InputError(f"batch_size = {self.batch_size}: must be >= 0 (0: automatic)", arguments=("batch_size",))
        self.out, self.progress_interval = Path(out), progress_interval
        self.timings = Timings()

    def plan(self, log=None) -> Plan:
        """What :meth:`run` would do, changing nothing on disk (a dry run)."""
        log = self.log if log is None else log
        folder = prepare_folder(self.spec, self.out, fresh=self.fresh, dry_run=True, log=log)
        if self.fresh and folder.is_run_folder():  # would have been moved aside
            return Plan(self.spec, folder, [], self.batch_size, self.extend, self.retry_failed)
        return make_plan(
            self.spec,
            folder,
            extend=self.extend,
            retry_failed=self.retry_failed,
            batch_size=self.batch_size,
            read_only=True,
            log=log,
        )

    def cluster_config(self):
        """The cluster the run would use (the ``cluster`` argument, else the spec's)."""
        return self.cluster if self.cluster is not None else self.spec.cluster

    def longest_task_seconds(self, plan: Plan) -> float:
        """Longest expected task of ``plan``: its widest batch at the wall-clock cap per system, s."""
        widest = max([plan.batch_size, 1] + [len(t.indices) for t in plan.redo])
        return self.spec.integration.wall_seconds_max * widest

    def check_cluster(self, plan: Plan | None = None) -> None:
        """Refuse now, before any folder is made, a walltime :func:`connect` would refuse later."""
        from scatter_pop.spec.cluster_table import BATCH, check_walltime

        config = self.cluster_config()
        if self.client is None and self.scheduler is None and config.kind in BATCH:
            plan = plan if plan is not None else self.plan(log=lambda *_: None)
            check_walltime(config.walltime, self.longest_task_seconds(plan))

    def run(self) -> xr.Dataset:
        """Compute what the folder lacks, gather ensemble.nc and return it (loaded)."""
        from scatter_pop.ensemble.stop_signals import check_terminated, deferred_stop

        # A stop signal (SIGTERM inside connect(); SIGINT too under stop_signals.stop_signals, as in
        # `scatter-pop run`) is acted upon only between whole steps, never while a part file, a
        # merged part or ensemble.nc is being written
        self.check_cluster()
        with deferred_stop():
            folder = prepare_folder(self.spec, self.out, fresh=self.fresh, log=self.log)
            with folder.lock():
                folder.remove_stale_tmp()
                atomic_write_text(self.spec.text, folder.spec_path)
                plan = make_plan(
                    self.spec,
                    folder,
                    extend=self.extend,
                    retry_failed=self.retry_failed,
                    batch_size=self.batch_size,
                    log=self.log,
                )
                check_terminated()
                if plan.has_work():
                    folder.checkpoints_dir.mkdir(exist_ok=True)
                    self._compute(plan)
                else:
                    self.log(f"nothing to compute: {plan.summary()}")
                if plan.has_work() or not folder.ensemble_is_current(self.spec):
                    t0 = time.monotonic()
                    folder.gather(plan.parts_list(), self.spec)
                    self.timings.gather = time.monotonic() - t0
                    self.log(f"wrote {folder.ensemble_path}")
                folder.write_state(finished=time.strftime("%Y-%m-%dT%H:%M:%S%z"))
            return open_ensemble(folder.path)

    # ---- computing
    def _compute(self, plan: Plan) -> None:
        if self.client is not None:
            self._drive(self.client, plan)
            return
        from scatter_pop.ensemble.cluster import connect
        from scatter_pop.ensemble.stop_signals import deferred_stop

        config = self.cluster_config()
        longest = self.longest_task_seconds(plan)
        t0 = time.monotonic()
        # a stop signal is acted upon only between whole steps of the driver (see _finished), never
        # in the middle of writing a part file
        with (
            connect(config, workers=self.workers, scheduler=self.scheduler, longest_task_seconds=longest) as client,
            deferred_stop(),
        ):
            self.timings.connect = time.monotonic() - t0
            self._drive(client, plan)

    def _drive(self, client, plan: Plan) -> None:
        spec, folder, log = self.spec, plan.folder, self.log
        services = client.scheduler_info().get("services", {})
        if "dashboard" not in services:
            log("dashboard: not served by this scheduler")
        else:
            hint = "" if importlib.util.find_spec("bokeh") else " (its pages need bokeh: pip install bokeh)"
            log(f"dashboard: {client.dashboard_link}{hint}")
        nworkers = len(client.nthreads())
        self.timings.workers = nworkers
        folder.write_state(
            pid=os.getpid(),
            host=socket.gethostname(),
            workers=nworkers,
            scheduler=client.scheduler.address,
            finished=None,
            started=time.strftime("%Y-%m-%dT%H:%M:%S%z"),
        )
        log(plan.summary())
        progress = Progress(spec.run.systems, plan.tally, self.progress_interval, emit=log)
        pending: deque[Task] = deque()
        inflight = {}
        from distributed import as_completed

        done_iter = as_completed()
        last_poll = time.monotonic()
        token = uuid.uuid4().hex[:8]
        t_start = time.monotonic()

        def refill():
            nonlocal nworkers, last_poll
            if time.monotonic() - last_poll > WORKER_POLL_SECONDS:
                nworkers, last_poll = len(client.nthreads()), time.monotonic()
            while len(inflight) < max(2, 2 * nworkers):
                task = pending.popleft() if pending else plan.next_task(max(nworkers, 1))
                if task is None:
                    return
                key = f"integrate-{task.indices[0]}-{task.indices[-1]}-{token}-{uuid.uuid4().hex[:6]}"
                fut = client.submit(
                    integrate_batch, spec, task.indices, str(folder.path), task.budgets, key=key, pure=False
                )
                inflight[fut] = task
                done_iter.add(fut)

        refill()
        for fut in _finished(done_iter):
            if fut.status in ("lost", "pending"):
                # its result was on a worker that died before we fetched it: the scheduler
                # computes it again; wait for it again
                done_iter.add(fut)
                continue
            task = inflight.pop(fut)
            if fut.status == "finished":
                result = fut.result()
                deaths = self._deaths(client, fut)
                records = [dataclasses.replace(r, attempts=r.attempts + deaths) for r in result]
                self._store(plan, task, records)
            elif fut.status == "error":
                self._failure(plan, task, fut, self._deaths(client, fut), pending)
            else:
                raise RuntimeError(
                    f"task for systems {task.indices[0]}-{task.indices[-1]} was "
                    f"{fut.status} (lost the scheduler?); rerun to resume"
                )
            fut.release()
            del fut
            progress.update()
            refill()
        self.timings.compute = time.monotonic() - t_start
        progress.update(force=True)

    def _deaths(self, client, fut) -> int:
        try:
            return int(client.run_on_scheduler(deaths_on_scheduler, fut.key))
        except (OSError, KeyError, AttributeError, ValueError) as exc:
            self.timings.events.append(f"deaths of {fut.key} unknown: {exc}")
            return 0

    def _failure(self, plan: Plan, task: Task, fut, deaths: int, pending: deque) -> None:
        from distributed import KilledWorker

        exc = fut.exception()
        killed = isinstance(exc, KilledWorker)
        span = f"{task.indices[0]}-{task.indices[-1]}" if len(task.indices) > 1 else f"{task.indices[0]}"
        why = (
            f"workers died {deaths} times running it"
            if killed
            else f"{type(exc).__name__}: {(str(exc).splitlines() or [''])[0]}"
        )
        if len(task.indices) > 1:
            self.log(f"systems {span}: {why}; retrying each system alone")
            pending.extendleft(reversed(task.split()))
            return
        index = task.indices[0]
        if not killed:
            tb = "".join(traceback.format_exception(type(exc), exc, fut.traceback()))
            with open(plan.folder.failure_log, "a", encoding="utf-8") as fh:
                fh.write(f"--- system {index} ({time.strftime('%Y-%m-%dT%H:%M:%S%z')})\n{tb}\n")
        self.log(
            f"system {index}: {why}; recorded as failed"
            + ("" if killed else f" (traceback in {plan.folder.failure_log.name})")
        )
        self._store(plan, task, [failed_record(self.spec, index, max(deaths, 1))])

    def _store(self, plan: Plan, task: Task, records: list[SystemRecord]) -> None:
        data = records_to_dataset(records, self.spec.planets.count)
        plan.store(task, data)
        self.timings.systems_computed += len(records)
        self.timings.integration_seconds += float(data["wall_seconds"].sum())
        for r in records:  # kept: capped and failed (continued, retried) and stopped at the end time
            if r.end_reason not in (EndReason.CAPPED, EndReason.FAILED, EndReason.END_TIME):
                plan.folder.checkpoint_path(r.index).unlink(missing_ok=True)


def _finished(done_iter):
    """The futures of ``done_iter`` (``distributed.as_completed``) as they finish.

    Waits by polling rather than blocking in ``as_completed``, so that a stop signal (SIGTERM
    received by :func:`scatter_pop.ensemble.cluster.connect`, SIGINT too under
    :func:`scatter_pop.ensemble.stop_signals.stop_signals`), deferred while the driver writes parts, is raised
    here, between two results, within ``FINISHED_POLL_SECONDS``.
    """
    from scatter_pop.ensemble.stop_signals import check_terminated

    while True:
        check_terminated()
        if done_iter.has_ready():
            yield next(done_iter)
        elif done_iter.is_empty():
            return
        else:
            time.sleep(FINISHED_POLL_SECONDS)


def run_ensemble(spec_or_path, out=None, client=None, **options) -> xr.Dataset:
    """Integrate an ensemble (or finish an interrupted one) and return its dataset.

    Parameters
    ----------
    spec_or_path : EnsembleSpec or path
        The spec, or a TOML file holding it.
    out : path, optional
        Run folder; default :func:`default_out` (``<spec folder>/<run name>_out``).
    client : distributed.Client, optional
        An existing client; by default a local cluster is started (``scatter_pop.ensemble.cluster``).
    **options
        Keyword arguments of :class:`EnsembleRun` (workers, scheduler, cluster, fresh, extend,
        retry_failed, batch_size, progress_interval, log).

    Returns
    -------
    xarray.Dataset
        The gathered ensemble (schema: :mod:`scatter_pop.store.schema`), loaded in memory.
    """
    spec = spec_or_path if isinstance(spec_or_path, EnsembleSpec) else load_spec(spec_or_path)
    return EnsembleRun(spec, default_out(spec) if out is None else out, client=client, **options).run()
