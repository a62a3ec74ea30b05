"""Stop signals taken at safe points: SIGTERM (preemption, ``scancel``) and, in the commands, Ctrl-C.

An exception from a signal handler lands after any bytecode: inside xarray's HDF5 lock while a part
file is written it deadlocks the clean-up, inside distributed's gc callback it is swallowed.  So the
handlers here only record the signal inside :func:`deferred_stop` blocks, and :func:`check_terminated`
raises ``SystemExit(128 + signal)`` between whole steps.  :func:`sigterm_unwinds` is what
:func:`scatter_pop.ensemble.cluster.connect` uses (SIGTERM only; library callers keep Python's
KeyboardInterrupt); :func:`stop_signals` is a command's handling (SIGTERM and SIGINT, one line for the
user, a second Ctrl-C ends the process at once); a watchdog thread ends a clean-up that takes over
``TERM_GRACE_SECONDS``.  Local workers ignore SIGINT (:func:`dask_setup`, a Dask preload): the
terminal sends it to them too, and their driver decides.
"""

from __future__ import annotations

import functools
import os
import signal
import sys
import threading
import warnings
from collections.abc import Iterator
from contextlib import AbstractContextManager, contextmanager

__all__ = [
    "deferred_stop",
    "check_terminated",
    "stop_signals",
    "sigterm_unwinds",
    "stop_requested",
    "dask_setup",
    "worker_ignores_sigint",
    "TERM_GRACE_SECONDS",
    "RESUME_HINT",
]

TERM_GRACE_SECONDS = 20.0  # clean-up time after a stop signal before the process ends itself
RESUME_HINT = "finished parts are kept, rerun the same command to resume"


class _Activation:
    """One stop-signal handling (connect()'s, or a command's): the signal received, the watchdog."""

    def __init__(self, prog: str) -> None:
        self.prog = prog  # names the process in the line the user gets
        self.signum: int | None = None  # the first stop signal
        self.exit: SystemExit | None = None  # raised for it (once)
        self.wake = threading.Event()  # wakes the watchdog: a signal, or leaving without one
        self.hurry = threading.Event()  # SIGINT again: end now, without the rest of the clean-up
        self.said = threading.Lock()  # the user's one line comes from one thread only
        self.reported = False

    @property
    def raised(self) -> bool:
        return self.exit is not None

    def stopped_line(self) -> str:
        word = "interrupted" if self.signum == signal.SIGINT else "terminated"
        return f"{self.prog}: {word}; {RESUME_HINT}"


_CURRENT: _Activation | None = None  # the active handling (main thread's connect() or command)
_DEFER = 0  # depth of deferred_stop() blocks in the main thread
_WORKER_IGNORES_SIGINT = False  # set in local worker processes by dask_setup


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
            except Exception:  # already unlinked, tracker gone: nothing left to do
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
    if act.signum is None:  # left without a stop signal
        return
    # If the clean-up hangs (a batch system that does not answer, a worker that does not stop),
    # or the user presses Ctrl-C again, end the process: every finished part is already on disk,
    # so a rerun resumes; local worker processes are killed first, batch jobs end when their
    # workers lose the scheduler.
    if act.hurry.wait(TERM_GRACE_SECONDS):
        _hard_exit(
            act,
            128 + signal.SIGINT,
            f"{act.prog}: interrupted again; stopped without finishing the clean-up ({RESUME_HINT})",
        )
    name = signal.Signals(act.signum).name
    _hard_exit(
        act,
        128 + act.signum,
        f"{act.prog}: clean-up after {name} took over {TERM_GRACE_SECONDS:.0f} s; exiting ({RESUME_HINT})",
    )


@contextmanager
def _stopping(signums: tuple[int, ...], prog: str, final: bool) -> Iterator[None]:
    """While inside, a stop signal raises ``SystemExit(128 + signal)`` in the main thread (at once,
    or at the next :func:`check_terminated` inside :func:`deferred_stop`), so ``finally`` blocks
    run.  An ignored SIGINT (a shell's background job, ``nohup``) stays ignored.  ``final`` (a
    command's handling, :func:`stop_signals`): a stop leaving the block writes the user's one line,
    and the handlers stay, so that Ctrl-C pressed again still ends the process at once."""
    global _CURRENT
    if threading.current_thread() is not threading.main_thread() or _CURRENT is not None:
        yield  # not the main thread, or an outer handling is active
        return
    act = _Activation(prog)
    threading.Thread(target=_grace_watchdog, args=(act,), name="scatter-pop stop grace", daemon=True).start()
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
        if exc is act.exit and final:  # a command's stop: the user's one line
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
            act.wake.set()  # ends the watchdog
    if act.signum is not None and not act.raised:  # recorded in a deferred block just left
        exc = _terminate(act)
        if final:
            _say(act, act.stopped_line())
        raise exc


def sigterm_unwinds() -> AbstractContextManager[None]:
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
    :func:`scatter_pop.ensemble.worker.integrate_batch` integrates the system again when that happens in a
    worker marked here.  Runs in the worker process's main thread, before it takes tasks.
    """
    global _WORKER_IGNORES_SIGINT
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, signal.SIG_IGN)
        _WORKER_IGNORES_SIGINT = True


def worker_ignores_sigint() -> bool:
    """True in a local worker process set up by :func:`dask_setup` (its driver owns Ctrl-C)."""
    return _WORKER_IGNORES_SIGINT


def silence_worker_stderr() -> None:
    """Runs on each local worker after a stop signal: its stderr (the user's terminal, inherited from the
    driver) goes to /dev/null, so the warnings and tracebacks of a worker closing in the middle of
    a task do not reach the user."""
    fd = os.open(os.devnull, os.O_WRONLY)
    os.dup2(fd, 2)
    os.close(fd)


def stop_requested() -> bool:
    """True once a stop signal reached the active handling (the process is going away)."""
    return _CURRENT is not None and _CURRENT.signum is not None
