"""The integrator benchmark: paths, bookkeeping of CPU time and energy errors, statistics, CLI smoke run.

The benchmark's own system is invented (three Jupiters at 5 AU, 3.0 mutual Hill radii apart);
no number of it serves as a check value.  The statistics are checked against scipy.stats
(a reference library) and the IAS15 reference against its published accuracy.
"""

import json
import math
from dataclasses import replace

import numpy as np
import pytest
import scipy.stats

from scatter_pop import cli
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, SystemRecord
from scatter_pop.ensemble.bench import bench_spec, format_table, make_paths, summarize
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import INTEGRATORS


# --------------------------------------------------------------------------- paths
def test_paths_reference_first_then_default_then_every_other_integrator():
    spec = bench_spec(3, 1000.0)
    paths = make_paths(spec)
    ref, default = paths[0], paths[1]
    assert (ref.label, ref.reference, ref.integration.integrator) == ("reference", True, "ias15")
    assert ref.integration.stop_when_settled is False
    assert default.label == "default" and default.integration == spec.integration and not default.reference
    others = [p.label for p in paths[2:]]
    assert sorted(others + [spec.integration.integrator]) == sorted(INTEGRATORS)
    for p in paths[2:]:
        assert p.integration == replace(spec.integration, integrator=p.label)


def test_paths_subset_keeps_the_reference_and_unknown_names_are_refused():
    spec = bench_spec(3, 1000.0)
    assert [p.label for p in make_paths(spec, ["trace"])] == ["reference", "trace"]
    # the default's own integrator names the default path (run once, not twice)
    assert [p.label for p in make_paths(spec, [spec.integration.integrator])] == ["reference", "default"]
    with pytest.raises(InputError, match="unknown; choose from"):
        make_paths(spec, ["whfast"])


@pytest.mark.parametrize(
    "argv, word",
    [
        (["bench", "--systems", "1"], "--systems = 1"),
        (["bench", "--end-time", "-5"], "--end-time"),
        (["bench", "--paths", "rk4"], "--paths = rk4"),
        (["bench", "--workers", "-1"], "--workers = -1"),
        (["bench", "--out", "/no/such/folder/x.json"], "--out"),
    ],
)
def test_user_errors_are_one_line_and_exit_2(argv, word, capsys):
    assert cli.main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and word in err


# --------------------------------------------------------------------------- summary
def _record(index, e_values, a_values, energy_error, fates=None):
    planets = []
    for k, (e, a) in enumerate(zip(e_values, a_values)):
        fate = fates[k] if fates else Fate.SURVIVED
        planets.append(
            PlanetRecord(
                mass_initial=1e-3,
                a_initial=5.0,
                e_initial=0.01,
                inc_initial=0.0,
                radius_initial=5e-4,
                mass_final=1e-3,
                a_final=a,
                e_final=e,
                inc_final=0.0,
                q_final=a * (1 - e),
                radius_final=5e-4,
                fate=fate,
            )
        )
    return SystemRecord(
        index=index,
        seed=index,
        planets=tuple(planets),
        t_end=1.0,
        end_reason=EndReason.END_TIME,
        energy_error=energy_error,
    )


def _fake_results(rng, n, shift=0.0, cpu=1.0, err=1e-12):
    rows = []
    for i in range(n):
        e = np.clip(rng.rayleigh(0.3, 3) + shift, 0, 0.99)
        a = rng.uniform(2, 20, 3)
        rows.append((_record(i, e, a, err), cpu, 50.0))
    return rows


def test_summary_ratios_energy_and_pvalues_match_scipy():
    spec = bench_spec(40, 1000.0)
    rng = np.random.default_rng(7)
    ref = _fake_results(rng, 40, cpu=2.0)
    same = [(r, 0.25, m) for r, _, m in ref]  # same outcomes, 8x cheaper
    other = _fake_results(rng, 40, shift=0.3, cpu=0.5, err=3e-7)  # other e distribution
    s = summarize(spec, {"reference": ref, "same": same, "other": other}, permutations=200)
    assert s["reference"]["speedup"] == 1.0
    assert s["same"]["speedup"] == pytest.approx(8.0)
    assert s["same"]["systems_per_cpu_second"] == pytest.approx(40 / (40 * 0.25))
    assert s["other"]["energy_error_median"] == pytest.approx(3e-7)
    assert s["same"]["ks_e"] == pytest.approx(1.0) and s["same"]["ad_e"] > 0.5
    # KS p-value of the survivors' e against scipy.stats.ks_2samp (reference library)
    e_ref = np.concatenate([[p.e_final for p in r.planets] for r, _, _ in ref])
    e_oth = np.concatenate([[p.e_final for p in r.planets] for r, _, _ in other])
    assert s["other"]["ks_e"] == pytest.approx(scipy.stats.ks_2samp(e_oth, e_ref).pvalue, rel=1e-12)
    assert s["other"]["ks_e"] < 1e-3 and s["other"]["ad_e"] < 0.01
    assert s["other"]["fates"]["survived"] == 1.0
    assert "same" in format_table(s)


def test_summary_leaves_out_systems_above_the_energy_tolerance():
    # schema.quality_mask: |dE/E| > 1e-4 is left out of the statistics but still counted
    spec = bench_spec(3, 1000.0)
    rng = np.random.default_rng(3)
    ref = _fake_results(rng, 6)
    bad = [(replace(r, energy_error=1e-2 if i < 2 else 1e-9), c, m) for i, (r, c, m) in enumerate(ref)]
    s = summarize(spec, {"reference": ref, "bad": bad}, permutations=50)
    assert s["bad"]["above_tolerance"] == 2 and s["bad"]["kept"] == 4
    assert s["bad"]["survivors"] == 4 * 3 and s["reference"]["survivors"] == 6 * 3
    assert s["bad"]["energy_error_max"] == 1e-2


def test_branching_fractions_count_planet_fates():
    spec = bench_spec(3, 1000.0)
    recs = [
        (_record(0, [0.1, 0.5, 1.2], [3, 6, -40], 1e-12, [Fate.SURVIVED, Fate.MERGED, Fate.EJECTED]), 1.0, 1.0),
        (_record(1, [0.1, 0.2, 0.3], [3, 6, 9], 1e-12, [Fate.SURVIVED, Fate.SURVIVED, Fate.HIT_STAR]), 1.0, 1.0),
    ]
    f = summarize(spec, {"reference": recs}, permutations=10)["reference"]["fates"]
    assert f == {
        "survived": 0.5,
        "ejected": 1 / 6,
        "merged": 1 / 6,
        "hit_star": 1 / 6,
        "tidally_disrupted": 0.0,
        "unbound_at_end": 0.0,
    }


# --------------------------------------------------------------------------- smoke run
@pytest.mark.slow
def test_quick_benchmark_runs_every_path(tmp_path, capsys):
    out = tmp_path / "bench.json"
    assert cli.main(["bench", "--out", str(out)]) == 0
    table = capsys.readouterr().out
    doc = json.loads(out.read_text())
    labels = ["reference", "default"] + [
        n for n in INTEGRATORS if n != doc["paths"]["default"]["integration"]["integrator"]
    ]
    assert sorted(doc["summary"]) == sorted(labels)
    for label in labels:
        assert label in table
        rows = doc["systems"][label]
        assert [r["index"] for r in rows] == list(range(doc["settings"]["systems"]))
        assert all(math.isfinite(r["energy_error"]) and r["cpu_seconds"] > 0 for r in rows)
    # the reference never stops early and keeps IAS15's accuracy: close to machine precision over
    # short integrations (Rein & Spiegel 2015, MNRAS 446, 1424); 1e-10 is a loose bound
    ref = doc["systems"]["reference"]
    assert all(r["end_reason"] == "stopped_at_end_time" and r["t_end"] >= doc["settings"]["end_time"] for r in ref)
    assert doc["summary"]["reference"]["energy_error_max"] < 1e-10
    assert doc["summary"]["reference"]["speedup"] == 1.0
    assert 0 < doc["summary"]["reference"]["worker_peak_rss_mb"] < 4096


@pytest.mark.slow
def test_worker_peak_memory_is_the_workers_own_not_the_drivers():
    # getrusage(2): resource usage is preserved across execve, so a spawned worker's ru_maxrss starts at
    # its parent's peak; the benchmark must report the worker's own address space (Linux VmHWM).
    from scatter_pop.ensemble.bench import Path, run_paths

    ballast = np.ones(400 * 1024 * 1024 // 8)  # this (driver) process: >= 400 MB resident
    spec = bench_spec(2, 50.0)
    rows = run_paths(spec, [Path("reference", spec.integration, True)], workers=1, log=None)["reference"]
    assert ballast.sum() > 0
    assert all(0 < peak < 350 for _, _, peak in rows)  # an IAS15 worker: well under the ballast
