"""Shared pieces of the ensemble-driver tests (helper module, not a test file).

* ``TINY_TEXT``: a small unstable ensemble (two Jupiter-mass planets 2.5 mutual Hill radii apart,
  inside the Gladman 1993 Hill-stability boundary of 2*sqrt(3) ~ 3.46, so they scatter), short end
  time; ``spec_text(systems=..., ...)`` varies it.
* ``reference(...)``: what every run must hold -- each system integrated by the engine called
  directly in the test process (no Dask, no run folder), computed once per session.
* ``run_cli(...)``: ``scatter-pop`` as a real subprocess (its own process group, so a test can
  SIGKILL the driver and then its whole group — processes this test started).
* ``ensure_program``: a Debian program for the tests, installed with apt-get when missing (root
  only; with CI set a failure to install fails the test, elsewhere it skips).
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from scatter_pop.store.schema import PHYSICS_VARIABLES

__all__ = [
    "TINY_TEXT",
    "spec_text",
    "write_spec",
    "reference",
    "run_cli",
    "start_cli",
    "kill_group",
    "assert_physics_equal",
    "ensure_program",
    "SCATTER_POP",
    "part_files",
    "wait_for",
]

ROOT = Path(__file__).resolve().parents[1]
SCATTER_POP = str(Path(sys.executable).with_name("scatter-pop"))

TINY_TEXT = """\
# Test ensemble (invented): two Jupiter-mass planets packed inside the Hill-stability boundary.
[run]
name = "tiny"
seed = 12345
systems = 4

[star]
mass = 1.0
radius = 1.0

[planets]
count = 2
mass = 1.0
a_inner = 3.0
spacing = 2.5
e_sigma = 0.01
inc_sigma = 0.5

[cluster]
dashboard_port = 0

[integration]
integrator = "ias15"
end_time = 300.0
"""


def spec_text(systems: int = 4, end_time: float = 300.0, extra: str = "", seed: int = 12345) -> str:
    """TINY_TEXT with another number of systems / end time / seed, plus extra [integration] lines."""
    text = (
        TINY_TEXT.replace("systems = 4", f"systems = {systems}")
        .replace("end_time = 300.0", f"end_time = {end_time!r}")
        .replace("seed = 12345", f"seed = {seed}")
    )
    return text + extra


def write_spec(path: Path, **kw) -> Path:
    path.write_text(spec_text(**kw))
    return path


def part_files(run: Path) -> list[str]:
    parts = run / "parts"
    return sorted(p.name for p in parts.glob("part_*.nc")) if parts.is_dir() else []


def assert_physics_equal(a, b, systems=None) -> None:
    """Every physics variable bit for bit (NaN equal to NaN), optionally over some systems."""
    if systems is not None:
        a, b = a.sel(system=systems), b.sel(system=systems)
    np.testing.assert_array_equal(a["system"].values, b["system"].values)
    for name in PHYSICS_VARIABLES:
        np.testing.assert_array_equal(a[name].values, b[name].values, err_msg=name)


_REFERENCE: dict = {}


def reference(systems: int, end_time: float = 300.0, extra: str = ""):
    """What every run of spec_text(systems, end_time, extra) must hold: each system integrated by
    ``integrate_system`` called directly in this process (no Dask, no run folder), as a dataset.
    Computed once per session."""
    key = (systems, end_time, extra)
    if key not in _REFERENCE:
        from scatter_pop import parse_spec
        from scatter_pop.engine.integrate import integrate_system
        from scatter_pop.store.schema import records_to_dataset

        spec = parse_spec(spec_text(systems=systems, end_time=end_time, extra=extra))
        records = [integrate_system(spec, i) for i in range(systems)]
        _REFERENCE[key] = records_to_dataset(records, spec.planets.count)
    return _REFERENCE[key]


def start_cli(*args, env=None, cwd=None) -> subprocess.Popen:
    """``scatter-pop ARGS`` as a subprocess in its own process group (stdout/stderr piped)."""
    full_env = dict(os.environ, **(env or {}))
    return subprocess.Popen(
        [SCATTER_POP, *map(str, args)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=full_env,
        cwd=cwd,
        start_new_session=True,
    )


def run_cli(*args, env=None, timeout=120.0) -> subprocess.CompletedProcess:
    proc = start_cli(*args, env=env)
    try:
        out, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        kill_group(proc)
        raise
    return subprocess.CompletedProcess(proc.args, proc.returncode, out, err)


def kill_group(proc: subprocess.Popen) -> tuple[str, str]:
    """SIGKILL the process group this test started (driver, nannies, workers); its (stdout, stderr)."""
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    return proc.communicate(timeout=30)


def wait_for(predicate, timeout: float, what: str, poll: float = 0.05):
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout:
        value = predicate()
        if value:
            return value
        time.sleep(poll)
    raise AssertionError(f"timed out after {timeout} s waiting for {what}")


def ensure_program(program: str, package: str) -> str:
    """Path of ``program``; installs Debian ``package`` with apt-get if it is missing."""
    found = shutil.which(program)
    if found:
        return found
    problem = None
    if os.geteuid() != 0 or shutil.which("apt-get") is None:
        problem = f"{program} missing and apt-get unavailable (need root) to install {package}"
    else:
        env = dict(os.environ, DEBIAN_FRONTEND="noninteractive")
        cmd = ["apt-get", "-o", "DPkg::Lock::Timeout=300", "install", "-y", "--no-install-recommends", package]
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=900, env=env)
        if proc.returncode != 0:  # usually no package lists yet
            subprocess.run(
                ["apt-get", "-o", "DPkg::Lock::Timeout=300", "update"],
                capture_output=True,
                text=True,
                timeout=900,
                env=env,
            )
            proc = subprocess.run(cmd, capture_output=True, text=True, timeout=900, env=env)
        found = shutil.which(program)
        if not found:
            problem = f"apt-get install {package} failed: {proc.stderr.strip().splitlines()[-1:]}"
    if problem:
        if os.environ.get("CI"):
            pytest.fail(problem)
        pytest.skip(problem)
    return found
