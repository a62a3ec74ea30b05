"""Tests of the figure set: every file exists and is a valid PDF/PNG of the stated size, and the
CSV beside it holds the numbers computed directly from the hand-made records."""

import csv
import math

import matplotlib.image
import numpy as np
import pytest
import scipy.stats
from PIL import Image
from records import dataset, planet, system, write_run

from scatter_pop import cli
from scatter_pop.engine.outcome import EndReason, Fate

OBSERVED = "tests/data/observed_rv_giants.csv"
FIGURES = ("e_histogram_by_branch", "e_cdf", "a_e_plane", "branching_ratios", "instability_times", "e_vs_mass_ratio")
KINDS = ("none", "ejection", "merger", "star")


def _two_planet_run():
    """40 used systems cycling through the four single-kind branches, plus one failed and one
    capped system (left out).  Returns (records, expected survivors per branch as (e, a, ratio))."""
    recs, expected, t_enc = [], {k: [] for k in KINDS}, []
    for i in range(40):
        kind = KINDS[i % 4]
        e1, a1 = 0.02 + 0.024 * i, 2.0 + 0.2 * i
        m1, m2 = 1.0 + 0.1 * i, 2.0
        if kind == "none":
            e2, a2 = 0.5 * e1, 15.0
            ps = [planet(m1, a1, e1, a_initial=3.0), planet(m2, a2, e2, a_initial=4.0)]
            expected[kind] += [(e1, a1, min(m1, m2) / max(m1, m2)), (e2, a2, min(m1, m2) / max(m1, m2))]
        else:
            fate = {"ejection": Fate.EJECTED, "merger": Fate.MERGED, "star": Fate.HIT_STAR}[kind]
            ps = [
                planet(m1, a1, e1, a_initial=3.0),
                planet(
                    m2,
                    -30.0 if kind == "ejection" else 1.0,
                    1.2 if kind == "ejection" else 0.9,
                    a_initial=4.0,
                    fate=fate,
                ),
            ]
            expected[kind].append((e1, a1, min(m1, m2) / max(m1, m2)))
        t = math.nan if kind == "none" else 10.0 ** (2 + 0.05 * i)
        t_enc.append(t)
        recs.append(system(i, ps, t_enc=t, reason=EndReason.HILL_STABLE if kind == "none" else EndReason.ONE_PLANET))
    recs.append(
        system(
            40, [planet(1.0, 2.0, 0.99, a_initial=3.0), planet(1.0, 3.0, 0.5, a_initial=4.0)], reason=EndReason.FAILED
        )
    )
    recs.append(
        system(
            41, [planet(1.0, 2.0, 0.98, a_initial=3.0), planet(1.0, 3.0, 0.5, a_initial=4.0)], reason=EndReason.CAPPED
        )
    )
    return recs, expected, t_enc


def _three_planet_run():
    recs, e_all = [], []
    for i in range(30):
        e = 0.05 + 0.03 * i
        # an ejection and a merger: "several"; every fifth system only ejections
        second = Fate.MERGED if i % 5 else Fate.EJECTED
        recs.append(
            system(
                i,
                [
                    planet(1.0, 3.0 + 0.1 * i, e, a_initial=3.0),
                    planet(1.0, -40.0, 1.5, a_initial=4.0, fate=Fate.EJECTED),
                    planet(0.5, 4.0, 0.3, a_initial=5.0, fate=second),
                ],
                t_enc=50.0 + i,
            )
        )
        e_all.append(e)
    return recs, e_all


def _read(path):
    with open(path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    return rows


def _col(rows, name, cast=float):
    return np.array([cast(r[name]) for r in rows])


@pytest.fixture(scope="module")
def figure_dir(tmp_path_factory):
    base = tmp_path_factory.mktemp("figs")
    recs2, _, _ = _two_planet_run()
    recs3, _ = _three_planet_run()
    a = write_run(base / "two", recs2, 2)
    b = write_run(base / "three", recs3, 3)
    out = base / "out"
    code = cli.main(
        [
            "figures",
            str(a),
            str(b),
            "--observed",
            OBSERVED,
            "--e",
            "0.9",
            "--e-err",
            "0.02",
            "--a",
            "9",
            "--a-err",
            "1.5",
            "--name",
            "invented b",
            "--format",
            "pdf,png",
            "--out",
            str(out),
            "--permutations",
            "200",
        ]
    )
    assert code == 0
    return out


@pytest.mark.parametrize("name", FIGURES)
def test_each_figure_is_a_valid_pdf_and_png(figure_dir, name):
    pdf = (figure_dir / f"{name}.pdf").read_bytes()
    assert pdf.startswith(b"%PDF-") and b"%%EOF" in pdf[-1024:]
    assert b"/Subtype /Image" not in pdf  # vector: no embedded raster
    assert b"/FontFile2" in pdf  # TrueType fonts embedded (pdf.fonttype 42)
    png = figure_dir / f"{name}.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert matplotlib.image.imread(png).ndim == 3
    with Image.open(png) as im:
        im.verify()
    with Image.open(png) as im:
        width_in = im.size[0] / 300.0
    # two ensembles: per-ensemble panels at double-column width, single panels at single column
    expected = 7.1 if name in ("e_histogram_by_branch", "a_e_plane", "e_vs_mass_ratio") else 3.35
    assert width_in == pytest.approx(expected, abs=2 / 300)
    assert (figure_dir / f"{name}.csv").is_file()


def test_histogram_counts_equal_direct_counts(figure_dir):
    _, expected, _ = _two_planet_run()
    rows = _read(figure_dir / "e_histogram_by_branch.csv")
    bins = np.linspace(0, 1, 21)
    for kind in KINDS:
        sub = [r for r in rows if r["ensemble"] == "two" and r["branch"] == kind]
        counts, _ = np.histogram([e for e, _, _ in expected[kind]], bins=bins)
        assert _col(sub, "count", int).tolist() == counts.tolist()
        assert _col(sub, "e_low").tolist() == pytest.approx(bins[:-1].tolist())
    # the failed and the capped system (e = 0.99, 0.98) are not counted
    assert sum(int(r["count"]) for r in rows if r["ensemble"] == "two") == 10 * 2 + 30
    _, e3 = _three_planet_run()
    several = [r for r in rows if r["ensemble"] == "three" and r["branch"] == "several"]
    ej_only = [r for r in rows if r["ensemble"] == "three" and r["branch"] == "ejection"]
    e_several = [e for i, e in enumerate(e3) if i % 5]  # only the innermost planet survives
    e_ej = [e for i, e in enumerate(e3) if i % 5 == 0]
    assert _col(several, "count", int).tolist() == np.histogram(e_several, bins)[0].tolist()
    assert _col(ej_only, "count", int).tolist() == np.histogram(e_ej, bins)[0].tolist()


def test_cdf_values_and_statistics(figure_dir):
    rows = _read(figure_dir / "e_cdf.csv")
    # the observed CDF, from the catalogue read here directly (rows with e > 0: exact zeros
    # are fixed circular fits, left out by default — common practice, REFERENCES.md)
    with open(OBSERVED, newline="") as fh:
        obs = np.sort([float(r["e"]) for r in csv.DictReader(fh) if r["e"] and float(r["e"]) > 0])
    o = [r for r in rows if r["sample"] == "observed"]
    assert _col(o, "e").tolist() == pytest.approx(obs.tolist())
    assert _col(o, "cdf").tolist() == pytest.approx((np.arange(1, obs.size + 1) / obs.size).tolist())
    # simulated: the survivors' e of the used systems (no cuts given)
    _, expected, _ = _two_planet_run()
    sim = np.sort([e for k in KINDS for e, _, _ in expected[k]])
    s = [r for r in rows if r["sample"] == "two"]
    assert _col(s, "e").tolist() == pytest.approx(sim.tolist())
    assert _col(s, "cdf")[-1] == 1.0
    # legend numbers: KS from scipy.stats.ks_2samp (reference library)
    stats = {r["sample"]: r for r in _read(figure_dir / "e_cdf_stats.csv")}
    ks = scipy.stats.ks_2samp(sim, obs)
    assert float(stats["two"]["ks_d"]) == pytest.approx(ks.statistic, rel=1e-12)
    assert float(stats["two"]["ks_p"]) == pytest.approx(ks.pvalue, rel=1e-9)
    assert int(stats["two"]["n_obs"]) == obs.size == 602  # REFERENCES.md: 602 rows with e > 0


def test_branching_ratios_equal_counts_and_binomial_intervals(figure_dir):
    rows = {(r["ensemble"], r["branch"]): r for r in _read(figure_dir / "branching_ratios.csv")}
    for kind in KINDS:
        r = rows[("two", kind)]
        assert (int(r["k"]), int(r["n"])) == (10, 40)
        assert float(r["fraction"]) == 0.25
        # Clopper & Pearson 1934 via scipy.stats.binomtest (reference library)
        ci = scipy.stats.binomtest(10, 40).proportion_ci(method="exact")
        assert (float(r["low"]), float(r["high"])) == pytest.approx((ci.low, ci.high), rel=1e-12)
    assert (int(rows[("three", "several")]["k"]), int(rows[("three", "ejection")]["k"])) == (24, 6)
    assert int(rows[("two", "several")]["k"]) == 0


def test_instability_cdf_and_a_e_and_mass_ratio(figure_dir):
    _, expected, t_enc = _two_planet_run()
    rows = [r for r in _read(figure_dir / "instability_times.csv") if r["ensemble"] == "two"]
    t = np.sort([x for x in t_enc if math.isfinite(x)])
    assert _col(rows, "t_yr").tolist() == pytest.approx(t.tolist())
    assert _col(rows, "cdf").tolist() == pytest.approx((np.arange(1, t.size + 1) / 40).tolist())
    ae = [r for r in _read(figure_dir / "a_e_plane.csv") if r["ensemble"] == "two"]
    direct = sorted((a, e) for k in KINDS for e, a, _ in expected[k])
    assert np.allclose(sorted(zip(_col(ae, "a_au"), _col(ae, "e"))), direct, rtol=1e-12, atol=0)
    lines = _read(figure_dir / "a_e_plane_lines.csv")
    q, a, e = _col(lines, "q_au"), _col(lines, "a_au"), _col(lines, "e")
    assert np.allclose(a * (1 - e), q)  # pericentre q = a(1 - e)
    target = _read(figure_dir / "a_e_plane_target.csv")[0]
    assert (target["name"], float(target["a_au"]), float(target["e_err"])) == ("invented b", 9.0, 0.02)
    mr = [r for r in _read(figure_dir / "e_vs_mass_ratio.csv") if r["ensemble"] == "two"]
    direct = sorted((ratio, e) for k in KINDS for e, _, ratio in expected[k])
    assert np.allclose(sorted(zip(_col(mr, "mass_ratio"), _col(mr, "e"))), direct, rtol=1e-12, atol=0)


def test_single_column_width(tmp_path):
    recs, _, _ = _two_planet_run()
    run = write_run(tmp_path / "one", recs, 2)
    assert cli.main(["figures", str(run), "--format", "png", "--out", str(tmp_path / "f")]) == 0
    for name in FIGURES:
        with Image.open(tmp_path / "f" / f"{name}.png") as im:
            assert im.size[0] / 300 == pytest.approx(3.35, abs=2 / 300)
    assert (tmp_path / "f" / "outcomes_table.tex").is_file()
    assert not (tmp_path / "f" / "e_cdf_stats.csv").exists()  # no catalogue, no statistics


@pytest.mark.parametrize(
    "extra, flag",
    [
        (["--format", "gif"], "--format"),
        (["--e", "1.2", "--e-err", "0.1", "--a", "9", "--a-err", "1"], "--e"),
        (["--e", "0.9", "--e-err", "0.1", "--a", "9"], "--a-err"),
        (["--e", "0.9", "--e-err=-0.1", "--a", "9", "--a-err", "1"], "--e-err"),
        (["--target", "tests/data/no_such_target.toml"], "--target"),
        (["--labels", "a,b"], "--labels"),
        (["--a-range", "5,1"], "--a-range"),
        (["--observed", "tests/data/nowhere.csv"], "nowhere"),
    ],
)
def test_figures_bad_flags(tmp_path, capsys, extra, flag):
    recs, _, _ = _two_planet_run()
    run = write_run(tmp_path / "one", recs, 2)
    code = cli.main(["figures", str(run), "--out", str(tmp_path / "f"), *extra])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1 and flag in err
    assert not (tmp_path / "f").exists()  # nothing written


def test_paper_figure_script_builds_figures_and_tables(tmp_path):
    # analysis/paper_figures.py: two runs -> figure set, outcome table, comparison tables
    import importlib.util
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "analysis" / "paper_figures.py"
    spec = importlib.util.spec_from_file_location("paper_figures", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    recs2, _, _ = _two_planet_run()
    recs3, _ = _three_planet_run()
    a = write_run(tmp_path / "two", recs2, 2)
    b = write_run(tmp_path / "three", recs3, 3)
    out = tmp_path / "paper"
    assert (
        module.main(
            [
                str(a),
                str(b),
                "--labels",
                "two giants,three giants",
                "--out",
                str(out),
                "--draws",
                "5",
                "--permutations",
                "50",
            ]
        )
        == 0
    )
    for name in FIGURES:
        assert (out / f"{name}.pdf").read_bytes().startswith(b"%PDF-")
    tex = (out / "outcomes_table.tex").read_text()
    assert "two giants" in tex and "three giants" in tex and r"\bottomrule" in tex
    assert "all runs pooled" in (out / "comparison.txt").read_text()
    branching = {(r["ensemble"], r["branch"]): int(r["k"]) for r in _read(out / "branching_ratios.csv")}
    assert branching[("two giants", "ejection")] == 10 and branching[("three giants", "several")] == 24


def test_figure_set_of_a_run_without_usable_systems(tmp_path):
    # every system failed: the figures are drawn empty (no crash, no legend warnings) and the
    # CSVs hold no rows of survivors
    import warnings

    recs = [
        system(i, [planet(1.0, 2.0, 0.5, a_initial=3.0), planet(1.0, 3.0, 0.5, a_initial=4.0)], reason=EndReason.FAILED)
        for i in range(3)
    ]
    run = write_run(tmp_path / "failed", recs, 2)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert cli.main(["figures", str(run), "--format", "png", "--out", str(tmp_path / "f")]) == 0
    # e against mass ratio is not drawn: no survivor, so no mass ratio that varies
    assert all((tmp_path / "f" / f"{n}.png").is_file() for n in FIGURES if n != "e_vs_mass_ratio")
    assert not (tmp_path / "f" / "e_vs_mass_ratio.png").exists()
    assert sum(int(r["count"]) for r in _read(tmp_path / "f" / "e_histogram_by_branch.csv")) == 0
    assert all(int(r["n"]) == 0 for r in _read(tmp_path / "f" / "branching_ratios.csv"))


# --------------------------------------------------------------------------- settled and unsettled
def _mixed_run():
    """20 settled one-planet systems and 10 unsettled pairs stopped at the end time (t_limit 5e4 yr);
    mass ratios 0.5 (settled) and 1.0 (unsettled)."""
    recs = []
    for i in range(20):
        ps = [planet(1.0, 3.0 + 0.1 * i, 0.1 + 0.02 * i, a_initial=3.0), planet(2.0, -30.0, 1.2, fate=Fate.EJECTED)]
        recs.append(system(i, ps, t_enc=100.0 + i, t_end=1e3 + i))
    for i in range(20, 30):
        ps = [planet(1.0, 2.5, 0.7, a_initial=3.0), planet(1.0, 4.0, 0.5, a_initial=4.0)]
        recs.append(system(i, ps, reason=EndReason.END_TIME, t_enc=300.0, t_end=5e4, hill_ratio=0.99))
    return recs


@pytest.fixture(scope="module")
def mixed_dir(tmp_path_factory):
    base = tmp_path_factory.mktemp("mixed")
    run = write_run(base / "mixed", _mixed_run(), 2)
    out = base / "out"
    assert cli.main(["figures", str(run), "--format", "png", "--out", str(out)]) == 0
    return out


def test_unsettled_systems_are_their_own_category(mixed_dir):
    hist = _read(mixed_dir / "e_histogram_by_branch.csv")
    by_branch = {}
    for r in hist:
        by_branch[r["branch"]] = by_branch.get(r["branch"], 0) + int(r["count"])
    # 10 unsettled pairs: 20 planets, all in the unsettled category; the 20 settled ones by their loss
    assert by_branch["unsettled"] == 20 and by_branch["ejection"] == 20 and by_branch["none"] == 0
    branching = {r["branch"]: r for r in _read(mixed_dir / "branching_ratios.csv")}
    assert (int(branching["unsettled"]["k"]), int(branching["unsettled"]["n"])) == (10, 30)
    assert int(branching["none"]["k"]) == 0  # "no planet lost" no longer holds the snapshots
    ci = scipy.stats.binomtest(10, 30).proportion_ci(confidence_level=0.95, method="exact")
    assert float(branching["unsettled"]["low"]) == pytest.approx(ci.low, rel=1e-12)
    points = _read(mixed_dir / "a_e_plane.csv")
    assert sum(r["branch"] == "unsettled" for r in points) == 20


def test_unsettled_category_is_drawn_with_its_own_colour_and_legend(tmp_path):
    import matplotlib.colors as mcolors

    from scatter_pop.paper import drawing, figure_data
    from scatter_pop.target.branches import BRANCH_LABELS

    ds = dataset(_mixed_run(), 2)
    with drawing.style():
        fig, axes = drawing.new_figure(3.35, 2.4)
        drawing.draw_e_histogram(axes[0, 0], figure_data.e_histogram_by_branch([("m", ds)]))
        labels = [t.get_text() for t in axes[0, 0].get_legend().get_texts()]
        assert BRANCH_LABELS["unsettled"] in labels
        grey = [
            p for p in axes[0, 0].patches if mcolors.same_color(p.get_facecolor(), drawing.BRANCH_STYLE["unsettled"][0])
        ]
        assert grey and all(
            not mcolors.same_color(drawing.BRANCH_STYLE["unsettled"][0], drawing.BRANCH_STYLE[b][0])
            for b in drawing.BRANCH_STYLE
            if b != "unsettled"
        )
        fig, axes = drawing.new_figure(3.35, 2.4)
        drawing.draw_branching(axes[0, 0], figure_data.branching_table([("m", ds)]))
        labels = [t.get_text() for t in axes[0, 0].get_legend().get_texts()]
        assert any(label.startswith("unsettled") for label in labels)
        assert any(p.get_hatch() for p in axes[0, 0].patches)


def test_end_time_is_marked_on_the_instability_plot(mixed_dir):
    rows = _read(mixed_dir / "instability_times.csv")
    # the settled systems stopped early (t_limit = t_end in the hand-made records), the pairs at 5e4 yr
    assert _col(rows, "t_limit_max_yr")[0] == 5e4 and _col(rows, "t_limit_min_yr")[0] == 1e3


def test_a_e_plane_spans_the_survivors_and_labels_its_lines(mixed_dir, tmp_path):
    from scatter_pop.paper import drawing, figure_data

    lines = _read(mixed_dir / "a_e_plane_lines.csv")
    a = _col(lines, "a_au")
    survivors = _col(_read(mixed_dir / "a_e_plane.csv"), "a_au")
    assert a.min() == pytest.approx(survivors.min() / 1.25) and a.max() == pytest.approx(survivors.max() * 1.25)
    ds = dataset(_mixed_run(), 2)
    points = figure_data.a_e_points([("m", ds)])
    table = figure_data.pericentre_lines(*figure_data.survivors_a_range(points))
    with drawing.style():
        fig, axes = drawing.new_figure(3.35, 2.4)
        drawing.draw_a_e(axes[0, 0], points, table)
        labels = {t.get_text() for t in axes[0, 0].texts}
        assert {f"q={q:g} AU" for q in set(table["q_au"].tolist())} <= labels
        assert axes[0, 0].get_xlim() == pytest.approx((a.min(), a.max()))


def test_e_vs_mass_ratio_medians_sit_on_the_data_and_a_constant_ratio_draws_nothing(tmp_path):
    from scatter_pop.paper import figure_data

    ds = dataset(_mixed_run(), 2)
    points = figure_data.e_vs_mass_ratio([("m", ds)])
    med = figure_data.binned_median(points, "mass_ratio", "e", np.linspace(0.0, 1.0, 6))
    # every median is drawn at the median mass ratio of its bin's points: on the data (0.5 or 1.0)
    assert set(med["x_median"].tolist()) <= set(points["mass_ratio"].tolist())
    # equal masses everywhere: the figure is not drawn
    same = [system(i, [planet(1.0, 3.0 + 0.1 * i, 0.3), planet(1.0, -30.0, 1.2, fate=Fate.EJECTED)]) for i in range(10)]
    run = write_run(tmp_path / "same", same, 2)
    assert cli.main(["figures", str(run), "--format", "png", "--out", str(tmp_path / "f")]) == 0
    assert not (tmp_path / "f" / "e_vs_mass_ratio.png").exists()
    assert (tmp_path / "f" / "e_histogram_by_branch.png").exists()
