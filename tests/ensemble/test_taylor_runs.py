"""The taylor back end (heyoka batch mode) through the Dask driver: the reproducibility promise.

Every physics variable of ensemble.nc (schema.PHYSICS_VARIABLES) must be bit for bit the same whatever
the workers, the batch size (so the companions a system shares its SIMD lanes with), interruptions and
continuations.  It rests on each system's own seed (SeedSequence(run seed, index); O'Neill 2015, PCG /
numpy SeedSequence design) and on a lane's steps depending only on its own state and target time
(heyoka's per-lane step control, Biscani & Izzo 2021, MNRAS 504, 2614; checked here rather than
assumed).  The reference is each system integrated alone by ``integrate_system`` in this process
(padded in a full batch), with no Dask and no run folder.
"""

from __future__ import annotations

import numpy as np
import pytest
from ensemble_helpers import assert_physics_equal, part_files, spec_text

import scatter_pop
from scatter_pop.engine.integrate import integrate_system
from scatter_pop.engine.outcome import EndReason
from scatter_pop.ensemble.cluster import ClusterConfig, connect
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.schema import records_to_dataset, validate_dataset

pytest.importorskip("heyoka")
pytestmark = pytest.mark.slow

N, T_END = 12, 2000.0
# a small ejection distance and short check intervals make planets leave (mergers, ejections, one
# planet left, Hill-stable pairs) so that lanes are refilled and companions change mid-run
EXTRA = "ejection_distance = 25.0\ncheck_orbits = 20.0\n"
QUIET = dict(progress_interval=60.0, log=lambda line: None)


def taylor_text(systems=N, extra=EXTRA, end_time=T_END) -> str:
    return spec_text(systems=systems, end_time=end_time, extra=extra).replace(
        'integrator = "ias15"', 'integrator = "taylor"'
    )


def alone(text: str):
    spec = parse_spec(text)
    return records_to_dataset([integrate_system(spec, i) for i in range(spec.run.systems)], spec.planets.count)


@pytest.fixture(scope="module")
def ref():
    return alone(taylor_text())


@pytest.fixture(scope="module")
def client():
    with connect(ClusterConfig(dashboard_port=0), workers=2) as c:
        yield c


def test_the_set_up_loses_planets_on_the_way(ref):
    # only then is sharing lanes with companions a test: systems leave their lanes at different times
    reasons = set(ref["end_reason"].values.tolist())
    assert {int(EndReason.ONE_PLANET), int(EndReason.END_TIME)} <= reasons
    assert int(ref["n_merged"].sum() + ref["n_ejected"].sum() + ref["n_star"].sum()) >= 4
    assert (ref["simd_lanes"].values >= 2).all()


@pytest.mark.parametrize("batch_size", [1, 8])
def test_two_workers_any_batch_size_give_the_records_of_systems_run_alone(ref, tmp_path, client, batch_size):
    ds = scatter_pop.run_ensemble(
        parse_spec(taylor_text()), out=tmp_path / "run", client=client, batch_size=batch_size, **QUIET
    )
    validate_dataset(ds)
    assert_physics_equal(ds, ref)


def test_one_worker_with_one_batch_of_64_gives_the_same_physics(ref, tmp_path):
    with connect(ClusterConfig(dashboard_port=0), workers=1) as one:
        ds = scatter_pop.run_ensemble(
            parse_spec(taylor_text()), out=tmp_path / "run", client=one, batch_size=64, **QUIET
        )
    assert part_files(tmp_path / "run") == ["part_00000000_00000011.nc"]
    assert_physics_equal(ds, ref)


def test_capped_systems_extended_and_continued_end_as_uncapped_ones(ref, tmp_path, client):
    out = tmp_path / "run"
    capped = parse_spec(taylor_text(extra=EXTRA + "wall_seconds_max = 0.002\n"))
    first = scatter_pop.run_ensemble(capped, out=out, client=client, batch_size=4, **QUIET)
    stopped = first["system"].values[first["end_reason"].values == EndReason.CAPPED]
    assert stopped.size >= 3
    kept = first["system"].values[np.isin(first["end_reason"].values, [EndReason.CAPPED, EndReason.END_TIME])]
    assert sorted(p.name for p in (out / "checkpoints").iterdir()) == [f"system_{i:08d}.bin" for i in kept]
    second = scatter_pop.run_ensemble(capped, out=out, client=client, batch_size=4, extend=True, **QUIET)
    assert (second["t_end"].sel(system=stopped).values > first["t_end"].sel(system=stopped).values).all()
    final = scatter_pop.run_ensemble(parse_spec(taylor_text()), out=out, client=client, batch_size=4, **QUIET)
    assert not (final["end_reason"].values == EndReason.CAPPED).any()
    at_end = final["system"].values[final["end_reason"].values == EndReason.END_TIME]  # kept to be carried further
    assert sorted(p.name for p in (out / "checkpoints").iterdir()) == [f"system_{i:08d}.bin" for i in at_end]
    assert_physics_equal(final, ref)


def test_raised_end_time_carries_the_unsettled_systems_to_the_later_run(ref, tmp_path, client):
    # a folder run to an earlier end time (inside a chunk), then with the spec's end time raised: the
    # systems stopped at the earlier end time continue from their kept state and end as the systems
    # run alone to the later end time from the start; settled ones are not touched
    out = tmp_path / "run"
    first = scatter_pop.run_ensemble(
        parse_spec(taylor_text(end_time=0.37 * T_END)), out=out, client=client, batch_size=4, **QUIET
    )
    stopped = first["end_reason"].values == EndReason.END_TIME
    assert stopped.sum() >= 4 and (first["t_limit"].values == 0.37 * T_END).all()
    lines = []
    final = scatter_pop.run_ensemble(
        parse_spec(taylor_text()), out=out, client=client, batch_size=4, progress_interval=60.0, log=lines.append
    )
    assert any(f"{stopped.sum()} systems carried from their end time to the later one" in line for line in lines)
    assert_physics_equal(final, ref)
    assert (final["t_limit"].values[stopped] == T_END).all()
    np.testing.assert_array_equal(final["wall_seconds"].values[~stopped], first["wall_seconds"].values[~stopped])


def test_interrupted_run_resumed_in_other_batches_equals_systems_run_alone(ref, tmp_path, client):
    # the parts an interrupted run had not written (tests/ensemble/test_resume.py kills real drivers)
    # are computed again, in other batches beside other companions
    out = tmp_path / "run"
    scatter_pop.run_ensemble(parse_spec(taylor_text()), out=out, client=client, batch_size=2, **QUIET)
    parts = part_files(out)
    for name in parts[1::2]:
        (out / "parts" / name).unlink()
    lines = []
    ds = scatter_pop.run_ensemble(
        parse_spec(taylor_text()), out=out, client=client, batch_size=5, progress_interval=60.0, log=lines.append
    )
    assert any(f"{N // 2}/{N} systems on disk" in line for line in lines)
    assert_physics_equal(ds, ref)
    assert_physics_equal(scatter_pop.open_ensemble(out), ref)
    assert np.isin(ds["simd_lanes"].values, [4, 8, 16]).all()
