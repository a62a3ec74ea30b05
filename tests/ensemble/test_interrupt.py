"""Ctrl-C (SIGINT) stops ``scatter-pop run`` as cleanly as SIGTERM does, and the run resumes.

A terminal sends Ctrl-C's SIGINT to its whole foreground process group (POSIX General Terminal
Interface, ISIG and the INTR character; from memory): the driver and the local worker processes
it started.  The subprocess tests send it the same way, to the run's process group.  Exit status
128 + 2 = 130 for a process stopped by SIGINT is what shells report (common practice).  The
resumed run is compared bit for bit with each system integrated directly, as in test_resume.py
(exact restarts rest on each system's own seed, common practice for embarrassingly parallel
Monte Carlo).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap

import pytest
import xarray as xr
from ensemble_helpers import (
    SCATTER_POP,
    assert_physics_equal,
    kill_group,
    part_files,
    reference,
    run_cli,
    wait_for,
    write_spec,
)

from scatter_pop.cli.status import status_lines
from scatter_pop.store.run_folder import open_ensemble

pytestmark = pytest.mark.slow

N, T_END = 12, 2000.0  # as in test_resume.py (one reference for both): work left at the signal
STOPPED = "scatter-pop run: interrupted; finished parts are kept, rerun the same command to resume"
STOPPED_AT_ONCE = (
    "scatter-pop run: interrupted again; stopped without finishing the clean-up "
    "(finished parts are kept, rerun the same command to resume)"
)

# Bash starts a background command with SIGINT ignored when job control is off, and Python keeps
# an ignored SIGINT ignored (bash manual, "Signals"; Python documentation, signal module; both from
# memory), as does scatter-pop run.  The run under test must see Ctrl-C whatever started pytest.
_DEFAULT_SIGINT = (
    "import os, signal, sys; signal.signal(signal.SIGINT, signal.SIG_DFL); os.execv(sys.argv[1], sys.argv[1:])"
)


@pytest.fixture(scope="module")
def ref():
    return reference(systems=N, end_time=T_END)


def _start_run(spec, out) -> subprocess.Popen:
    """``scatter-pop run`` in its own process group (as a terminal's foreground job) with SIGINT
    at its default."""
    return subprocess.Popen(
        [
            sys.executable,
            "-c",
            _DEFAULT_SIGINT,
            SCATTER_POP,
            "run",
            str(spec),
            "--out",
            str(out),
            "--workers",
            "2",
            "--batch-size",
            "1",
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )


def test_ctrl_c_stops_the_run_cleanly_and_it_resumes(tmp_path, ref):
    """Ctrl-C after the first part file: exit status 130, one line on stderr saying how to resume,
    no traceback (the workers get the SIGINT too), and the rerun completes with the same result."""
    spec = write_spec(tmp_path / "spec.toml", systems=N, end_time=T_END)
    out = tmp_path / "run"
    proc = _start_run(spec, out)
    try:
        wait_for(lambda: part_files(out), 180, "a first part file")
        running = status_lines(out)
        os.killpg(proc.pid, signal.SIGINT)  # what the terminal does on Ctrl-C
        _, err = proc.communicate(timeout=60)
    finally:
        kill_group(proc)
    assert any(line.startswith("state        running since") and f"pid {proc.pid}" in line for line in running)
    assert proc.returncode == 130, err
    assert err.splitlines() == [STOPPED], err
    kept = part_files(out)
    assert kept and not list((out / "parts").glob("*.tmp.*"))
    rerun = run_cli("run", spec, "--out", out, "--workers", "2")
    assert rerun.returncode == 0, rerun.stderr
    assert f"{len(kept)}/{N} systems on disk" in rerun.stdout
    assert_physics_equal(open_ensemble(out), ref)


def test_ctrl_c_twice_ends_the_run_at_once_and_keeps_finished_parts(tmp_path, ref):
    """Ctrl-C pressed twice: exit status 130 without waiting for the clean-up (or after it, if the
    second press came when it was done), one line, no traceback; the rerun completes with the same
    result.  (A second press that reaches the process before the first was handled is one signal:
    POSIX does not queue a pending standard signal, from memory.)"""
    spec = write_spec(tmp_path / "spec.toml", systems=N, end_time=T_END)
    out = tmp_path / "run"
    proc = _start_run(spec, out)
    try:
        wait_for(lambda: part_files(out), 180, "a first part file")
        os.killpg(proc.pid, signal.SIGINT)
        try:
            proc.wait(timeout=0.2)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGINT)
        _, err = proc.communicate(timeout=60)
    finally:
        kill_group(proc)
    assert proc.returncode == 130, err
    assert err.splitlines() in ([STOPPED_AT_ONCE], [STOPPED]), err
    rerun = run_cli("run", spec, "--out", out, "--workers", "2")
    assert rerun.returncode == 0, rerun.stderr
    assert_physics_equal(open_ensemble(out), ref)


# The driver-level behaviour, made deterministic in a subprocess (a signal to the test process
# itself would reach pytest): a signal handler's exception "may be raised after any bytecode
# instruction" (Python 3.11 documentation, signal module, "Note on Signal Handlers and
# Exceptions"; quoted from memory), hence the deferral to safe points.


def _run_script(tmp_path, text: str) -> subprocess.Popen:
    script = tmp_path / "driver.py"
    script.write_text(textwrap.dedent(text))
    return subprocess.Popen(
        [sys.executable, "-c", _DEFAULT_SIGINT, sys.executable, str(script)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


def test_ctrl_c_while_a_lock_is_held_waits_for_the_lock_to_be_released(tmp_path):
    """SIGINT between taking a lock and releasing it (as in xarray's CombinedLock while a part is
    written): the lock is released, then the command stops with 130 and its one line; a
    KeyboardInterrupt raised inside would leave the lock held and the clean-up, which needs it
    again, waiting forever."""
    proc = _run_script(
        tmp_path,
        """
        import os, signal, threading, time
        from scatter_pop.ensemble import stop_signals
        with stop_signals.stop_signals("driver"), stop_signals.deferred_stop():
            lock = threading.Lock()
            lock.acquire()
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.2)                      # the handler has run by now
            lock.release()
            print("released", lock.acquire(timeout=5), flush=True)
            lock.release()
            print("still working", flush=True)
            stop_signals.check_terminated()
            print("not reached", flush=True)
    """,
    )
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert out.split() == ["released", "True", "still", "working"]
    assert err == "driver: interrupted; finished parts are kept, rerun the same command to resume\n"


def test_ctrl_c_again_during_a_hanging_clean_up_ends_the_process_at_once(tmp_path):
    """The second Ctrl-C ends the process with 130 although its clean-up would take 60 s and the
    grace period is 600 s: nothing else could end it within the 60 s this test waits."""
    proc = _run_script(
        tmp_path,
        """
        import time
        from scatter_pop.ensemble import stop_signals
        stop_signals.TERM_GRACE_SECONDS = 600.0
        with stop_signals.stop_signals("driver"):
            try:
                print("ready", flush=True)
                time.sleep(60)
            finally:
                print("cleaning up", flush=True)
                time.sleep(60)          # a clean-up that does not finish in time
    """,
    )
    try:
        assert proc.stdout.readline().strip() == "ready"
        proc.send_signal(signal.SIGINT)
        assert proc.stdout.readline().strip() == "cleaning up"
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=60)
    finally:
        proc.kill()
        proc.communicate()
    assert proc.returncode == 130
    assert err == (
        "driver: interrupted again; stopped without finishing the clean-up (finished parts "
        "are kept, rerun the same command to resume)\n"
    )


def test_library_callers_keep_keyboardinterrupt_and_handlers_are_restored():
    """connect()'s own handling takes SIGTERM only: Ctrl-C stays Python's KeyboardInterrupt for
    library code (its default SIGINT handler, Python documentation, signal module); a command's
    stop_signals gives both back when it ends without a signal."""
    from scatter_pop.ensemble import stop_signals

    sigint, sigterm = signal.getsignal(signal.SIGINT), signal.getsignal(signal.SIGTERM)
    with stop_signals.sigterm_unwinds():
        assert signal.getsignal(signal.SIGINT) is sigint
        assert signal.getsignal(signal.SIGTERM) is not sigterm
    with stop_signals.stop_signals("test"):
        assert signal.getsignal(signal.SIGINT) is not sigint
        assert signal.getsignal(signal.SIGTERM) is not sigterm
    assert signal.getsignal(signal.SIGINT) is sigint and signal.getsignal(signal.SIGTERM) is sigterm


def test_a_local_worker_interrupted_by_ctrl_c_integrates_the_system_again(tmp_path):
    """In a local worker (set up by stop_signals.dask_setup) REBOUND turns SIGINT during its integration
    into KeyboardInterrupt (REBOUND 5.2.2: reb_sigint_handler in its C core, ``raise
    KeyboardInterrupt`` on that status in rebound/simulation.py); integrate_batch integrates the
    system again and the record equals the uninterrupted one."""
    spec = write_spec(tmp_path / "spec.toml", systems=2, end_time=5000.0)
    result = tmp_path / "records.nc"
    proc = _run_script(
        tmp_path,
        f"""
        import os, signal, threading, time
        from scatter_pop.ensemble import stop_signals, worker as ensemble
        from scatter_pop.engine import integrate
        from scatter_pop.spec.reader import load_spec
        from scatter_pop.store.schema import records_to_dataset
        spec = load_spec({str(spec)!r})
        stop_signals.dask_setup(None)                 # as at a local worker's start
        calls, real = [], integrate.integrate_systems
        def counting(*args, **kwargs):
            calls.append(1)
            return real(*args, **kwargs)
        integrate.integrate_systems = counting
        done = {{}}
        task = threading.Thread(target=lambda: done.update(
            records=ensemble.integrate_batch(spec, (1,), {str(tmp_path)!r})))   # a worker thread
        task.start()
        while task.is_alive() and len(calls) < 3:   # interrupt the first two integrations
            if calls:
                os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.01)
        task.join()
        print("integrations", len(calls), flush=True)
        records_to_dataset(done["records"], spec.planets.count).to_netcdf({str(result)!r})
    """,
    )
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err
    assert out.split() == ["integrations", "3"], (out, err)
    with xr.open_dataset(result) as ds:
        assert_physics_equal(ds.load(), reference(systems=2, end_time=5000.0), systems=[1])
