"""The SLURM path against a real single-node SLURM started by tests/slurm_harness.py.

What is checked, and against what:
* the job script scatter_pop has dask-jobqueue generate is accepted by SLURM's own parser
  (``sbatch --test-only``; SLURM is the reference);
* ``connect()`` with kind "slurm" starts worker jobs that SLURM lists (``squeue``) and that run
  tasks inside SLURM jobs (``SLURM_JOB_ID`` set by slurmd) importing this checkout;
* a worker job cancelled mid-run (``scancel``) is replaced by a new job and every task's
  result arrives exactly once;
* leaving ``connect()``, or SIGTERM / SIGKILL to the driver, leaves no job in ``squeue``;
* a submission SLURM refuses is reported at once as one-line InputError;
* an ensemble run through ``scatter-pop run`` on SLURM equals the same ensemble run on a local
  cluster, physics variables bit for bit (the reproducibility promise: each system draws from
  its own SeedSequence, so where it runs cannot matter).
Whole file: well under 90 s on 2 cores (timings in docs/internals/cluster.md).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time

import dask
import numpy as np
import pytest
import xarray as xr
from distributed import as_completed
from slurm_harness import PARTITION, squeue_jobs, wait_for_no_jobs

from scatter_pop.ensemble.cluster import ClusterConfig, connect, job_script
from scatter_pop.errors import InputError

pytestmark = [pytest.mark.slurm, pytest.mark.slow]

HERE = os.path.dirname(os.path.abspath(__file__))  # this file's folder (workers unpickle its tasks)
TESTS = os.path.dirname(HERE)  # tests/: data and helper modules
ROOT = os.path.dirname(TESTS)
# the task functions below are pickled by reference to this module: the worker jobs import it
# from the tests folder, which the job-script prologue puts on their path
PROLOGUE = [f"export PYTHONPATH={HERE}:{TESTS}${{PYTHONPATH:+:$PYTHONPATH}}"]


def slurm_table(tmp_path, **overrides) -> dict:
    table = {
        "kind": "slurm",
        "queue": PARTITION,
        "cores": 1,
        "memory": "1GB",
        "walltime": "00:30:00",
        "jobs": 2,
        "interface": "lo",
        "dashboard_port": 0,
        "log_directory": str(tmp_path / "logs"),
        "job_script_prologue": PROLOGUE,
    }
    table.update(overrides)
    return table


def _where_am_i(i):
    """Task body: which SLURM job runs it, and which scatter_pop it imports (0.3 s each)."""
    import os
    import time

    import scatter_pop.constants as k

    time.sleep(0.3)
    return i, os.environ.get("SLURM_JOB_ID"), os.path.dirname(os.path.dirname(k.__file__))


def _slow(i, seconds, log):
    """Task body: record each execution (index, job) in a shared file, sleep, return i."""
    import os
    import time

    with open(log, "a") as f:
        f.write(f"{i} {os.environ.get('SLURM_JOB_ID')}\n")
    time.sleep(seconds)
    return i, os.environ.get("SLURM_JOB_ID")


def test_unavailable_slurm_fails_in_ci_and_skips_only_outside(monkeypatch):
    """The harness's policy: never a silent skip when CI is set."""
    import slurm_harness

    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception, match="real SLURM unavailable: no apt-get"):
        slurm_harness.unavailable("no apt-get")
    monkeypatch.delenv("CI")
    with pytest.raises(pytest.skip.Exception, match="CI unset"):
        slurm_harness.unavailable("no apt-get")


def test_job_script_accepted_by_sbatch(slurm, tmp_path):
    config = ClusterConfig.from_table(
        slurm_table(
            tmp_path,
            account="astro42",
            cores=2,
            job_script_prologue=[*PROLOGUE, "export OMP_NUM_THREADS=1"],
            job_extra_directives=["--comment=scatter"],
        )
    )
    script = tmp_path / "job.sh"
    script.write_text(job_script(config))
    proc = subprocess.run(["sbatch", "--test-only", str(script)], capture_output=True, text=True, timeout=30)
    assert proc.returncode == 0, proc.stderr
    assert "to start at" in proc.stderr  # sbatch --test-only's answer for a valid job


def test_two_worker_jobs_run_tasks_and_close_leaves_no_job(slurm, tmp_path):
    config = ClusterConfig.from_table(slurm_table(tmp_path))
    with connect(config) as client:
        client.wait_for_workers(2, timeout=60)
        jobs = {job_id: (name, state) for job_id, name, state in squeue_jobs()}
        assert len(jobs) == 2
        assert all(name == "scatter-pop" and state == "RUNNING" for name, state in jobs.values())
        results = client.gather(client.map(_where_am_i, range(8), pure=False))
        assert [r[0] for r in results] == list(range(8))
        assert {r[1] for r in results} == set(jobs)  # tasks ran inside both jobs
        assert {r[2] for r in results} == {ROOT}  # and imported this checkout
    assert wait_for_no_jobs(20.0) == []  # close() cancelled both jobs


def test_cancelled_job_is_replaced_and_every_task_runs_once(slurm, tmp_path):
    n, seconds = 16, 1.0
    log = tmp_path / "executions.txt"
    config = ClusterConfig.from_table(slurm_table(tmp_path))
    # a lost worker is given up after 1 s instead of 15 s, so the replacement comes quickly
    with dask.config.set({"distributed.deploy.lost-worker-timeout": "1s"}):
        with connect(config) as client:
            client.wait_for_workers(2, timeout=60)
            first_jobs = {j for j, _, _ in squeue_jobs()}
            futures = client.map(_slow, range(n), [seconds] * n, [str(log)] * n, pure=False)
            results, cancelled = [], None
            for fut in as_completed(futures, raise_errors=False):
                assert fut.status == "finished", fut.exception()
                results.append(fut.result())
                fut.release()
                if len(results) == 2 and cancelled is None:
                    cancelled = min(first_jobs)  # busy: 14 tasks are still queued
                    subprocess.run(["scancel", cancelled], check=True, timeout=20)
            later_jobs = {j for j, _, _ in squeue_jobs()}
    assert sorted(i for i, _ in results) == list(range(n))  # each result exactly once
    assert cancelled in first_jobs and cancelled not in later_jobs
    replacement = later_jobs - first_jobs
    assert len(replacement) == 1  # adapt() replaced the lost job
    done_by = {job for _, job in results}
    assert replacement <= done_by  # and the new job did work
    executions = [ln.split() for ln in log.read_text().splitlines()]
    assert len(executions) > n and any(j == cancelled for _, j in executions)
    assert wait_for_no_jobs(20.0) == []


def test_refused_submission_is_one_line_input_error(slurm, tmp_path):
    config = ClusterConfig.from_table(slurm_table(tmp_path, queue="nosuchpartition", jobs=1))
    with pytest.raises(InputError) as err:
        with connect(config):
            pass
    msg = str(err.value)
    assert "\n" not in msg and msg.startswith("cluster: sbatch refused the worker job")
    assert "nosuchpartition" in msg
    assert wait_for_no_jobs(10.0) == []


DRIVER = """
import sys, time
from scatter_pop.ensemble.cluster import ClusterConfig, connect
config = ClusterConfig.from_table({table!r})
with connect(config) as client:
    client.wait_for_workers(1, timeout=60)
    print("ready", flush=True)
    time.sleep(120)
"""


@pytest.mark.parametrize("sig,deadline", [(signal.SIGTERM, 20.0), (signal.SIGKILL, 75.0)])
def test_killed_driver_leaves_no_orphan_job(slurm, tmp_path, sig, deadline):
    """SIGTERM: connect() unwinds and cancels the jobs.  SIGKILL: nothing runs in the driver,
    so the workers end their jobs themselves once the scheduler is gone (death timeout 60 s;
    measured ~4 s, since the nanny sees the connection drop)."""
    table = slurm_table(tmp_path, jobs=1)
    with subprocess.Popen(
        [sys.executable, "-c", textwrap.dedent(DRIVER.format(table=table))],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    ) as proc:
        try:
            assert proc.stdout.readline().strip() == "ready"
            assert len(squeue_jobs()) == 1
            t0 = time.monotonic()
            proc.send_signal(sig)
            proc.wait(timeout=30)
            left = wait_for_no_jobs(deadline)
            elapsed = time.monotonic() - t0
        finally:
            if proc.poll() is None:
                proc.kill()
    assert proc.returncode == (143 if sig == signal.SIGTERM else -signal.SIGKILL)
    assert left == [], f"orphan jobs {left} {elapsed:.0f} s after {sig.name}"


def _physics_equal(a, b) -> list[str]:
    from scatter_pop.store.schema import PHYSICS_VARIABLES

    differ = []
    for name in PHYSICS_VARIABLES:
        x, y = a[name].values, b[name].values
        if x.dtype != y.dtype or x.shape != y.shape or x.tobytes() != y.tobytes():
            differ.append(name)
    return differ


def test_ensemble_on_slurm_equals_local_bit_for_bit(slurm, tmp_path):
    from scatter_pop.cli.main import main
    from scatter_pop.ensemble.driver import run_ensemble

    spec = os.path.join(ROOT, "tests", "data", "tiny.toml")
    cluster_file = tmp_path / "slurm.toml"
    # 1-day walltime: the driver checks it against its worst-case batch time (the wall cap)
    lines = [f"{k} = {v!r}".replace("'", '"') for k, v in slurm_table(tmp_path, walltime="1-00:00:00").items()]
    cluster_file.write_text("\n".join(lines) + "\n")
    status = main(["run", spec, "--out", str(tmp_path / "on_slurm"), "--cluster", str(cluster_file)])
    assert status == 0
    assert len(list((tmp_path / "logs").glob("scatter-pop-*.err"))) >= 1  # SLURM jobs did it
    assert wait_for_no_jobs(20.0) == []
    on_slurm = xr.load_dataset(tmp_path / "on_slurm" / "ensemble.nc", mask_and_scale=False)  # codes as stored
    local = run_ensemble(spec, out=tmp_path / "local", workers=2, cluster=ClusterConfig(dashboard_port=0))
    assert on_slurm.sizes["system"] == local.sizes["system"] == 4
    assert np.array_equal(on_slurm["system"].values, local["system"].values)
    assert _physics_equal(on_slurm, local) == []


def _spec_with_cluster(tmp_path, walltime: str) -> str:
    """tests/data/tiny.toml with a [cluster] table for this SLURM (wall-clock cap 600 s per system)."""
    tiny = open(os.path.join(TESTS, "data", "tiny.toml"), encoding="utf-8").read()
    tiny = tiny.replace("end_time = 1000.0", "end_time = 1000.0\nwall_seconds_max = 600.0")
    tiny = tiny.replace("systems = 4", "systems = 4\nbatch_size = 1")
    lines = [f"{k} = {v!r}".replace("'", '"') for k, v in slurm_table(tmp_path, walltime=walltime).items()]
    return tiny + "\n[cluster]\n" + "\n".join(lines) + "\n"


def test_dry_run_prints_a_job_script_sbatch_accepts_and_refuses_the_walltime_the_run_refuses(slurm, tmp_path, capsys):
    from scatter_pop.cli import main

    spec = tmp_path / "slurm.toml"
    spec.write_text(_spec_with_cluster(tmp_path, "01:00:00"))
    out = tmp_path / "out"
    assert main(["run", str(spec), "--out", str(out), "--dry-run"]) == 0
    printed = capsys.readouterr().out
    script = printed[printed.index("#!") : printed.index("nothing was computed")]
    (tmp_path / "job.sh").write_text(script)
    proc = subprocess.run(["sbatch", "--test-only", str(tmp_path / "job.sh")], capture_output=True, text=True)
    assert proc.returncode == 0 and "to start at" in proc.stderr, proc.stderr
    assert not out.exists() and squeue_jobs() == []  # nothing submitted, no folder

    # 10 min cannot hold a 600 s batch (workers retire earlier): the dry run says what the run says
    spec.write_text(_spec_with_cluster(tmp_path, "00:10:00"))
    answers = []
    for argv in (["run", str(spec), "--out", str(out), "--dry-run"], ["run", str(spec), "--out", str(out)]):
        assert main(argv) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and "cluster.walltime" in err[0] and "at least" in err[0]
        answers.append(err[0].split("error: ", 1)[1])
    assert answers[0] == answers[1] and not out.exists() and squeue_jobs() == []
