"""The [cluster] table, the walltime arithmetic, the job scripts dask-jobqueue generates, and a
local cluster.  The real SLURM (and PBS through its Torque wrappers) is in test_slurm.py and
test_pbs.py.

External references used here:
* SLURM ``sbatch`` manual (SchedMD): ``-p`` partition, ``-A`` account, ``--cpus-per-task``,
  ``--mem`` (MB by default, suffixes K/M/G/T = powers of 1024), ``-t`` time limit in
  ``days-hours:minutes:seconds``;
* PBS Professional Reference Guide, ``qsub`` (Altair; from memory): ``-q`` queue, ``-A`` account,
  ``-l select=1:ncpus=N:mem=M``, ``-l walltime=hh:mm:ss`` (hours may exceed 24; no day field);
* dask-jobqueue documentation, "How to handle job queueing system walltime killing workers"
  (clusters-advanced-tips-and-tricks.rst): a 1 h walltime pairs with ``--lifetime 55m
  --lifetime-stagger 4m``;
* distributed's ``dask worker --lifetime`` semantics: the actual lifetime is uniform in
  lifetime ± stagger (distributed.worker.Worker docstring).
"""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import textwrap
import time
import warnings

import dask
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from scatter_pop.ensemble.cluster import (
    ClusterConfig,
    WalltimeWarning,
    check_walltime,
    configure_dask,
    connect,
    job_script,
    load_cluster_file,
)
from scatter_pop.errors import InputError
from scatter_pop.spec.cluster_table import apply_overrides, walltime_seconds, worker_lifetime

# -- validation: one line naming the key, the bad value and what is allowed -----------------

BAD_TABLES = [
    ({"kind": "sge"}, "cluster.kind", '"sge"', "local, slurm, pbs, address"),
    ({"kind": "slurm", "cores": 0}, "cluster.cores", "0", ">= 1"),
    ({"kind": "slurm", "cores": True}, "cluster.cores", "true", "integer"),
    ({"kind": "slurm", "cores": 2.5}, "cluster.cores", "2.5", "integer"),
    ({"kind": "slurm", "memory": "lots"}, "cluster.memory", '"lots"', "8GB"),
    ({"kind": "slurm", "memory": "1MB"}, "cluster.memory", '"1MB"', "128 MiB"),
    ({"kind": "slurm", "memory": 8}, "cluster.memory", "8", "8GB"),
    ({"kind": "slurm", "walltime": "90 minutes"}, "cluster.walltime", '"90 minutes"', "HH:MM:SS"),
    ({"kind": "slurm", "walltime": "00:01:00"}, "cluster.walltime", '"00:01:00"', "00:02:00"),
    ({"kind": "slurm", "walltime": "1-25:00:00"}, "cluster.walltime", '"1-25:00:00"', "D-HH:MM:SS"),
    ({"kind": "pbs", "walltime": "10:61:00"}, "cluster.walltime", '"10:61:00"', "HH:MM:SS"),
    ({"kind": "slurm", "quue": "debug"}, "cluster.quue", '"debug"', "did you mean 'queue'"),
    ({"kind": "local", "queue": "debug"}, "cluster.queue", '"debug"', "kind slurm or pbs"),
    ({"kind": "slurm", "workers": 4}, "cluster.workers", "4", "kind local"),
    ({"kind": "slurm", "resource_spec": "nodes=1"}, "cluster.resource_spec", '"nodes=1"', "kind pbs"),
    ({"kind": "slurm", "jobs": 2, "maximum_jobs": 3}, "cluster.jobs", "2", "not both"),
    ({"kind": "slurm", "minimum_jobs": 4, "maximum_jobs": 2}, "cluster.maximum_jobs", "2", ">= minimum_jobs (4)"),
    ({"kind": "slurm", "jobs": 0}, "cluster.jobs", "0", ">= 1"),
    (
        {"kind": "slurm", "job_script_prologue": "module load x"},
        "cluster.job_script_prologue",
        '"module load x"',
        "list of single-line strings",
    ),
    ({"kind": "slurm", "job_script_prologue": ["a\nb"]}, "cluster.job_script_prologue", "['a\\nb']", "single-line"),
    ({"kind": "slurm", "queue": ""}, "cluster.queue", '""', "partition"),
    ({"kind": "address"}, "cluster.address", "missing", "tcp://"),
    ({"kind": "address", "address": "my laptop"}, "cluster.address", '"my laptop"', "tcp://host:port"),
    ({"kind": "local", "dashboard_port": 70000}, "cluster.dashboard_port", "70000", "65535"),
    ({"kind": "local", "workers": 0}, "cluster.workers", "0", ">= 1"),
    ({"kind": "pbs", "resource_spec": 5}, "cluster.resource_spec", "5", "select="),
]


@pytest.mark.parametrize("table,key,value,allowed", BAD_TABLES, ids=[f"{t[1]}={t[2]}" for t in BAD_TABLES])
def test_bad_table_is_one_line_naming_key_value_and_allowed(table, key, value, allowed):
    with pytest.raises(InputError) as err:
        ClusterConfig.from_table(table)
    msg = str(err.value)
    assert "\n" not in msg
    assert msg.startswith(key), msg
    assert value in msg and allowed in msg, msg


def test_table_that_is_not_a_table():
    with pytest.raises(InputError, match=r"^cluster = \[1, 2\]: must be a table$"):
        ClusterConfig.from_table([1, 2])


def test_defaults_resolved_at_load_time():
    assert ClusterConfig.from_table({}) == ClusterConfig()
    c = ClusterConfig.from_table({"kind": "slurm", "cores": 4})
    assert (c.minimum_jobs, c.maximum_jobs, c.memory, c.walltime) == (1, 1, "8GiB", "24:00:00")
    c = ClusterConfig.from_table({"kind": "slurm", "jobs": 3})
    assert (c.jobs, c.minimum_jobs, c.maximum_jobs) == (None, 3, 3)
    c = ClusterConfig.from_table({"kind": "pbs", "maximum_jobs": 10})
    assert (c.minimum_jobs, c.maximum_jobs) == (1, 10)
    c = ClusterConfig.from_table({"kind": "pbs", "minimum_jobs": 2})
    assert (c.minimum_jobs, c.maximum_jobs) == (2, 2)
    c = ClusterConfig.from_table({"kind": "slurm", "minimum_jobs": 0, "maximum_jobs": 5})
    assert (c.minimum_jobs, c.maximum_jobs) == (0, 5)


_names = st.text("abcdefghijklmnopqrstuvwxyz0123456789_-", min_size=1, max_size=12)
_tables = st.fixed_dictionaries(
    {"kind": st.sampled_from(["slurm", "pbs"])},
    optional={
        "queue": _names,
        "account": _names,
        "cores": st.integers(1, 256),
        "memory": st.integers(1, 512).map(lambda n: f"{n}GB"),
        "walltime": st.tuples(st.integers(0, 6), st.integers(0, 23), st.integers(2, 59)).map(
            lambda t: f"{t[0]}-{t[1]:02d}:{t[2]:02d}:00"
        ),
        "jobs": st.integers(1, 100),
        "interface": _names,
        "job_script_prologue": st.lists(_names.map(lambda s: f"export X={s}"), max_size=3),
    },
)


@given(_tables)
@settings(max_examples=60, deadline=None)
def test_to_table_round_trips(table):
    c = ClusterConfig.from_table(table)
    assert ClusterConfig.from_table(c.to_table()) == c


def test_cluster_file(tmp_path):
    path = tmp_path / "allocation.toml"
    path.write_text('kind = "slurm"\nqueue = "long"\ncores = 8\nwalltime = "2-00:00:00"\n')
    c = load_cluster_file(path)
    assert (c.kind, c.queue, c.cores, c.walltime) == ("slurm", "long", 8, "2-00:00:00")
    path.write_text('[cluster]\nkind = "pbs"\nqueue = "workq"\n')  # a [cluster] header is fine
    assert load_cluster_file(path).queue == "workq"
    path.write_text('kind = "slurm"\ncors = 8\n')
    with pytest.raises(
        InputError,
        match=r"^allocation\.toml: cluster\.cors = 8: unknown key "
        r"\(did you mean 'cores'\?\)",
    ):
        load_cluster_file(path)
    path.write_text("kind = \n")
    with pytest.raises(InputError, match=r"allocation\.toml: not valid TOML"):
        load_cluster_file(path)
    with pytest.raises(InputError, match=r"^cluster file .*nowhere\.toml\": cannot read"):
        load_cluster_file(tmp_path / "nowhere.toml")


def test_command_line_overrides():
    slurm = ClusterConfig.from_table({"kind": "slurm", "cores": 4, "jobs": 1})
    c = apply_overrides(slurm, workers=10)  # 10 workers of 4 per job -> 3 jobs
    assert (c.minimum_jobs, c.maximum_jobs) == (3, 3)
    assert apply_overrides(ClusterConfig(), workers=3).workers == 3
    c = apply_overrides(slurm, scheduler="tcp://10.1.2.3:8786")
    assert c == ClusterConfig(kind="address", address="tcp://10.1.2.3:8786")
    for kwargs, pattern in [
        ({"workers": 0}, r"^workers = 0: allowed: an integer >= 1$"),
        ({"scheduler": "nowhere"}, r'^scheduler = "nowhere": allowed: '),
    ]:
        with pytest.raises(InputError, match=pattern):
            apply_overrides(slurm, **kwargs)
    with pytest.raises(InputError, match=r"^workers = 2: applies to kind local, slurm or pbs"):
        apply_overrides(ClusterConfig(kind="address", address="h:1"), workers=2)


# -- walltime arithmetic ------------------------------------------------------------------


def test_walltime_parsing():
    # SLURM's time format days-hours:minutes:seconds (sbatch manual); PBS: hours beyond 24
    assert walltime_seconds("1-00:00:00") == 86400
    assert walltime_seconds("36:00:00") == 129600
    assert walltime_seconds("00:02:00") == 120
    assert walltime_seconds("2-12:30:15") == 2 * 86400 + 12 * 3600 + 30 * 60 + 15
    for bad in ("00:01:59", "1:2:3", "1-24:00:00", "12:00", "abc", "00:60:00"):
        assert walltime_seconds(bad) is None, bad


def test_lifetime_matches_dask_jobqueue_documented_example():
    # dask-jobqueue docs: walltime 01:00:00 -> --lifetime 55m --lifetime-stagger 4m, so the
    # latest retirement (59 min) precedes the kill.  Ours must be of the same kind.
    lifetime, stagger = worker_lifetime(3600)
    assert 50 * 60 <= lifetime <= 57 * 60 and 2 * 60 <= stagger <= 5 * 60
    assert lifetime + stagger <= 3600 - 60


@given(st.integers(120, 30 * 86400))
def test_workers_always_retire_before_the_walltime(walltime):
    lifetime, stagger = worker_lifetime(walltime)
    assert stagger >= 0 and lifetime - stagger > 0  # earliest retirement after start
    assert lifetime + stagger <= walltime - 60  # latest retirement >= 1 min early
    if walltime >= 3600:  # and not wastefully early
        assert lifetime - stagger >= 0.8 * walltime


def test_walltime_against_longest_task():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check_walltime("01:00:00", 600.0)  # 10 min batches in 1 h jobs: fine, silent
        check_walltime("01:00:00", None)
    with pytest.warns(WalltimeWarning, match=r"cluster.walltime = \"01:00:00\".*advised"):
        check_walltime("01:00:00", 1200.0)  # 20 min batches: allowed, but warned
    with pytest.raises(InputError) as err:
        check_walltime("00:10:00", 900.0)  # a 15 min batch cannot fit a 10 min job
    msg = str(err.value)
    assert msg.startswith('cluster.walltime = "00:10:00": too short') and "\n" not in msg
    least, advised = re.findall(r"\d\d:\d\d:00", msg.split("allowed:")[1])
    with pytest.warns(WalltimeWarning):
        check_walltime(least, 900.0)  # the minimum it names is indeed enough
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check_walltime(advised, 900.0)  # and the advised one draws no warning


# -- job scripts generated by dask-jobqueue --------------------------------------------------


def _directives(script: str, prefix: str) -> list[str]:
    return [ln[len(prefix) :].strip() for ln in script.splitlines() if ln.startswith(prefix)]


def _worker_args(script: str) -> dict[str, str]:
    line = next(ln for ln in script.splitlines() if "distributed.cli.dask_worker" in ln)
    words = line.split()
    return {w: (words[i + 1] if i + 1 < len(words) else "") for i, w in enumerate(words) if w.startswith("--")}


SLURM_TABLE = {
    "kind": "slurm",
    "queue": "long",
    "account": "astro42",
    "cores": 4,
    "memory": "16GB",
    "walltime": "1-12:00:00",
    "jobs": 2,
    "interface": "ib0",
    "job_script_prologue": ["module load python/3.11", "export OMP_NUM_THREADS=1"],
    "job_extra_directives": ["--qos=normal"],
    "python": "/opt/venv/bin/python",
}


def test_slurm_job_script(tmp_path):
    c = ClusterConfig.from_table(dict(SLURM_TABLE, log_directory=str(tmp_path / "logs")))
    script = job_script(c)
    d = _directives(script, "#SBATCH")
    assert "-p long" in d and "-A astro42" in d and "--cpus-per-task=4" in d
    assert "-t 1-12:00:00" in d and "--qos=normal" in d and "-J scatter-pop" in d
    # 16 GB = 1.6e10 bytes = 14.9 GiB -> SLURM's --mem rounds up in powers of 1024: 15G
    assert "--mem=15G" in d
    assert f"-o {tmp_path / 'logs'}/scatter-pop-%J.out" in d
    lines = script.splitlines()
    worker = next(i for i, ln in enumerate(lines) if "dask_worker" in ln)
    assert lines.index("module load python/3.11") < worker
    assert lines.index("export OMP_NUM_THREADS=1") < worker
    assert lines[worker].startswith("/opt/venv/bin/python -m distributed.cli.dask_worker")
    args = _worker_args(script)
    assert args["--nworkers"] == "4" and args["--nthreads"] == "1" and "--nanny" in args
    assert args["--interface"] == "ib0"
    lifetime, stagger = (float(args[k].rstrip("s")) for k in ("--lifetime", "--lifetime-stagger"))
    assert lifetime + stagger <= 36 * 3600 - 60 and lifetime - stagger > 0.8 * 36 * 3600


def test_pbs_job_script():
    c = ClusterConfig.from_table(
        {
            "kind": "pbs",
            "queue": "workq",
            "account": "astro42",
            "cores": 8,
            "memory": "32GB",
            "walltime": "2-06:00:00",
            "job_script_prologue": ["module load openmpi"],
        }
    )
    script = job_script(c)
    d = _directives(script, "#PBS")
    assert "-q workq" in d and "-A astro42" in d and "-N scatter-pop" in d
    assert "-l walltime=54:00:00" in d  # PBS has no day field
    assert "-l select=1:ncpus=8:mem=30GB" in d  # 32e9 B = 29.8 GiB, rounded up
    assert "module load openmpi" in script.splitlines()
    assert _worker_args(script)["--nworkers"] == "8"
    c = ClusterConfig.from_table({"kind": "pbs", "resource_spec": "nodes=1:ppn=8"})
    assert "-l nodes=1:ppn=8" in _directives(job_script(c), "#PBS")


def test_job_script_defaults_use_this_interpreter_and_this_checkout():
    script = job_script(ClusterConfig.from_table({"kind": "slurm"}))
    assert f"{sys.executable} -m distributed.cli.dask_worker" in script
    import scatter_pop

    root = os.path.dirname(os.path.dirname(os.path.abspath(scatter_pop.__file__)))
    assert f"export PYTHONPATH={root}" in script


def test_job_script_refuses_what_it_cannot_do():
    with pytest.raises(InputError, match=r'^cluster.kind = "local": a job script exists only'):
        job_script(ClusterConfig())
    with pytest.raises(InputError, match=r'^cluster.walltime = "00:05:00": too short'):
        job_script(ClusterConfig.from_table({"kind": "slurm", "walltime": "00:05:00"}), longest_task_seconds=600)


# -- local cluster ----------------------------------------------------------------------------


@pytest.mark.slow
def test_local_connect_runs_tasks_on_two_worker_processes():
    with connect(ClusterConfig(dashboard_port=0), workers=2) as client:
        info = client.scheduler_info()["workers"]
        assert len(info) == 2 and all(w["nthreads"] == 1 for w in info.values())
        assert client.dashboard_link.startswith("http")
        pids = set(client.gather(client.map(lambda i: os.getpid(), range(8), pure=False)))
        assert os.getpid() not in pids and 1 <= len(pids) <= 2
        assert sum(client.gather(client.map(lambda x: x * x, range(10)))) == 285
        saturation, failures = client.run_on_scheduler(
            lambda: (
                dask.config.get("distributed.scheduler.worker-saturation"),
                dask.config.get("distributed.scheduler.allowed-failures"),
            )
        )
        assert (saturation, failures) == (1.0, 5)
    assert client.status == "closed"


@pytest.mark.slow
def test_address_kind_attaches_to_a_separately_started_scheduler(tmp_path):
    """As dask-mpi or a hand-started `dask scheduler` would provide: scheduler file + worker."""
    sched_file = tmp_path / "scheduler.json"
    env = dict(
        os.environ,
        DASK_DISTRIBUTED__SCHEDULER__WORKER_SATURATION="1.0",
        DASK_DISTRIBUTED__SCHEDULER__ALLOWED_FAILURES="5",
    )
    py = sys.executable
    sched = subprocess.Popen(
        [
            py,
            "-m",
            "distributed.cli.dask_scheduler",
            "--no-dashboard",
            "--host",
            "127.0.0.1",
            "--port",
            "0",
            "--scheduler-file",
            str(sched_file),
        ],
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    worker = subprocess.Popen(
        [
            py,
            "-m",
            "distributed.cli.dask_worker",
            "--nthreads",
            "1",
            "--no-dashboard",
            "--scheduler-file",
            str(sched_file),
        ],
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        deadline = time.monotonic() + 30
        while not sched_file.exists() and time.monotonic() < deadline:
            time.sleep(0.1)
        with warnings.catch_warnings():
            warnings.simplefilter("error")  # configured scheduler: no settings warning
            with connect(ClusterConfig(kind="address", address=str(sched_file))) as client:
                client.wait_for_workers(1, timeout=30)
                assert client.submit(sum, [1, 2, 3]).result() == 6
                address = client.scheduler.address
        # the same scheduler by address (--scheduler), and leaving it does not stop it
        with connect(ClusterConfig(), scheduler=address) as client:
            assert client.submit(max, [4, 9]).result() == 9
        assert sched.poll() is None
    finally:
        for proc in (worker, sched):
            proc.terminate()
            proc.wait(timeout=20)


def test_address_without_scheduler_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match=r'^cluster.address = ".*missing\.json": no such'):
        with connect(ClusterConfig(kind="address", address=str(tmp_path / "missing.json"))):
            pass
    with dask.config.set({"distributed.comm.timeouts.connect": "1s"}):
        with pytest.raises(
            InputError,
            match=r'^cluster.address = "tcp://127.0.0.1:9": no Dask '
            r"scheduler answered",
        ):
            with connect(ClusterConfig(), scheduler="tcp://127.0.0.1:9"):
                pass


def test_configure_dask_sets_the_scheduler_options():
    with dask.config.set({"distributed.scheduler.worker-saturation": 1.1, "distributed.scheduler.allowed-failures": 3}):
        configure_dask()
        assert dask.config.get("distributed.scheduler.worker-saturation") == 1.0
        assert dask.config.get("distributed.scheduler.allowed-failures") == 5


@pytest.mark.slow
def test_sigterm_to_the_driver_closes_the_cluster(tmp_path):
    """SIGTERM (preemption, `kill`) unwinds connect(): its clean-up runs, exit status 143."""
    driver = textwrap.dedent("""
        import sys, time
        from scatter_pop.ensemble.cluster import ClusterConfig, connect
        try:
            with connect(ClusterConfig(dashboard_port=0), workers=1) as client:
                client.submit(int, 1).result()
                print("ready", flush=True)
                time.sleep(60)
        finally:
            print("closed", client.status, flush=True)
    """)
    proc = subprocess.Popen(
        [sys.executable, "-c", driver], stdout=subprocess.PIPE, text=True, stderr=subprocess.DEVNULL
    )
    try:
        assert proc.stdout.readline().strip() == "ready"
        proc.send_signal(signal.SIGTERM)
        out, _ = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 143
    assert out.strip() == "closed closed"


def test_docs_document_every_cluster_key():
    """docs/cluster.md has a table row for every [cluster] key (common practice)."""
    from dataclasses import fields
    from pathlib import Path

    section = (Path(__file__).resolve().parents[2] / "docs" / "cluster.md").read_text()
    for f in fields(ClusterConfig):
        assert f"| `{f.name}` |" in section, f.name


def test_sigterm_with_a_hanging_clean_up_still_ends_the_process(tmp_path):
    """Preemption sends SIGTERM and, a little later, SIGKILL (SLURM's KillWait, 30 s by default,
    from memory of the slurm.conf manual). If the clean-up after SIGTERM hangs, the driver must
    still end by itself, with exit status 143 and the resume hint."""
    script = tmp_path / "hang.py"
    script.write_text(
        textwrap.dedent("""
        import sys, time
        from scatter_pop.ensemble import cluster, stop_signals
        stop_signals.TERM_GRACE_SECONDS = 1.0
        with stop_signals.sigterm_unwinds():
            try:
                print("ready", flush=True)
                time.sleep(60)
            finally:
                time.sleep(60)          # a clean-up that never finishes
    """)
    )
    proc = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        assert proc.stdout.readline().strip() == "ready"
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=30)
    finally:
        proc.kill()
    assert proc.returncode == 143
    assert "rerun the same command to resume" in err and "Traceback" not in err


def test_every_spec_kind_has_one_module_behind_the_interface():
    """The spec's cluster.kind values and the kind modules are the same set, each a ClusterKind whose
    batch flag matches the spec's batch kinds (whose keys the spec takes)."""
    from scatter_pop.ensemble.cluster_kinds import cluster_kind, kind_names
    from scatter_pop.ensemble.cluster_kinds.base import ClusterKind
    from scatter_pop.spec.cluster_table import BATCH, KINDS

    assert set(kind_names()) == set(KINDS)
    for name in kind_names():
        kind = cluster_kind(name)
        assert isinstance(kind, ClusterKind) and kind.name == name
        assert kind.batch == (name in BATCH)
        assert (kind.submit_command is not None) == kind.batch
