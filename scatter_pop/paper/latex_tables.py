"""LaTeX table of branching ratios and comparison statistics (booktabs; formatting only).

The numbers come from :func:`scatter_pop.paper.figure_data.branching_table` (fractions
of systems per outcome branch with binomial intervals) and from the
comparison with an observed catalogue (:func:`scatter_pop.survey.comparison.compare`,
its KS and Anderson–Darling results, via
:func:`scatter_pop.paper.figure_data.comparison_stats_table`).  Rules follow the
``booktabs`` package (\\toprule, \\midrule, \\bottomrule; no vertical rules).
"""

from __future__ import annotations

import math

from scatter_pop.paper.figure_data import Table
from scatter_pop.target.branches import BRANCH_LABELS, BRANCHES

__all__ = ["latex_escape", "latex_percent", "latex_pvalue", "latex_table"]

_ESCAPES = {
    "\\": r"\textbackslash{}",
    "&": r"\&",
    "%": r"\%",
    "$": r"\$",
    "#": r"\#",
    "_": r"\_",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
}


def latex_escape(text: str) -> str:
    """Escape LaTeX's special characters in plain text."""
    return "".join(_ESCAPES.get(c, c) for c in str(text))


def latex_percent(fraction: float, low: float, high: float, digits: int = 1) -> str:
    """A fraction as a percentage with its asymmetric interval, e.g. ``$12.3^{+2.1}_{-1.9}$``."""
    if not math.isfinite(fraction):
        return "--"
    f, lo, hi = 100 * fraction, 100 * low, 100 * high
    return f"${f:.{digits}f}^{{+{hi - f:.{digits}f}}}_{{-{f - lo:.{digits}f}}}$"


def _sci(x: float) -> str:
    if x == 0:
        return "0"
    if x >= 1e-3:
        return f"{x:.3g}"
    mant, exp = f"{x:.1e}".split("e")
    return rf"{mant}\times10^{{{int(exp)}}}"


def latex_pvalue(p: float, permutations: int = 0) -> str:
    """A p-value in math mode; at a permutation test's floor 1/(N+1) it is written as a bound."""
    if not math.isfinite(p):
        return "--"
    if permutations and p <= (1 + 1e-9) / (permutations + 1):
        return f"$<{_sci(1.0 / (permutations + 1))}$"
    return f"${_sci(p)}$"


def latex_table(
    branching: Table,
    stats: Table | None = None,
    *,
    confidence: float = 0.95,
    caption: str | None = None,
    label: str = "tab:outcomes",
) -> str:
    """A ``table*`` with one row per ensemble: N, branch percentages, KS and AD results.

    Parameters
    ----------
    branching : Table
        From :func:`scatter_pop.paper.figure_data.branching_table`.
    stats : Table or None
        From :func:`scatter_pop.paper.figure_data.comparison_stats_table` (sample
        labels equal to the ensemble labels); None: no comparison columns.
    confidence : float
        Confidence level of the intervals (for the caption).
    caption : str or None
        Caption text (plain text, escaped); default describes the columns.
    label : str
        LaTeX label.
    """
    ensembles = list(dict.fromkeys(branching["ensemble"].tolist()))
    with_stats = stats is not None and len(stats) > 0
    cols = "l r " + " ".join("r" for _ in BRANCHES) + (" r r r r r" if with_stats else "")
    head = ["Ensemble", "$N$"] + [latex_escape(BRANCH_LABELS[b].capitalize()) for b in BRANCHES]
    units = ["", ""] + [r"(\%)"] * len(BRANCHES)
    if with_stats:
        head += [r"$n_\mathrm{sim}$", r"$D_\mathrm{KS}$", r"$p_\mathrm{KS}$", r"$T_\mathrm{AD}$", r"$p_\mathrm{AD}$"]
        units += [""] * 5
    if caption is None:
        caption = (
            f"Outcome branches: percentage of systems whose lost planets were of each kind, with "
            f"{100 * confidence:g} % Clopper-Pearson intervals; N systems used (failed, capped and "
            f"energy-flagged systems left out)."
        )
        if with_stats:
            n_obs = int(stats["n_obs"][0])
            caption += (
                f" Survivors' eccentricities against the {n_obs} observed ones: two-sample "
                f"Kolmogorov-Smirnov distance and p-value, standardised k-sample Anderson-Darling "
                f"statistic (Scholz & Stephens 1987) with its permutation p-value."
            )
    lines = [
        r"\begin{table*}",
        r"\centering",
        rf"\caption{{{latex_escape(caption)}}}",
        rf"\label{{{label}}}",
        rf"\begin{{tabular}}{{{cols}}}",
        r"\toprule",
        " & ".join(head) + r" \\",
        " & ".join(units) + r" \\",
        r"\midrule",
    ]
    for ens in ensembles:
        rows = branching.where(ensemble=ens)
        by = {b: i for i, b in enumerate(rows["branch"].tolist())}
        cells = [latex_escape(ens), str(int(rows["n"][0]))]
        cells += [latex_percent(rows["fraction"][by[b]], rows["low"][by[b]], rows["high"][by[b]]) for b in BRANCHES]
        if with_stats:
            if ens in stats["sample"]:
                s = stats.where(sample=ens)
                cells += [
                    str(int(s["n_sim"][0])),
                    f"{s['ks_d'][0]:.3f}",
                    latex_pvalue(s["ks_p"][0]),
                    f"{s['ad_t'][0]:.2f}",
                    latex_pvalue(s["ad_p"][0], int(s["ad_permutations"][0])),
                ]
            else:
                cells += ["--"] * 5
        lines.append(" & ".join(cells) + r" \\")
    lines += [r"\bottomrule", r"\end{tabular}", r"\end{table*}"]
    return "\n".join(lines) + "\n"
