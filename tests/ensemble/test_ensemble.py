"""The Dask driver with real integrations: reproducibility, growing a run, capped systems.

The promise checked here (issue 3): every physics variable of ensemble.nc (schema.PHYSICS_VARIABLES)
is bit-for-bit the same whatever the number of workers, the batch size, or interruptions and
continuations -- because each system draws from its own seed (SeedSequence(run seed, index);
O'Neill 2015, PCG / numpy SeedSequence design) and REBOUND restarts from a binary snapshot
continue bit-identically (Rein & Tamayo 2017, MNRAS 467, 2377: SimulationArchive exact restarts).
The reference each run is compared with is the engine (``integrate_system``) called directly in
the test process, one system after another, with no Dask and no run folder.
"""

from __future__ import annotations

import numpy as np
import pytest
from ensemble_helpers import assert_physics_equal, part_files, reference, spec_text

import scatter_pop
from scatter_pop.engine.initial_conditions import draw_system
from scatter_pop.engine.outcome import EndReason
from scatter_pop.ensemble.cluster import ClusterConfig, connect
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.schema import validate_dataset

pytestmark = pytest.mark.slow

N, T_END = 12, 1000.0
QUIET = dict(progress_interval=60.0, log=lambda line: None)


@pytest.fixture(scope="module")
def ref():
    return reference(systems=N, end_time=T_END)


@pytest.fixture(scope="module")
def client():
    with connect(ClusterConfig(dashboard_port=0), workers=2) as c:
        yield c


def test_default_run_holds_every_system_as_the_engine_computes_it(ref, tmp_path):
    """Automatic batches on a cluster the driver starts itself (spec's [cluster]: local)."""
    spec = parse_spec(spec_text(systems=N, end_time=T_END))
    ds = scatter_pop.run_ensemble(spec, out=tmp_path / "run", workers=2, **QUIET)
    validate_dataset(ds)
    assert ds["system"].values.tolist() == list(range(N))
    assert not np.isin(ds["end_reason"].values, [EndReason.CAPPED, EndReason.FAILED]).any()
    assert (ds["attempts"].values == 1).all()
    assert [int(s) for s in ds["seed"].values] == [draw_system(spec, i).seed for i in range(N)]
    assert_physics_equal(ds, ref)


def test_one_worker_with_batches_of_one_gives_the_same_physics(ref, tmp_path):
    spec = parse_spec(spec_text(systems=N, end_time=T_END))
    with connect(ClusterConfig(dashboard_port=0), workers=1) as one:
        assert len(one.nthreads()) == 1
        ds = scatter_pop.run_ensemble(spec, out=tmp_path / "run", client=one, batch_size=1, **QUIET)
    assert len(part_files(tmp_path / "run")) == N
    assert_physics_equal(ds, ref)


def test_two_workers_with_batches_of_seven_give_the_same_physics(ref, tmp_path, client):
    spec = parse_spec(spec_text(systems=N, end_time=T_END))
    ds = scatter_pop.run_ensemble(spec, out=tmp_path / "run", client=client, batch_size=7, **QUIET)
    assert part_files(tmp_path / "run") == ["part_00000000_00000006.nc", "part_00000007_00000011.nc"]
    assert_physics_equal(ds, ref)
    assert_physics_equal(scatter_pop.open_ensemble(tmp_path / "run"), ref)


def test_growing_the_run_computes_only_the_new_systems(ref, tmp_path, client):
    out = tmp_path / "run"
    small = parse_spec(spec_text(systems=5, end_time=T_END))
    scatter_pop.run_ensemble(small, out=out, client=client, batch_size=2, **QUIET)
    before = {p: (out / "parts" / p).stat().st_mtime_ns for p in part_files(out)}
    lines = []
    ds = scatter_pop.run_ensemble(
        parse_spec(spec_text(systems=N, end_time=T_END)),
        out=out,
        client=client,
        batch_size=2,
        progress_interval=60.0,
        log=lines.append,
    )
    assert any(f"5/{N} systems on disk; computing {N - 5} new systems" in line for line in lines)
    assert {p: (out / "parts" / p).stat().st_mtime_ns for p in before} == before
    assert_physics_equal(ds, ref)


def test_capped_systems_continue_from_checkpoints_bit_identically(tmp_path, client):
    # short check intervals so that the tiny cap stops systems part-way (the cap is tested after
    # each interval); the uncapped reference has the same intervals
    chunks = "check_orbits = 10.0\n"
    uncapped = reference(systems=6, end_time=T_END, extra=chunks)
    out = tmp_path / "run"
    capped_spec = parse_spec(spec_text(systems=6, end_time=T_END, extra=chunks + "wall_seconds_max = 0.005\n"))
    first = scatter_pop.run_ensemble(capped_spec, out=out, client=client, batch_size=1, **QUIET)
    capped = first["system"].values[first["end_reason"].values == EndReason.CAPPED]
    assert capped.size >= 3
    assert sorted(p.name for p in (out / "checkpoints").iterdir()) == [f"system_{i:08d}.bin" for i in capped]
    assert (first["t_end"].sel(system=capped).values < T_END).all()

    # --extend: another 0.005 s each; time moves on, nothing else is recomputed
    second = scatter_pop.run_ensemble(capped_spec, out=out, client=client, batch_size=1, extend=True, **QUIET)
    done_before = [i for i in range(6) if i not in capped]
    assert_physics_equal(second, first, systems=done_before)
    assert (second["t_end"].sel(system=capped).values > first["t_end"].sel(system=capped).values).all()
    assert (second["wall_seconds"].sel(system=capped).values > first["wall_seconds"].sel(system=capped).values).all()

    # a larger cap in the same folder: capped systems continue to the end by themselves
    lines = []
    final = scatter_pop.run_ensemble(
        parse_spec(spec_text(systems=6, end_time=T_END, extra=chunks)),
        out=out,
        client=client,
        progress_interval=60.0,
        log=lines.append,
    )
    assert not (final["end_reason"].values == EndReason.CAPPED).any()
    # what is left: the final states of the systems stopped at the end time (a later end continues them)
    stopped = final["system"].values[final["end_reason"].values == EndReason.END_TIME]
    assert sorted(p.name for p in (out / "checkpoints").iterdir()) == [f"system_{i:08d}.bin" for i in stopped]
    assert_physics_equal(final, uncapped)


def test_run_ensemble_accepts_a_spec_file_and_default_folder(tmp_path, client):
    path = tmp_path / "tiny.toml"
    path.write_text(spec_text(systems=2))
    ds = scatter_pop.run_ensemble(path, client=client, **QUIET)
    assert (tmp_path / "tiny_out" / "ensemble.nc").is_file() and ds.sizes["system"] == 2
    assert (tmp_path / "tiny_out" / "spec.toml").read_text() == path.read_text()


def test_system_whose_integration_raises_is_isolated_then_retried(tmp_path, client):
    out = tmp_path / "run"
    scatter_pop.run_ensemble(parse_spec(spec_text(systems=2)), out=out, client=client, **QUIET)
    (out / "checkpoints" / "system_00000002.bin").write_bytes(b"not a checkpoint")  # corrupt file
    spec = parse_spec(spec_text(systems=4))
    lines = []
    ds = scatter_pop.run_ensemble(spec, out=out, client=client, batch_size=2, progress_interval=60, log=lines.append)
    assert "systems 2-3: InputError: checkpoint" in "\n".join(lines)
    assert any(
        line.startswith("system 2: InputError: checkpoint")
        and line.endswith("recorded as failed (traceback in failures.log)")
        for line in lines
    )
    assert ds["end_reason"].values.tolist()[2] == EndReason.FAILED
    log = (out / "failures.log").read_text()
    assert log.startswith("--- system 2 (") and "Traceback" in log and "read_checkpoint" in log
    ref = reference(systems=4)
    assert_physics_equal(ds, ref, systems=[0, 1, 3])
    (out / "checkpoints" / "system_00000002.bin").unlink()  # the cause removed
    again = scatter_pop.run_ensemble(spec, out=out, client=client, retry_failed=True, **QUIET)
    assert_physics_equal(again, ref)


def test_many_small_parts_are_consolidated_without_changing_anything(ref, tmp_path, client, monkeypatch):
    import scatter_pop.ensemble.plan as plan

    monkeypatch.setattr(plan, "CONSOLIDATE_PARTS", 4)
    spec = parse_spec(spec_text(systems=N, end_time=T_END))
    ds = scatter_pop.run_ensemble(spec, out=tmp_path / "run", client=client, batch_size=1, **QUIET)
    files = part_files(tmp_path / "run")
    assert len(files) < N // 2  # 12 single-system batches, merged by fours
    assert_physics_equal(ds, ref)
    assert_physics_equal(scatter_pop.open_ensemble(tmp_path / "run", partial=True), ref)
