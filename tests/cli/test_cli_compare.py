"""Tests of `scatter-pop compare` through scatter_pop.cli.main.main (stdout, stderr, exit status)."""

import json
from pathlib import Path

import pytest
from records import random_ensemble, write_run

from scatter_pop.cli.main import main

DATA = Path(__file__).resolve().parents[1] / "data" / "observed_rv_giants.csv"
FAST = [
    "--permutations",
    "99",
    "--error-draws",
    "4",
    "--bootstrap",
    "4",
    "--spread-permutations",
    "19",
    "--reference-samples",
    "99",
]


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("runs")
    two = write_run(tmp / "two_planet", random_ensemble(150, 1, lambda r: r.beta(1.0, 2.8)))
    three = write_run(tmp / "three_planet", random_ensemble(150, 2, lambda r: min(r.rayleigh(0.3), 0.99)))
    return two, three


def _run(capsys, argv):
    code = main(["compare", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_text_table_on_shipped_catalogue(runs, capsys):
    two, three = runs
    code, out, err = _run(
        capsys, [str(two), str(three), "--observed", str(DATA), "--rv-survey", "3,10", "--mass-range", "0.3,15", *FAST]
    )
    assert code == 0, err
    assert "e not exactly 0 (fixed circular fits left out)" in out and " 602" in out  # README: 602
    assert "two_planet" in out and "three_planet" in out and "RV-detectable" in out
    assert "Beta MLE (e > 0): a = 0.997, b = 2.781" in out  # README fit


def test_json_and_nc_path_and_output_file(runs, capsys, tmp_path):
    two, _ = runs
    out_file = tmp_path / "res" / "cmp.json"
    code, out, err = _run(
        capsys,
        [
            str(two / "ensemble.nc"),
            "--observed",
            str(DATA),
            "--format",
            "json",
            "--out",
            str(out_file),
            "--seed",
            "4",
            *FAST,
        ],
    )
    assert code == 0 and out == "", err
    doc = json.loads(out_file.read_text())
    assert doc["observed"]["counts"][-1]["n"] == 602 and doc["options"]["seed"] == 4
    assert doc["samples"][0]["label"] == "two_planet"
    # same seed, same numbers (bit-reproducible)
    code, out, _ = _run(capsys, [str(two), "--observed", str(DATA), "--format", "json", "--seed", "4", *FAST])
    again = json.loads(out)
    assert again["samples"][0]["test"] == doc["samples"][0]["test"]


def test_latex_and_csv(runs, capsys):
    two, three = runs
    code, out, _ = _run(capsys, [str(two), str(three), "--observed", str(DATA), "--format", "latex", "--pool", *FAST])
    assert code == 0 and r"\toprule" in out and "pooled" in out and r"two\_planet" in out
    code, out, _ = _run(capsys, [str(two), "--observed", str(DATA), "--format", "csv", "--references", "none", *FAST])
    lines = out.strip().splitlines()
    assert code == 0 and len(lines) == 2 and lines[0].startswith("sample,against,test")


BAD_FLAGS = [
    (["--rv-survey", "3"], "--rv-survey"),
    (["--rv-survey", "a,10"], "--rv-survey"),
    (["--rv-survey=-1,10"], "K_MIN"),
    (["--rv-survey", "3,0"], "BASELINE"),
    (["--a-range", "5,0.1"], "--a-range"),
    (["--a-range=-1,2"], "--a-range"),
    (["--mass-range", "0.3"], "--mass-range"),
    (["--period-range", "x,y"], "--period-range"),
    (["--rescale-a", "0,2"], "--rescale-a"),
    (["--ensemble-star-mass=-1"], "--ensemble-star-mass"),
    (["--format", "html"], "--format"),
    (["--permutations", "0"], "--permutations"),
    (["--error-draws", "many"], "--error-draws"),
    (["--references", "gauss"], "--references"),
    (["--columns", "ecc"], "--columns"),
    (["--energy-tolerance=-1"], "--energy-tolerance"),
    (["--seed=-3"], "--seed"),
    (["--tidal", "melt"], "--tidal"),
]


@pytest.mark.parametrize("flags, word", BAD_FLAGS)
def test_bad_flags_one_line_exit_2(runs, capsys, flags, word, tmp_path):
    two, _ = runs
    keep = tmp_path / "previous.txt"
    keep.write_text("earlier result\n")
    code, out, err = _run(capsys, [str(two), "--observed", str(DATA), *flags, "--out", str(keep)])
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and word in err and "Traceback" not in err
    assert keep.read_text() == "earlier result\n"  # nothing already written is lost


HEADER = "id,e,e_err_lo,e_err_hi,a_au,period_days,mass_mjup,mstar_msun"
BAD_CATALOGUES = [
    (["id,ecc", "1,0.2"], [], "'e'"),
    ([HEADER, "1,0.2,,,1,365,2,1", "2,high,,,1,365,2,1"], [], "'e'"),
    ([HEADER, "1,1.2,,,1,365,2,1"], [], "'e'"),
    ([HEADER, "1,0.2,,,1,365,2,1"], ["--a-range", "5,10"], "no rows left"),
    (["id,e", "1,0.2"], ["--mass-range", "1,2"], "mass_mjup"),
    ([HEADER, "1,0.2,,,1,365,2,1"], ["--columns", "e=ecc"], "'ecc'"),
]


@pytest.mark.parametrize("lines, flags, word", BAD_CATALOGUES)
def test_bad_catalogue_one_line_exit_2(runs, capsys, tmp_path, lines, flags, word):
    two, _ = runs
    cat = tmp_path / "cat.csv"
    cat.write_text("\n".join(lines) + "\n")
    code, out, err = _run(capsys, [str(two), "--observed", str(cat), *flags])
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and word in err and "Traceback" not in err


def test_bad_dir_and_missing_star_mass(runs, capsys, tmp_path):
    code, _, err = _run(capsys, [str(tmp_path / "nowhere"), "--observed", str(DATA)])
    assert code == 2 and "nowhere" in err and len(err.strip().splitlines()) == 1
    ds = random_ensemble(20, 3, lambda r: r.uniform(0, 0.8))
    del ds.attrs["star_mass"]
    folder = write_run(tmp_path / "nostar", ds)
    code, _, err = _run(capsys, [str(folder), "--observed", str(DATA), *FAST])
    assert code == 2 and "--ensemble-star-mass" in err
    code, out, err = _run(capsys, [str(folder), "--observed", str(DATA), "--ensemble-star-mass", "1.0", *FAST])
    assert code == 0, err


def test_missing_observed_file(runs, capsys, tmp_path):
    two, _ = runs
    code, _, err = _run(capsys, [str(two), "--observed", str(tmp_path / "none.csv")])
    assert code == 2 and "does not exist" in err


RUN_SPEC = """\
# invented test ensemble: two giant planets around a 0.9 M_sun star
[run]
name = "cmp"
seed = 7
systems = 60

[star]
mass = 0.9

[planets]
count = 2
mass = 2.0
a_inner = 2.0
spacing = 3.0

[integration]
end_time = 1000.0
"""


def test_real_run_folder_incomplete_then_partial(capsys, tmp_path):
    # a run folder as the ensemble store writes it: spec file plus part files; 40 of 60 systems
    from scatter_pop.spec.reader import parse_spec
    from scatter_pop.store.run_folder import prepare_folder

    spec = parse_spec(RUN_SPEC)
    folder = prepare_folder(spec, tmp_path / "run", log=lambda *a: None)
    folder.path.mkdir(parents=True)
    folder.spec_path.write_text(spec.text)
    ds = random_ensemble(40, 5, lambda r: r.beta(1.0, 3.0))
    del ds.attrs["star_mass"]  # the star mass must come from the stored spec
    folder.write_part(ds.isel(system=slice(0, 20)), spec)
    folder.write_part(ds.isel(system=slice(20, 40)), spec)
    code, _, err = _run(capsys, [str(folder.path), "--observed", str(DATA), *FAST])
    assert code == 2 and "incomplete (40/60 systems)" in err and len(err.strip().splitlines()) == 1
    code, out, err = _run(capsys, [str(folder.path), "--observed", str(DATA), "--partial", "--format", "json", *FAST])
    assert code == 0, err
    doc = json.loads(out)
    counts = {c["key"]: c["n"] for c in doc["samples"][0]["counts"]}
    assert counts["systems"] == 40 and counts["survivors"] == 40
    # K used the stored spec's 0.9 M_sun star: compare with radial_velocity for one planet
    from scatter_pop.survey import radial_velocity as rv
    from scatter_pop.survey.comparison import load_ensemble
    from scatter_pop.survey.forward_model import survivor_table

    t = survivor_table(load_ensemble(folder.path, partial=True), rng=0)
    assert t["m_star"][0] == 0.9
    assert t["K"][0] == pytest.approx(rv.semi_amplitude_from_a(t["mass"][0], t["a"][0], t["e"][0], 0.9, t["sin_i"][0]))
