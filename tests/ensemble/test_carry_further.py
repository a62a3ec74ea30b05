"""Carrying a run folder to a later end time: a run (``scatter-pop run`` / ``run_ensemble``) on the same folder with a raised
``integration.end_time`` continues the unsettled systems from their kept final state.

The promise checked here is the project's reproducibility promise (each system depends only on the
spec's lineage and its index): the carried run equals, bit for bit in every physics variable, each
system integrated directly with the later end time from the start; settled systems are not touched
(their rows, wall-clock time included, stay as they were).  The set-up is the invented tiny spec of
tests/ensemble_helpers.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from ensemble_helpers import assert_physics_equal, reference, spec_text

import scatter_pop.ensemble.plan as plan_module
from scatter_pop.cli.main import main
from scatter_pop.cli.status import status_lines
from scatter_pop.engine.outcome import EndReason
from scatter_pop.ensemble.cluster import ClusterConfig, connect
from scatter_pop.ensemble.driver import run_ensemble
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.run_folder import open_ensemble

pytestmark = pytest.mark.slow

N, T1, T2 = 8, 600.0, 1500.0
EXTRA = "check_orbits = 3.0\n"


@pytest.fixture(scope="module")
def carried(tmp_path_factory):
    root = tmp_path_factory.mktemp("carried")
    out = root / "run"
    with connect(ClusterConfig(dashboard_port=0), workers=1) as client:
        before = run_ensemble(
            parse_spec(spec_text(systems=N, end_time=T1, extra=EXTRA)), out=out, client=client, log=lambda _: None
        )
        status = status_lines(out)
        status.append("kept " + " ".join(sorted(p.name for p in (out / "checkpoints").glob("system_*.bin"))))
        from scatter_pop.ensemble.driver import EnsembleRun

        later = parse_spec(spec_text(systems=N, end_time=T2, extra=EXTRA))
        status.append("plan " + EnsembleRun(later, out, client=client, log=lambda _: None).plan().summary())
        lines = []
        with pytest.MonkeyPatch.context() as mp:  # several continuation tasks rewriting the same part
            mp.setattr(plan_module, "REDO_BATCH", 3)
            after = run_ensemble(
                parse_spec(spec_text(systems=N, end_time=T2, extra=EXTRA)), out=out, client=client, log=lines.append
            )
    return out, before, status, "\n".join(lines), after


def test_first_run_keeps_the_final_state_of_every_unsettled_system(carried):
    out, before, status, _, _ = carried
    assert_physics_equal(before, reference(N, T1, EXTRA))
    stopped = before["system"].values[before["end_reason"].values == int(EndReason.END_TIME)]
    settled = before["system"].values[before["end_reason"].values == int(EndReason.ONE_PLANET)]
    assert stopped.size >= 4 and settled.size >= 1
    kept = next(x for x in status if x.startswith("kept ")).split()[1:]  # after the first run
    assert kept == [f"system_{i:08d}.bin" for i in stopped]
    line = next(x for x in status if x.startswith("carry on"))
    assert f"{stopped.size} systems stopped at the end time would continue" in line
    assert "integration.end_time (now 600 yr)" in line and "x2:" in line
    assert any(x.startswith("settlement   ") for x in status)
    plan = next(x for x in status if x.startswith("plan "))  # what --dry-run prints before the raised run
    assert f"{stopped.size} systems carried from their end time to the later one" in plan and "0 new" in plan


def test_raised_end_time_equals_the_later_run_from_the_start(carried):
    _, before, _, stdout, after = carried
    assert "systems carried from their end time to the later one" in stdout
    assert_physics_equal(after, reference(N, T2, EXTRA))
    carried = before["end_reason"].values == int(EndReason.END_TIME)
    assert np.all(after["t_limit"].values[carried] == T2) and np.all(after["t_limit"].values[~carried] == T1)


def test_settled_systems_are_not_touched(carried):
    _, before, _, _, after = carried
    settled = before["system"].values[before["end_reason"].values == int(EndReason.ONE_PLANET)]
    for name in before.data_vars:  # every variable, the wall-clock time included
        np.testing.assert_array_equal(
            before[name].sel(system=settled).values, after[name].sel(system=settled).values, err_msg=name
        )


def test_lowered_end_time_or_another_change_is_refused_and_nothing_changes(carried, tmp_path, capsys):
    out, _, _, _, after = carried
    stamp = (out / "ensemble.nc").stat().st_mtime_ns
    for text, named in (
        (spec_text(systems=N, end_time=T1, extra=EXTRA), "integration.end_time = 600.0"),
        (spec_text(systems=N, end_time=T2, extra=EXTRA + "epsilon = 1e-8\n"), "integration.epsilon"),
        (
            spec_text(systems=N, end_time=T2, extra=EXTRA).replace("end_time = 1500.0", "end_orbits = 500.0"),
            "end_orbits",
        ),
    ):
        spec = tmp_path / "other.toml"
        spec.write_text(text)
        assert main(["run", str(spec), "--out", str(out), "--workers", "1"]) == 2  # refused before computing
        err = capsys.readouterr().err
        assert len(err.strip().splitlines()) == 1 and named in err and "Traceback" not in err, err
    assert (out / "ensemble.nc").stat().st_mtime_ns == stamp
    assert_physics_equal(open_ensemble(out), after)
