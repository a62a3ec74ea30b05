"""The PBS path: the job script for a spec's PBS settings, and workers started through qsub.

Debian has no PBS server.  The package ``slurm-wlm-torque`` provides ``qsub``/``qstat``/``qdel``
wrappers that translate PBS/Torque submissions to the real single-node SLURM of
tests/slurm_harness.py; ``dask_jobqueue.PBSCluster`` submits through them.  This checks our job
script, its submission and its cancellation, not a real PBS server.

Reference for the PBS directives: PBS Professional Reference Guide, ``qsub`` (Altair; from
memory): ``-N`` job name, ``-q`` queue, ``-A`` account, ``-l select=1:ncpus=N:mem=M``,
``-l walltime=hh:mm:ss`` (no day field; hours may exceed 24).
"""

from __future__ import annotations

import os
import subprocess
from pathlib import Path

import pytest
from slurm_harness import PARTITION, squeue_jobs, wait_for_no_jobs

from scatter_pop.ensemble.cluster import connect, job_script
from scatter_pop.spec.reader import parse_spec

HERE = os.path.dirname(os.path.abspath(__file__))  # this file's folder (workers unpickle its tasks)
TESTS = os.path.dirname(HERE)  # tests/: data and helper modules
TINY = Path(TESTS, "data", "tiny.toml").read_text()

PBS_SPEC = (
    TINY
    + """
[cluster]
kind = "pbs"
queue = "workq"
account = "astro42"
cores = 4
memory = "12GB"
walltime = "1-06:00:00"
maximum_jobs = 8
job_script_prologue = ["module load python/3.11", "source $HOME/venvs/sp/bin/activate"]
job_extra_directives = ["-m n"]
python = "python3"
"""
)


def _directives(script: str) -> list[str]:
    return [ln[len("#PBS") :].strip() for ln in script.splitlines() if ln.startswith("#PBS")]


def test_pbs_job_script_from_the_spec():
    spec = parse_spec(PBS_SPEC, source="pbs.toml")
    config = spec.cluster
    assert (config.kind, config.minimum_jobs, config.maximum_jobs) == ("pbs", 1, 8)
    script = job_script(config)
    d = _directives(script)
    assert d[:3] == ["-N scatter-pop", "-q workq", "-A astro42"]
    # 12 GB = 1.2e10 B = 11.2 GiB -> dask-jobqueue rounds up to whole GiB and writes "GB"
    assert "-l select=1:ncpus=4:mem=12GB" in d
    assert "-l walltime=30:00:00" in d  # 1 day 6 h, as hours
    assert "-m n" in d
    lines = script.splitlines()
    worker = next(i for i, ln in enumerate(lines) if "distributed.cli.dask_worker" in ln)
    assert lines.index("module load python/3.11") < worker
    assert lines.index("source $HOME/venvs/sp/bin/activate") < worker
    words = lines[worker].split()
    assert words[:3] == ["python3", "-m", "distributed.cli.dask_worker"]
    assert words[words.index("--nworkers") + 1] == "4" and words[words.index("--nthreads") + 1] == "1"
    lifetime = float(words[words.index("--lifetime") + 1].rstrip("s"))
    stagger = float(words[words.index("--lifetime-stagger") + 1].rstrip("s"))
    assert lifetime + stagger <= 30 * 3600 - 60


def _job_id(i):
    import os
    import time

    time.sleep(0.2)
    return i, os.environ.get("SLURM_JOB_ID")


@pytest.mark.slurm
@pytest.mark.slow
def test_workers_start_through_qsub_and_qdel_ends_them(slurm, tmp_path, monkeypatch):
    # The Torque wrappers write the job's .o/.e files into the submitting folder,
    # whatever the PBS -o/-e directives say: submit from tmp_path, not the checkout.
    monkeypatch.chdir(tmp_path)
    text = (
        TINY
        + f"""
[cluster]
kind = "pbs"
queue = "{PARTITION}"
memory = "1GB"
walltime = "00:30:00"
jobs = 1
interface = "lo"
dashboard_port = 0
log_directory = "{tmp_path / "logs"}"
job_script_prologue = ["export PYTHONPATH={HERE}:{TESTS}${{PYTHONPATH:+:$PYTHONPATH}}"]
"""
    )
    config = parse_spec(text, source="pbs-local.toml").cluster
    with connect(config) as client:
        client.wait_for_workers(1, timeout=60)
        jobs = squeue_jobs()
        assert len(jobs) == 1 and jobs[0][1] == "scatter-pop" and jobs[0][2] == "RUNNING"
        job_id = jobs[0][0]
        qstat = subprocess.run(["qstat"], capture_output=True, text=True, timeout=20)
        assert qstat.returncode == 0 and job_id in qstat.stdout  # the PBS view of the job
        results = client.gather(client.map(_job_id, range(4), pure=False))
        assert results == [(i, job_id) for i in range(4)]  # run inside that job
    assert wait_for_no_jobs(20.0) == []  # qdel cancelled it
