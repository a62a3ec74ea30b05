"""Workers that die: a worker SIGKILLed mid-task, and a system that kills its worker every time.

Real processes throughout: a local Dask cluster of worker processes (with nannies that restart
them), killed with SIGKILL.  Expected behaviour follows Dask's documented semantics
(distributed docs, "Scheduling state" / ``allowed-failures``): a task whose worker dies is rerun
elsewhere until it has seen ``allowed-failures`` + 1 deaths, then it fails with ``KilledWorker``.
The physics of recomputed systems is compared bit for bit with an undisturbed computation.
"""

from __future__ import annotations

import math
import os
import signal
import threading
import time

import numpy as np
import pytest
from ensemble_helpers import assert_physics_equal, part_files, reference, spec_text, wait_for

import scatter_pop
from scatter_pop.cli.status import status_lines
from scatter_pop.engine.initial_conditions import draw_system
from scatter_pop.engine.integrate import integrate_system
from scatter_pop.engine.outcome import EndReason
from scatter_pop.ensemble.cluster import ALLOWED_FAILURES, ClusterConfig, connect
from scatter_pop.ensemble.worker import FAULT_ENV
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.run_folder import RunFolder, read_parts
from scatter_pop.store.schema import FILL_INT, records_to_dataset

pytestmark = pytest.mark.slow


def every_index_exactly_once(out, n):
    spec = parse_spec((out / "spec.toml").read_text())
    parts, bad = read_parts(RunFolder(out), spec)
    held = np.concatenate([p.indices for p in parts])
    assert bad == [] and np.array_equal(np.sort(held), np.arange(n)) and held.size == n


def test_worker_killed_mid_task_loses_and_duplicates_nothing(tmp_path):
    n, t_end = 4, 10000.0  # ~1 s per system: long enough to be caught running
    spec = parse_spec(spec_text(systems=n, end_time=t_end))
    out, result, errors = tmp_path / "run", {}, []
    with connect(ClusterConfig(dashboard_port=0), workers=2) as client:

        def drive():
            try:
                result["ds"] = scatter_pop.run_ensemble(
                    spec, out=out, client=client, batch_size=1, progress_interval=60, log=lambda s: None
                )
            except Exception as exc:  # noqa: BLE001 -- handed to the main thread
                errors.append(exc)

        driver = threading.Thread(target=drive)
        driver.start()
        wait_for(lambda: part_files(out), 120, "a first part file")
        pids = client.run(os.getpid)

        def running_task():
            busy = {w: keys for w, keys in client.processing().items() if keys}
            return next(iter(busy.items()), None)

        worker, keys = wait_for(running_task, 60, "a worker running a task")
        time.sleep(0.2)
        if list(client.processing().get(worker, ())) == list(keys):
            os.kill(pids[worker], signal.SIGKILL)
            killed_key = keys[0]
        else:  # it finished in between: take the next one
            worker, keys = wait_for(running_task, 60, "a worker running a task")
            os.kill(pids[worker], signal.SIGKILL)
            killed_key = keys[0]
        driver.join(timeout=300)
    assert not driver.is_alive() and errors == []
    ds = result["ds"]
    every_index_exactly_once(out, n)
    assert ds["system"].values.tolist() == list(range(n))
    victim = int(killed_key.split("-")[1])  # key: integrate-<first>-<last>-...
    assert int(ds["attempts"].sel(system=victim)) == 2  # started twice: killed once, then done
    assert (ds["end_reason"].values != EndReason.FAILED).all()
    direct = records_to_dataset([integrate_system(spec, victim)], spec.planets.count)
    assert_physics_equal(ds.sel(system=[victim]), direct)


def test_system_that_kills_every_worker_is_isolated_and_recorded_as_failed(tmp_path, monkeypatch):
    n, poison = 10, 5
    monkeypatch.setenv(FAULT_ENV, str(poison))  # test-only hook read inside the worker task
    spec = parse_spec(spec_text(systems=n))
    lines = []
    with connect(ClusterConfig(dashboard_port=0), workers=2) as client:
        # scatter-pop runs with allowed-failures = ALLOWED_FAILURES (5); each death costs a worker
        # restart (~2 s here), so this test lowers the bound on its own scheduler to 1
        assert client.run_on_scheduler(lambda dask_scheduler: dask_scheduler.allowed_failures) == ALLOWED_FAILURES
        client.run_on_scheduler(lambda dask_scheduler: setattr(dask_scheduler, "allowed_failures", 1))
        ds = scatter_pop.run_ensemble(
            spec, out=tmp_path / "run", client=client, batch_size=4, progress_interval=60, log=lines.append
        )
    monkeypatch.delenv(FAULT_ENV)
    deaths = 1 + 1
    assert f"systems 4-7: workers died {deaths} times running it; retrying each system alone" in lines
    assert f"system {poison}: workers died {deaths} times running it; recorded as failed" in lines
    every_index_exactly_once(tmp_path / "run", n)
    assert part_files(tmp_path / "run") == ["part_00000000_00000003.nc"] + [
        f"part_{i:08d}_{i:08d}.nc" for i in range(4, 8)
    ] + ["part_00000008_00000009.nc"]

    bad = ds.sel(system=poison)
    assert int(bad["end_reason"]) == EndReason.FAILED and int(bad["attempts"]) == deaths
    ic = draw_system(spec, poison)
    assert int(bad["seed"]) == ic.seed
    for var, values in (
        ("mass_initial", ic.mass),
        ("a_initial", ic.a),
        ("e_initial", ic.e),
        ("inc_initial", ic.inc),
        ("radius_initial", ic.radius),
    ):
        np.testing.assert_array_equal(bad[var].values, np.array(values), err_msg=var)
    for var in ("mass_final", "a_final", "e_final", "inc_final", "q_final", "t_fate"):
        assert np.isnan(bad[var].values).all(), var
    assert (bad["fate"].values == FILL_INT).all() and int(bad["n_survivors"]) == FILL_INT
    assert math.isnan(float(bad["t_end"]))

    others = [i for i in range(n) if i != poison]
    ref = reference(systems=n)
    assert_physics_equal(ds, ref, systems=others)
    status = status_lines(tmp_path / "run")
    assert f"failed       1: systems {poison} (compute again with scatter-pop run SPEC --retry-failed)" in status

    # once the cause is gone, --retry-failed computes it and the run equals the undisturbed one
    again = scatter_pop.run_ensemble(
        spec, out=tmp_path / "run", workers=1, retry_failed=True, progress_interval=60, log=lines.append
    )
    assert_physics_equal(again, ref)
