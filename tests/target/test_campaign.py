"""Campaigns that stop when the target's interval is as narrow as asked (``run --until-width``).

Checked: the campaign stops at the first round whose Clopper–Pearson interval (Clopper & Pearson
1934, Biometrika 26, 404; computed by scipy.stats.binomtest) is at most the asked width, and not
before; its ensemble equals, bit for bit, a fixed-size run of the same number of systems (each
system from its own seed, common practice for embarrassingly parallel Monte Carlo); a rerun replays
the finished rounds and computes nothing; the CPU budget stops it.  The set-up is invented: pairs of
Jupiters with inflated radii at 1 AU, some inside and some beyond the Hill-stability boundary, so
that most settle within a few hundred orbits.
"""

from __future__ import annotations

import pytest
import scipy.stats
from ensemble_helpers import assert_physics_equal

from scatter_pop.cli.main import main
from scatter_pop.ensemble.cluster import ClusterConfig, connect
from scatter_pop.ensemble.driver import run_ensemble
from scatter_pop.spec.reader import parse_spec, with_systems
from scatter_pop.target.campaign import next_size, run_until
from scatter_pop.target.planet import target_from_flags

pytestmark = pytest.mark.slow

SPEC = """
[run]
name = "quick pairs (invented)"
seed = 99
systems = 8
[star]
mass = 1.0
[planets]
count = 2
mass = 1.0
a_inner = 1.0
spacing = { distribution = "uniform", low = 2.0, high = 5.0 }
e_sigma = 0.01
inc_sigma = 0.5
radius = 3.0
[integration]
integrator = "ias15"
end_orbits = 300.0
check_orbits = 10.0
[cluster]
dashboard_port = 0
"""
TARGET = dict(e=0.0, e_err=0.01, a=1.05, a_err=0.05, msini=1.0, msini_err=0.3, name="inner giant (invented)")
WIDTH = 0.45


@pytest.fixture(scope="module")
def client():
    with connect(ClusterConfig(dashboard_port=0), workers=1) as c:
        yield c


@pytest.fixture(scope="module")
def campaign(client, tmp_path_factory):
    out = tmp_path_factory.mktemp("until") / "run"
    lines = []
    result = run_until(parse_spec(SPEC), out, target_from_flags(**TARGET), width=WIDTH, client=client, log=lines.append)
    return out, result, lines


def _cp_width(k, n):
    ci = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
    return ci.high - ci.low


def test_stops_at_the_first_round_as_narrow_as_asked(campaign):
    _, result, lines = campaign
    steps = result.steps
    assert result.stopped_by == "width" and len(steps) >= 2
    assert steps[-1].width <= WIDTH < min(s.width for s in steps[:-1])
    for s in steps:
        if s.n:
            assert s.width == pytest.approx(_cp_width(s.k, s.n), rel=1e-12)
    assert [s.systems for s in steps] == sorted({s.systems for s in steps})  # grows every round
    assert sum(line.startswith("[until] ") for line in lines) == len(steps) + 1  # the running estimate


def test_result_equals_the_fixed_size_run(campaign, client, tmp_path):
    _, result, _ = campaign
    n = result.steps[-1].systems
    fixed = run_ensemble(with_systems(parse_spec(SPEC), n), out=tmp_path / "fixed", client=client, log=lambda _: None)
    assert result.dataset.sizes["system"] == n
    assert_physics_equal(result.dataset, fixed)


def test_rerun_replays_the_rounds_and_computes_nothing(campaign, client):
    out, result, _ = campaign
    stamps = {p.name: p.stat().st_mtime_ns for p in (out / "parts").glob("part_*.nc")}
    lines = []
    again = run_until(parse_spec(SPEC), out, target_from_flags(**TARGET), width=WIDTH, client=client, log=lines.append)
    assert again.steps == result.steps
    assert {p.name: p.stat().st_mtime_ns for p in (out / "parts").glob("part_*.nc")} == stamps
    assert sum("nothing to compute" in line for line in lines) == len(result.steps)


def test_cpu_budget_stops_the_campaign(campaign, client, tmp_path):
    out, result, _ = campaign
    first = result.steps[0]
    # a budget already spent after the first round: no second round starts
    stopped = run_until(
        parse_spec(SPEC),
        tmp_path / "budget",
        target_from_flags(**TARGET),
        width=0.01,
        cpu_budget=first.cpu_seconds * 0.5,
        client=client,
        log=lambda _: None,
    )
    assert stopped.stopped_by == "cpu_budget" and len(stopped.steps) == 1


def test_next_size_follows_the_binomial_scaling():
    # width ~ 1/sqrt(N): halving it needs about 4 N (common practice), within the growth limits
    assert next_size(100, 0.2, 0.1, max_systems=10_000) == 400
    assert next_size(100, 0.11, 0.1, max_systems=10_000) == 125  # at least 1.25 N
    assert next_size(100, 1.0, 0.1, max_systems=10_000) == 400  # at most 4 N
    assert next_size(100, 0.2, 0.1, max_systems=150) == 150
    assert next_size(100, 0.2, 0.1, max_systems=10_000, affordable=30) == 130


@pytest.mark.parametrize(
    "flags, named",
    [
        (["--until-width", "0.05"], "--target"),
        (["--until-width", "1.5", "--target", "t.toml"], "--until-width"),
        (["--target", "t.toml"], "--target"),
        (["--until-width", "0.05", "--target", "t.toml", "--cpu-budget", "-1"], "--cpu-budget"),
        (["--until-width", "0.05", "--target", "t.toml", "--max-systems", "3"], "--max-systems"),
    ],
)
def test_campaign_flags_are_checked_before_anything_runs(tmp_path, capsys, flags, named):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    (tmp_path / "t.toml").write_text(
        "[target]\ne = 0.1\ne_err = 0.01\na = 1.0\na_err = 0.1\nmsini = 1.0\nmsini_err = 0.1\n"
    )
    args = [a if a != "t.toml" else str(tmp_path / "t.toml") for a in flags]
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), *args]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and named in err
    assert not (tmp_path / "out").exists()
