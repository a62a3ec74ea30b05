"""The demo pipeline end to end on a tiny spec: real integrations on a local Dask cluster, the
comparison with the shipped observed catalogue, the verdict and the figures; a rerun changes
nothing.  Also the shipped demo files parse and label their scenario as invented."""

import csv
import json
from pathlib import Path

import numpy as np
import pytest

from scatter_pop.cli import demo
from scatter_pop.spec.reader import load_spec
from scatter_pop.store.run_folder import open_ensemble
from scatter_pop.store.schema import quality_mask

TINY = """
# tiny demo-like ensemble for the test (invented scenario)
[run]
name = "tiny-demo"
seed = 99
systems = 4

[star]
mass = 1.0

[planets]
count = 2
mass = { distribution = "uniform", low = 1.0, high = 3.0 }
a_inner = 2.0
spacing = { distribution = "uniform", low = 2.0, high = 2.4 }
e_sigma = 0.01
inc_sigma = 1.0

[integration]
integrator = "ias15"
end_orbits = 150
"""

TARGET = """
[target]
name = "test planet (invented)"
invented = true
e = 0.8
e_err = 0.05
a = 3.0
a_err = 1.0
msini = 2.0
msini_err = 0.5
"""

FIGURES = ("e_histogram_by_branch", "e_cdf", "a_e_plane", "branching_ratios", "instability_times", "e_vs_mass_ratio")


@pytest.mark.slow
def test_demo_pipeline_on_a_tiny_spec(tmp_path, capsys):
    spec = tmp_path / "tiny.toml"
    spec.write_text(TINY)
    (tmp_path / "tiny_target.toml").write_text(TARGET)
    out = tmp_path / "out"
    assert demo.main([str(spec), "--out", str(out), "--workers", "1", "--format", "pdf,png"]) == 0
    printed = capsys.readouterr().out
    assert (out / "ensemble.nc").is_file()
    for name in ("comparison.txt", "comparison.json", "comparison.tex", "verdict.txt", "verdict.json"):
        assert (out / name).stat().st_size > 0, name
    for name in FIGURES:
        assert (out / "figures" / f"{name}.pdf").read_bytes().startswith(b"%PDF-")
        assert (out / "figures" / f"{name}.png").read_bytes()[:4] == b"\x89PNG"
        assert (out / "figures" / f"{name}.csv").is_file()
    assert r"\toprule" in (out / "figures" / "outcomes_table.tex").read_text()
    verdict = json.loads((out / "verdict.json").read_text())
    assert verdict["ensembles"][0]["n_total"] == 4
    # the headline counts only settled and likely-stable systems; the figures show the unsettled apart
    ds = open_ensemble(out)
    used = quality_mask(ds).values
    classes = ds["settlement"].values[used]
    block = verdict["ensembles"][0]
    assert block["systems"]["n"] == int(np.isin(classes, [0, 1]).sum())
    assert block["by_class"]["unsettled"]["n"] == int((classes == 2).sum())
    assert block["with_unsettled"]["n"] == int(used.sum())
    assert "headline: systems whose outcome is settled or likely stable" in (out / "verdict.txt").read_text()
    branching = {r["branch"]: r for r in csv.DictReader(open(out / "figures" / "branching_ratios.csv"))}
    assert int(branching["unsettled"]["k"]) == int((classes == 2).sum())
    assert {r["branch"] for r in csv.DictReader(open(out / "figures" / "e_histogram_by_branch.csv"))} >= {"unsettled"}
    assert "invented" in printed and "verdict:" in printed and str(out / "figures") in printed
    assert "settlement: " in printed and "left out of the headline" in printed
    comparison = json.loads((out / "comparison.json").read_text())
    assert comparison["observed"]["summary"]["n"] == 602  # REFERENCES.md: 602 with e > 0

    # a rerun computes nothing and writes the same numbers (seeded from the run seed)
    before = {
        p: p.read_bytes()
        for p in (out / "verdict.json", out / "figures" / "branching_ratios.csv", out / "figures" / "e_cdf_stats.csv")
    }
    assert demo.main([str(spec), "--out", str(out), "--workers", "1", "--format", "png"]) == 0
    assert "nothing to compute" in capsys.readouterr().out
    for path, content in before.items():
        assert path.read_bytes() == content, path


def test_demo_bad_target_file_is_one_line_and_exit_2(tmp_path, capsys):
    spec = tmp_path / "tiny.toml"
    spec.write_text(TINY)
    (tmp_path / "tiny_target.toml").write_text(TARGET.replace("e = 0.8", "e = 1.3"))
    assert demo.main([str(spec), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "target.e = 1.3" in err[0] and "tiny_target.toml" in err[0]
    assert not (tmp_path / "out").exists()  # nothing started


def test_shipped_demo_files_are_valid_and_labelled_invented():
    root = Path(__file__).resolve().parents[2] / "runs"
    spec = load_spec(root / "demo.toml")
    assert "invented" in spec.run.name.lower() and "INVENTED" in spec.text
    target, survey, invented = demo.load_demo_target(root / "demo_target.toml")
    assert invented and "invented" in target.name
    assert target.e >= 0.8  # an extreme planet
    assert survey is not None
    for name in ("paper_two_planets.toml", "paper_three_planets.toml"):
        paper = load_spec(root / name)
        assert paper.run.systems >= 1000
        assert "expected cost" in paper.text.lower()
