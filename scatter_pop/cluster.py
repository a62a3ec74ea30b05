"""Where an ensemble runs: a local Dask cluster, SLURM or PBS worker jobs, or an existing scheduler.

The spec's optional ``[cluster]`` table (or a separate TOML file whose top level is that table) is
read once into a frozen :class:`ClusterConfig` (:mod:`scatter_pop.cluster_config`).  :func:`connect` starts the cluster, or attaches to
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
* SIGTERM to the driver unwinds the ``with`` block, so the worker jobs are cancelled.  Start-up,
  clean-up and any caller's :func:`deferred_stop` block only record it; :func:`check_terminated`
  raises it between whole steps (never inside a lock).  After it, Dask's log lines and tracebacks,
  local workers' included, stay off the user's terminal; a clean-up that takes over
  ``TERM_GRACE_SECONDS`` ends the process.  Under :func:`stop_signals` (the ``scatter-pop run``
  command, the demo) SIGINT (Ctrl-C) does the same, and pressed again ends the process at once;
  elsewhere Ctrl-C stays Python's KeyboardInterrupt.  Local workers ignore SIGINT (the terminal
  sends it to them too; their driver decides).
"""

from __future__ import annotations

import functools
import os
import signal
import sys
import threading
import time
import warnings
from contextlib import AbstractContextManager, contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Iterator

from .cluster_config import (BATCH, KINDS, ClusterConfig, WalltimeWarning, toml_repr, apply_overrides,
                             check_walltime, load_cluster_file, walltime_seconds, worker_lifetime)
from .errors import InputError

if TYPE_CHECKING:
    import distributed

__all__ = ["ClusterConfig", "KINDS", "ALLOWED_FAILURES", "WalltimeWarning", "load_cluster_file",
           "apply_overrides", "connect", "job_script", "configure_dask", "check_walltime",
           "deferred_stop", "check_terminated", "stop_signals", "worker_ignores_sigint"]

ALLOWED_FAILURES = 5       # worker deaths a task may witness before it is declared failed
JOB_NAME = "scatter-pop"   # name of the worker jobs in squeue / qstat
SUBMIT_WAIT_SECONDS = 60.0
_PLACEHOLDER_ADDRESS = "tcp://<insert-scheduler-address-here>:8786"  # dask-jobqueue's own


def configure_dask() -> None:
    """Scheduler settings for long independent tasks (set before a scheduler is created).

    ``worker-saturation`` 1.0 queues no second task on a one-thread worker, so a worker's
    death is charged only to the task it was running; ``allowed-failures`` lets a task survive
    that many worker deaths (lost jobs, retiring workers) before it is declared failed.
    """
    import dask
    dask.config.set({"distributed.scheduler.worker-saturation": 1.0,
                     "distributed.scheduler.allowed-failures": ALLOWED_FAILURES})


def _source_root() -> str | None:
    """The folder holding the scatter_pop package if it is a source checkout, else None."""
    root = Path(__file__).resolve().parent.parent
    return None if root.name in ("site-packages", "dist-packages") else str(root)


def _job_class(kind: str):
    from dask_jobqueue.pbs import PBSJob
    from dask_jobqueue.slurm import SLURMJob
    return SLURMJob if kind == "slurm" else PBSJob


def _job_kwargs(c: ClusterConfig) -> dict:
    wall = walltime_seconds(c.walltime)
    lifetime, stagger = worker_lifetime(wall)
    prologue = list(c.job_script_prologue)
    if _source_root() is not None:   # workers import scatter_pop from the same checkout
        prologue.append(f"export PYTHONPATH={_source_root()}${{PYTHONPATH:+:$PYTHONPATH}}")
    walltime = c.walltime
    if c.kind == "pbs":              # PBS takes hours beyond 24, not days
        walltime = "%02d:%02d:%02d" % (wall // 3600, wall % 3600 // 60, wall % 60)
    kwargs = dict(queue=c.queue, account=c.account, cores=c.cores, processes=c.cores,
                  memory=c.memory, walltime=walltime, job_name=JOB_NAME, nanny=True,
                  job_script_prologue=prologue, job_extra_directives=list(c.job_extra_directives),
                  interface=c.interface, log_directory=c.log_directory,
                  local_directory=c.local_directory, python=c.python or sys.executable,
                  worker_extra_args=["--lifetime", f"{lifetime:.0f}s",
                                     "--lifetime-stagger", f"{stagger:.0f}s"])
    if c.kind == "pbs":
        kwargs["resource_spec"] = c.resource_spec
    return kwargs


def job_script(config: ClusterConfig, *, longest_task_seconds: float | None = None) -> str:
    """The worker job script dask-jobqueue would submit for ``config`` (kind slurm or pbs).

    Nothing is submitted and no scheduler is started; the scheduler address in the script is
    dask-jobqueue's placeholder (the real one is known only when the run starts).
    """
    if config.kind not in BATCH:
        raise InputError(f"cluster.kind = {toml_repr(config.kind)}: a job script exists only for "
                         "kind slurm or pbs")
    check_walltime(config.walltime, longest_task_seconds)
    kwargs = _job_kwargs(config)
    kwargs.pop("nanny")
    return _job_class(config.kind)(_PLACEHOLDER_ADDRESS, name=f"{JOB_NAME}-0", **kwargs).job_script()


_SUBMIT_ERRORS: dict[str, list[str]] = {}   # scheduler address -> refused submissions


def _recording(job_cls):
    """``job_cls`` whose refused submissions are recorded, so connect() can report them."""
    class Recorded(job_cls):
        async def start(self):
            try:
                await super().start()
            except RuntimeError as exc:
                from distributed.core import Status
                self.status = Status.failed       # lets the cluster close cleanly afterwards
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
            raise InputError(f"cluster: {command} refused the worker job ({errors[0]}); check "
                             "queue, account, cores, memory and walltime (--dry-run prints the "
                             "job script)")
        if any(getattr(job, "job_id", None) for job in cluster.workers.values()):
            return
        check_terminated()
        time.sleep(0.1)
    warnings.warn(f"no worker job submitted by {command} within {SUBMIT_WAIT_SECONDS:.0f} s; "
                  "continuing to wait for workers", RuntimeWarning, stacklevel=3)


TERM_GRACE_SECONDS = 20.0   # clean-up time after a stop signal before the process ends itself
RESUME_HINT = "finished parts are kept, rerun the same command to resume"


class _Activation:
    """One stop-signal handling (connect()'s, or a command's): the signal received, the watchdog."""

    def __init__(self, prog: str) -> None:
        self.prog = prog                 # names the process in the line the user gets
        self.signum: int | None = None   # the first stop signal
        self.exit: SystemExit | None = None   # raised for it (once)
        self.wake = threading.Event()    # wakes the watchdog: a signal, or leaving without one
        self.hurry = threading.Event()   # SIGINT again: end now, without the rest of the clean-up
        self.said = threading.Lock()     # the user's one line comes from one thread only
        self.reported = False

    @property
    def raised(self) -> bool:
        return self.exit is not None

    def stopped_line(self) -> str:
        word = "interrupted" if self.signum == signal.SIGINT else "terminated"
        return f"{self.prog}: {word}; {RESUME_HINT}"


_CURRENT: _Activation | None = None    # the active handling (main thread's connect() or command)
_DEFER = 0                             # depth of deferred_stop() blocks in the main thread
_WORKER_IGNORES_SIGINT = False         # set in local worker processes by dask_setup


def _quiet_process() -> None:
    """After a stop signal the process is going away: what Dask, its threads and objects being torn
    down would report from now on (log records, exceptions in threads, exceptions in ``__del__``,
    warnings) is not for the user, who gets one line; the clean-up itself still runs."""
    import logging
    logging.disable(logging.CRITICAL)
    threading.excepthook = lambda args: None
    sys.unraisablehook = lambda unraisable: None
    warnings.simplefilter("ignore")


def _terminate(act: _Activation) -> SystemExit:
    act.exit = SystemExit(128 + act.signum)
    _quiet_process()
    return act.exit


def _say(act: _Activation, line: str) -> None:
    """Write the user's one line, unless it was written already (by the other thread)."""
    if not act.said.acquire(timeout=5.0):
        return
    try:
        if not act.reported:
            act.reported = True
            sys.stderr.write(line + "\n")
            sys.stderr.flush()
    finally:
        act.said.release()


def _on_signal(act: _Activation, signum, frame) -> None:
    # Only the first stop signal counts: a second SIGTERM must not break the clean-up half-way
    # (batch systems follow it with SIGKILL, the watchdog below with its own exit); a second
    # SIGINT (Ctrl-C pressed again) asks the watchdog to end the process now.  Nothing here takes
    # a lock the main thread could hold (Event.set takes the event's own condition, which only
    # the watchdog thread waits on).
    if act.signum is not None:
        if signum == signal.SIGINT:
            act.hurry.set()
        return
    act.signum = signum
    act.wake.set()
    if _DEFER == 0 and act is _CURRENT:
        raise _terminate(act)


def check_terminated() -> None:
    """Raise ``SystemExit(128 + signal)`` if a stop signal (SIGTERM; SIGINT under
    :func:`stop_signals`) arrived inside :func:`deferred_stop` and has not been raised yet; a
    no-op otherwise.  Call it where unwinding is safe (between whole operations)."""
    act = _CURRENT
    if act is not None and act.signum is not None and not act.raised:
        raise _terminate(act)


@contextmanager
def deferred_stop() -> Iterator[None]:
    """Inside, a stop signal to the driver (SIGTERM; SIGINT too under :func:`stop_signals`) is only
    recorded; it is raised as ``SystemExit`` by the next :func:`check_terminated` or on leaving
    the block.

    An exception raised by a signal handler lands wherever the main thread happens to be: between
    taking a lock and entering the ``try`` that releases it (xarray's HDF5 lock while a part file is
    written: the clean-up then waits for that lock forever), or inside a garbage-collector callback,
    which swallows it (the signal is lost).  Code that holds such resources runs in this block and
    calls :func:`check_terminated` only between whole operations.  Only the main thread defers
    (signal handlers run there); elsewhere the block does nothing.
    """
    global _DEFER
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    _DEFER += 1
    try:
        yield
    finally:
        _DEFER -= 1
    check_terminated()


def _release_semaphores() -> None:
    """Unlink this process's named multiprocessing semaphores (the nannies' locks), as its normal
    exit would: after ``os._exit`` multiprocessing's resource tracker, a process of its own that
    shares the user's terminal, unlinks them itself and prints a "leaked semaphore" warning there.
    Uses multiprocessing's finalizer registry (private; skipped if it is not there)."""
    from multiprocessing import synchronize, util
    cleanup = getattr(getattr(synchronize, "SemLock", None), "_cleanup", None)
    registry = getattr(util, "_finalizer_registry", None)
    if cleanup is None or not isinstance(registry, dict):
        return
    for finalizer in list(registry.values()):
        if getattr(finalizer, "_callback", None) is cleanup:
            try:
                finalizer()
            except Exception:     # already unlinked, tracker gone: nothing left to do
                pass


def _hard_exit(act: _Activation, status: int, line: str) -> None:
    import multiprocessing

    for child in multiprocessing.active_children():
        child.kill()
    _release_semaphores()
    _say(act, line)
    os._exit(status)


def _grace_watchdog(act: _Activation) -> None:
    act.wake.wait()
    if act.signum is None:            # left without a stop signal
        return
    # If the clean-up hangs (a batch system that does not answer, a worker that does not stop),
    # or the user presses Ctrl-C again, end the process: every finished part is already on disk,
    # so a rerun resumes; local worker processes are killed first, batch jobs end when their
    # workers lose the scheduler.
    if act.hurry.wait(TERM_GRACE_SECONDS):
        _hard_exit(act, 128 + signal.SIGINT,
                   f"{act.prog}: interrupted again; stopped without finishing the clean-up ({RESUME_HINT})")
    name = signal.Signals(act.signum).name
    _hard_exit(act, 128 + act.signum, f"{act.prog}: clean-up after {name} took over "
                                      f"{TERM_GRACE_SECONDS:.0f} s; exiting ({RESUME_HINT})")


@contextmanager
def _stopping(signums: tuple[int, ...], prog: str, final: bool) -> Iterator[None]:
    """While inside, a stop signal raises ``SystemExit(128 + signal)`` in the main thread (at once,
    or at the next :func:`check_terminated` inside :func:`deferred_stop`), so ``finally`` blocks
    run.  An ignored SIGINT (a shell's background job, ``nohup``) stays ignored.  ``final`` (a
    command's handling, :func:`stop_signals`): a stop leaving the block writes the user's one line,
    and the handlers stay, so that Ctrl-C pressed again still ends the process at once."""
    global _CURRENT
    if threading.current_thread() is not threading.main_thread() or _CURRENT is not None:
        yield                             # not the main thread, or an outer handling is active
        return
    act = _Activation(prog)
    threading.Thread(target=_grace_watchdog, args=(act,), name="scatter-pop stop grace",
                     daemon=True).start()
    handler = functools.partial(_on_signal, act)
    previous = {}
    for signum in signums:
        if signum == signal.SIGINT and signal.getsignal(signum) is signal.SIG_IGN:
            continue
        previous[signum] = signal.signal(signum, handler)
    _CURRENT = act
    try:
        yield
    except SystemExit as exc:
        if exc is act.exit and final:   # a command's stop: the user's one line
            _say(act, act.stopped_line())
        raise
    finally:
        _CURRENT = None
        if act.signum is None or not final:
            # a command that stopped keeps the handler: the process is ending, and Ctrl-C
            # pressed again then still ends it at once
            for signum, old in previous.items():
                signal.signal(signum, old if old is not None else signal.SIG_DFL)
        if act.signum is None:
            act.wake.set()                # ends the watchdog
    if act.signum is not None and not act.raised:   # recorded in a deferred block just left
        exc = _terminate(act)
        if final:
            _say(act, act.stopped_line())
        raise exc


def _sigterm_unwinds() -> AbstractContextManager[None]:
    """connect()'s own handling: SIGTERM (preemption, ``scancel``, ``kill``) unwinds the ``with``
    block, so the worker jobs are cancelled; SIGINT keeps Python's KeyboardInterrupt."""
    return _stopping((signal.SIGTERM,), "scatter-pop", final=False)


@contextmanager
def stop_signals(prog: str) -> Iterator[None]:
    """For a command that drives a run and then ends (``scatter-pop run``, the demo): SIGTERM and
    SIGINT (Ctrl-C) both stop it the same way.

    Inside, either signal is handled as connect() handles SIGTERM: recorded inside
    :func:`deferred_stop` blocks (the ensemble driver runs in one), raised as ``SystemExit(143)``
    or ``SystemExit(130)`` (128 + the signal number, as shells report it) only at safe points, the
    clean-up runs, and the user gets one line on stderr, ``PROG: interrupted; finished parts are
    kept, rerun the same command to resume`` (``terminated`` for SIGTERM).  SIGINT again while the
    clean-up runs ends the process at once with status 130 (local workers killed; every finished
    part is already on disk).  A clean-up that takes over ``TERM_GRACE_SECONDS`` ends the process
    too.  Library code keeps Python's KeyboardInterrupt for Ctrl-C: this turns it into the end of
    the process, which only a command may decide.
    """
    with _stopping((signal.SIGTERM, signal.SIGINT), prog, final=True):
        yield


def dask_setup(worker) -> None:
    """Dask preload of the local cluster's worker processes: ignore SIGINT.

    A terminal sends Ctrl-C's SIGINT to its whole foreground process group, local workers included;
    the driver decides whether the run stops and closes its workers itself.  REBOUND installs its
    own SIGINT handler while it integrates (and raises KeyboardInterrupt after the step), so
    :func:`scatter_pop.ensemble.integrate_batch` integrates the system again when that happens in a
    worker marked here.  Runs in the worker process's main thread, before it takes tasks.
    """
    global _WORKER_IGNORES_SIGINT
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, signal.SIG_IGN)
        _WORKER_IGNORES_SIGINT = True


def worker_ignores_sigint() -> bool:
    """True in a local worker process set up by :func:`dask_setup` (its driver owns Ctrl-C)."""
    return _WORKER_IGNORES_SIGINT


def _silence_stderr() -> None:
    """Runs on each local worker after a stop signal: its stderr (the user's terminal, inherited from the
    driver) goes to /dev/null, so the warnings and tracebacks of a worker closing in the middle of
    a task do not reach the user."""
    fd = os.open(os.devnull, os.O_WRONLY)
    os.dup2(fd, 2)
    os.close(fd)


def _close(client, cluster, kind: str) -> None:
    """Close the client, then the cluster (which closes its workers, or cancels its jobs)."""
    act = _CURRENT
    terminating = act is not None and act.signum is not None
    try:
        if client is not None:
            if terminating and kind == "local":
                try:
                    client.run(_silence_stderr, on_error="ignore")
                except (OSError, RuntimeError):   # scheduler already gone: nothing left to quiet
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
        # preload: the workers run this module's dask_setup at their start (Ctrl-C is the driver's)
        return LocalCluster(n_workers=n, threads_per_worker=1, processes=True, preload=[__name__],
                            dashboard_address=f":{c.dashboard_port}", **extra)
    from dask_jobqueue import PBSCluster, SLURMCluster
    cls = SLURMCluster if c.kind == "slurm" else PBSCluster
    cluster = cls(job_cls=_recording(_job_class(c.kind)),
                  scheduler_options={"dashboard_address": f":{c.dashboard_port}"},
                  **_job_kwargs(c))
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
        raise InputError(f"cluster.address = {toml_repr(address)}: no Dask scheduler answered "
                         f"({type(exc).__name__})") from None


def _warn_scheduler_settings(client) -> None:
    def settings():
        import dask
        return (dask.config.get("distributed.scheduler.worker-saturation"),
                dask.config.get("distributed.scheduler.allowed-failures"))
    saturation, failures = client.run_on_scheduler(settings)
    if float(saturation) != 1.0 or int(failures) < ALLOWED_FAILURES:
        warnings.warn(f"the scheduler runs with worker-saturation {saturation} and allowed-failures "
                      f"{failures}; start it with DASK_DISTRIBUTED__SCHEDULER__WORKER_SATURATION=1.0 "
                      f"DASK_DISTRIBUTED__SCHEDULER__ALLOWED_FAILURES={ALLOWED_FAILURES} so a lost "
                      "worker costs only its own task", RuntimeWarning, stacklevel=4)


@contextmanager
def connect(config: ClusterConfig, *, workers: int | None = None, scheduler: str | None = None,
            longest_task_seconds: float | None = None) -> Iterator["distributed.Client"]:
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
    with _sigterm_unwinds():
        cluster = client = None
        try:
            with deferred_stop():       # starting up is not interrupted half-way
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
            with deferred_stop():       # nor is the clean-up
                _close(client, cluster, config.kind)
