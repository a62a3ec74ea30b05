"""Tests of the LaTeX table: booktabs structure, the numbers from the branching ratios and the
comparison, escaping, p-values at the permutation floor."""

import re

import numpy as np
import scipy.stats
from records import dataset, planet, system

from scatter_pop.engine.outcome import Fate
from scatter_pop.paper.figure_data import branching_table, comparison_stats_table
from scatter_pop.paper.latex_tables import latex_escape, latex_percent, latex_pvalue, latex_table
from scatter_pop.survey.statistics import two_sample


def _runs():
    def run(n_ej, n_none):
        recs = [
            system(i, [planet(1.0, 2.0, 0.6, a_initial=3.0), planet(1.0, -20.0, 1.2, a_initial=4.0, fate=Fate.EJECTED)])
            for i in range(n_ej)
        ]
        recs += [
            system(n_ej + i, [planet(1.0, 3.0, 0.1, a_initial=3.0), planet(1.0, 6.0, 0.05, a_initial=4.0)])
            for i in range(n_none)
        ]
        return dataset(recs, 2)

    return [("2_planets & co", run(30, 10)), ("equal%masses", run(5, 45))]


def _rows(tex):
    body = tex.split(r"\midrule")[1].split(r"\bottomrule")[0]
    return [r.strip() for r in body.strip().split(r"\\") if r.strip()]


def test_booktabs_structure_and_branch_percentages():
    runs = _runs()
    tex = latex_table(branching_table(runs))
    # booktabs: the three rules, in order, and no vertical rules in the column spec
    assert tex.index(r"\toprule") < tex.index(r"\midrule") < tex.index(r"\bottomrule")
    spec = re.search(r"\\begin\{tabular\}\{([^}]*)\}", tex).group(1)
    assert "|" not in spec
    ncols = len(spec.split())
    rows = _rows(tex)
    assert len(rows) == 2
    for row in rows:
        assert row.count("&") - row.count(r"\&") == ncols - 1
    # first row: 30 of 40 ejections; Clopper-Pearson interval from scipy.stats.binomtest
    ci = scipy.stats.binomtest(30, 40).proportion_ci(method="exact")
    assert latex_percent(0.75, ci.low, ci.high) in rows[0]
    assert f"{75.0:.1f}^{{+{100 * ci.high - 75:.1f}}}_{{-{75 - 100 * ci.low:.1f}}}" in rows[0]
    assert rows[0].startswith(r"2\_planets \& co & 40 &")
    assert rows[1].startswith(r"equal\%masses & 50 &")
    assert tex.count("{") == tex.count("}")


def test_comparison_columns_come_from_the_two_sample_test():
    runs = _runs()
    rng = np.random.default_rng(4)
    observed = rng.beta(0.867, 3.03, 300)  # Kipping 2013 Beta law, as a stand-in sample
    tests = [
        (label, two_sample(ds["e_final"].values[ds["fate"].values == 0], observed, permutations=99, rng=1))
        for label, ds in runs
    ]
    tex = latex_table(branching_table(runs), comparison_stats_table(tests))
    rows = _rows(tex)
    for row, (_, t) in zip(rows, tests):
        cells = [c.strip() for c in re.split(r"(?<!\\)&", row)]
        assert cells[-5] == str(t.n_x)
        assert cells[-4] == f"{t.ks_statistic:.3f}"
        assert cells[-2] == f"{t.ad_statistic:.2f}"
        assert cells[-1] == latex_pvalue(t.ad_pvalue, 99)
    assert "Anderson-Darling" in tex and "300 observed" in tex


def test_pvalue_formatting():
    # a permutation p-value cannot go below 1/(N+1): at that floor it is written as a bound
    assert latex_pvalue(1 / 2001, 2000) == r"$<5.0\times10^{-4}$"
    assert latex_pvalue(0.0312) == "$0.0312$"
    assert latex_pvalue(2.5e-7) == r"$2.5\times10^{-7}$"
    assert latex_escape("a_b#c$") == r"a\_b\#c\$"
