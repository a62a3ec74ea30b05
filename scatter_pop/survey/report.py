"""Render a :class:`~scatter_pop.survey.comparison.ComparisonReport` as text, CSV, JSON or LaTeX.

Formatting only: every number comes from the report.  ``text`` is for a
terminal, ``csv`` is one row per comparison (simulated vs observed, and each
sample vs each published law), ``json`` holds everything including the counts
of every cut, ``latex`` is a booktabs table for a paper.
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import asdict

from scatter_pop.constants import DAY_S, MJUP_MSUN, YEAR_S
from scatter_pop.survey.comparison import ComparisonReport
from scatter_pop.survey.resampling import ResampledComparison
from scatter_pop.survey.statistics import REFERENCE_DISTRIBUTIONS, ks_critical_value

__all__ = ["FORMATS", "render", "report_to_dict"]

FORMATS = ("text", "csv", "json", "latex")


def _p(value: float, resolution: float | None = None) -> str:
    """A p-value for reading: at the permutation floor it is an upper bound."""
    if resolution is not None and value <= resolution * (1 + 1e-9):
        return f"<{resolution:.2g}"
    return f"{value:.3g}" if value >= 1e-3 else f"{value:.2e}"


def _range(spread, key: str, resolution: float | None = None) -> str:
    if spread is None:
        return "-"
    s = getattr(spread, key)
    return f"{_p(s.median, resolution)} [{_p(s.p16, resolution)}, {_p(s.p84, resolution)}]"


def _count_table(report: ComparisonReport) -> tuple[list[str], list[str], list[list[int]]]:
    """Union of cut steps over the samples; a step a sample lacks dropped nothing there."""
    keys, labels = [], {}
    for row in report.rows:
        for s in row.sample.log.steps:
            if s.key not in labels:
                keys.append(s.key)
                labels[s.key] = s.label
    table = []
    for row in report.rows:
        have = row.sample.log.as_dict()
        column, last = [], 0
        for k in keys:
            last = have.get(k, last)
            column.append(last)
        table.append(column)
    return keys, [labels[k] for k in keys], table


def _spread_dict(s: ResampledComparison | None):
    """The resampled spreads by their percentiles (each spread's ``n`` is ``draws``, stated once)."""
    if s is None:
        return None
    out = asdict(s)
    for name in ("ks_statistic", "ks_pvalue", "ad_statistic", "ad_pvalue"):
        out[name] = {f: out[name][f] for f in _SPREAD_FIELDS}
    return out


def report_to_dict(report: ComparisonReport) -> dict:
    """Everything in the report as plain JSON-ready values."""
    obs = report.observed
    o = report.options
    return {
        "observed": {
            "source": obs.source,
            "counts": [asdict(s) for s in obs.log.steps],
            "zeros_kept": obs.zeros_kept,
            "a_from_kepler": obs.n_a_derived,
            "with_e_errors": obs.n_with_errors,
            "summary": report.observed_summary,
            "beta_mle_e_positive": None
            if report.observed_beta is None
            else {"a": report.observed_beta[0], "b": report.observed_beta[1]},
            "references": [asdict(r) for r in report.observed_references],
        },
        "samples": [
            {
                "label": r.sample.label,
                "source": report.sources.get(r.sample.label),
                "counts": [asdict(s) for s in r.sample.log.steps],
                "systems_excluded": r.sample.excluded,
                "notes": list(r.sample.notes),
                "summary": r.summary,
                "test": asdict(r.test),
                "ad_pvalue_resolution": 1.0 / (r.test.permutations + 1),
                "ks_critical_value_0.05": ks_critical_value(0.05, r.test.n_x, r.test.n_y),
                "observed_uncertainty": _spread_dict(r.uncertainty),
                "simulated_bootstrap": _spread_dict(r.bootstrap),
                "references": [asdict(x) for x in r.references],
            }
            for r in report.rows
        ],
        "options": {
            "cuts": {
                name: None if getattr(o.cuts, name) is None else [getattr(o.cuts, name).low, getattr(o.cuts, name).high]
                for name in ("a", "period", "mass", "m_star")
            },
            "cut_units": {"a": "AU", "period": "yr", "mass": "Msun", "m_star": "Msun"},
            "rv_survey": None if o.survey is None else {"k_min_m_s": o.survey.k_min, "baseline_yr": o.survey.baseline},
            "project_sin_i": o.project_sin_i,
            "rescale_a_au": None if o.rescale_a is None else [o.rescale_a.low, o.rescale_a.high],
            "star_mass_msun": o.star_mass,
            "energy_tolerance": o.quality.energy_tolerance,
            "include_capped": o.quality.include_capped,
            "tidal": o.tidal,
            "permutations": o.permutations,
            "uncertainty_draws": o.uncertainty_draws,
            "bootstrap_draws": o.bootstrap_draws,
            "spread_permutations": o.spread_permutations,
            "reference_samples": o.reference_samples,
            "seed": o.seed,
        },
    }


def _json(report: ComparisonReport) -> str:
    def clean(x):
        if isinstance(x, float) and not math.isfinite(x):
            return None if math.isnan(x) else ("inf" if x > 0 else "-inf")
        if isinstance(x, dict):
            return {k: clean(v) for k, v in x.items()}
        if isinstance(x, (list, tuple)):
            return [clean(v) for v in x]
        return x

    return json.dumps(clean(report_to_dict(report)), indent=2) + "\n"


def _text(report: ComparisonReport) -> str:
    obs, out = report.observed, []
    keys, labels, counts = _count_table(report)
    lw = max(len(s.label) for s in [*obs.log.steps, *(st for r in report.rows for st in r.sample.log.steps)])
    lw = max(lw, 30)
    out.append(f"Observed catalogue: {obs.source}")
    for s in obs.log.steps:
        out.append(f"  {s.label:<{lw}s} {s.n:>7d}")
    sm = report.observed_summary
    line = (
        f"  observed sample: {obs.n} planets, {obs.n_with_errors} with e errors; median e "
        f"{sm['median']:.3f}, mean {sm['mean']:.3f}, e > 0.5: {sm['frac_above_0.5']:.1%}"
    )
    if report.observed_beta is not None:
        line += f"; Beta MLE (e > 0): a = {report.observed_beta[0]:.3f}, b = {report.observed_beta[1]:.3f}"
    out.append(line)
    if obs.n_a_derived:
        out.append(f"  a from Kepler's third law (P, M*) for {obs.n_a_derived} rows")
    out.append("")
    width = max(12, *(len(r.sample.label) for r in report.rows))
    out.append("Simulated samples (planets remaining after each step)")
    out.append(f"  {'':<{lw}s} " + " ".join(f"{r.sample.label:>{width}s}" for r in report.rows))
    for i, label in enumerate(labels):
        out.append(f"  {label:<{lw}s} " + " ".join(f"{c[i]:>{width}d}" for c in counts))
        if keys[i] == "systems":
            for reason, what in (
                ("failed", "failed"),
                ("capped", "wall-clock capped"),
                ("energy_error", "|dE/E| above tolerance or unknown"),
            ):
                out.append(
                    f"  {'  left out: ' + what:<{lw}s} "
                    + " ".join(f"{r.sample.excluded.get(reason, 0):>{width}d}" for r in report.rows)
                )
    out.append(
        f"  {'median e of the sample':<{lw}s} " + " ".join(f"{r.summary['median']:>{width}.3f}" for r in report.rows)
    )
    out.append("")
    out.append(
        "Eccentricity: simulated vs observed  (KS: two-sample Kolmogorov-Smirnov; AD: k-sample "
        "Anderson-Darling, permutation p-value)"
    )
    out.append(
        "  ranges: median [16 %, 84 %] over redraws of the observed e within their errors (errors) "
        "and over bootstrap resamples of the simulated sample (bootstrap)"
    )
    for r in report.rows:
        t, res = r.test, 1.0 / (r.test.permutations + 1)
        out.append(f"  {r.sample.label}: N_sim = {t.n_x}, N_obs = {t.n_y}")
        out.append(
            f"    KS  D = {t.ks_statistic:.4f} (asymptotic D at 5 %: "
            f"{ks_critical_value(0.05, t.n_x, t.n_y):.4f})   p = {_p(t.ks_pvalue)}   errors: "
            f"{_range(r.uncertainty, 'ks_pvalue')}   bootstrap: {_range(r.bootstrap, 'ks_pvalue')}"
        )
        sres = 1.0 / (report.options.spread_permutations + 1)
        out.append(
            f"    AD  T = {t.ad_statistic:.4f}   p = {_p(t.ad_pvalue, res)}   errors: "
            f"{_range(r.uncertainty, 'ad_pvalue', sres)}   bootstrap: "
            f"{_range(r.bootstrap, 'ad_pvalue', sres)}"
        )
        for note in r.sample.notes:
            out.append(f"    note: {note}")
    if report.observed_references or any(r.references for r in report.rows):
        out.append("")
        out.append("One-sample tests against published laws (KS p exact; AD p Monte Carlo)")
        for name in report.options.references:
            out.append(f"  {name}: {REFERENCE_DISTRIBUTIONS[name]}")
            rows = [("observed", x) for x in report.observed_references if x.reference == name]
            rows += [(r.sample.label, x) for r in report.rows for x in r.references if x.reference == name]
            res = 1.0 / (report.options.reference_samples + 1)
            for label, x in rows:
                out.append(
                    f"    {label:<{width}s} N = {x.n:>6d}  D = {x.ks_statistic:.4f}  p_KS = "
                    f"{_p(x.ks_pvalue)}  A2 = {x.ad_statistic:.3f}  p_AD = {_p(x.ad_pvalue, res)}"
                )
    out.append("")
    out.append(
        f"seed {report.options.seed}; permutations {report.options.permutations}; p-values are "
        "not clipped (a permutation p-value is bounded below by 1/(permutations+1))"
    )
    return "\n".join(out) + "\n"


_SPREAD_FIELDS = ("median", "p16", "p84")


def _csv(report: ComparisonReport) -> str:
    keys, _, counts = _count_table(report)
    head = [
        "sample",
        "against",
        "test",
        "n_sample",
        "n_against",
        "ks_statistic",
        "ks_pvalue",
        "ad_statistic",
        "ad_pvalue",
        "ad_pvalue_resolution",
    ]
    spread_cols = [
        f"{stat}_{kind}_{f}"
        for kind in ("errors", "bootstrap")
        for stat in ("ks_pvalue", "ad_pvalue")
        for f in _SPREAD_FIELDS
    ]
    count_cols = [f"n_{k}" for k in keys]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(head + spread_cols + count_cols)
    for r, column in zip(report.rows, counts):
        t = r.test
        spreads = []
        for sp in (r.uncertainty, r.bootstrap):
            for stat in ("ks_pvalue", "ad_pvalue"):
                spreads += [""] * 3 if sp is None else [repr(getattr(getattr(sp, stat), f)) for f in _SPREAD_FIELDS]
        w.writerow(
            [
                r.sample.label,
                "observed",
                "two_sample",
                t.n_x,
                t.n_y,
                repr(t.ks_statistic),
                repr(t.ks_pvalue),
                repr(t.ad_statistic),
                repr(t.ad_pvalue),
                repr(1.0 / (t.permutations + 1)),
            ]
            + spreads
            + column
        )
    res = 1.0 / (report.options.reference_samples + 1)
    refs = [("observed", x) for x in report.observed_references]
    refs += [(r.sample.label, x) for r in report.rows for x in r.references]
    for label, x in refs:
        w.writerow(
            [
                label,
                x.reference,
                "one_sample",
                x.n,
                "",
                repr(x.ks_statistic),
                repr(x.ks_pvalue),
                repr(x.ad_statistic),
                repr(x.ad_pvalue),
                repr(res),
            ]
            + [""] * (len(spread_cols) + len(count_cols))
        )
    return buf.getvalue()


_TEX_SPECIAL = {
    "\\": r"\textbackslash{}",
    "_": r"\_",
    "%": r"\%",
    "&": r"\&",
    "#": r"\#",
    "$": r"\$",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
}


def _tex(text: str) -> str:
    return "".join(_TEX_SPECIAL.get(ch, ch) for ch in text)


def _tex_p(value: float, resolution: float | None = None) -> str:
    if resolution is not None and value <= resolution * (1 + 1e-9):
        return f"$<{_tex_num(resolution)}$"
    return f"${_tex_num(value)}$"


def _tex_num(v: float) -> str:
    if v >= 1e-3:
        return f"{v:.3g}"
    mant, exp = f"{v:.1e}".split("e")
    return rf"{mant}\times10^{{{int(exp)}}}"


def _tex_range(spread, key, resolution=None) -> str:
    if spread is None:
        return "--"
    s = getattr(spread, key)
    return f"{_tex_p(s.p16, resolution)}--{_tex_p(s.p84, resolution)}"


def _latex(report: ComparisonReport) -> str:
    o = report.options
    res_spread = 1.0 / (o.spread_permutations + 1)
    lines = [
        "% requires \\usepackage{booktabs}",
        f"% observed: {report.observed.source} ({report.observed.n} planets after cuts); seed {o.seed}",
        r"\begin{tabular}{lrrrllrll}",
        r"\toprule",
        r"Sample & $N_\mathrm{sim}$ & $N_\mathrm{obs}$ & $D$ & $p_\mathrm{KS}$ & "
        r"$p_\mathrm{KS}$ range & $T_\mathrm{AD}$ & $p_\mathrm{AD}$ & $p_\mathrm{AD}$ range \\",
        r"\midrule",
    ]
    for r in report.rows:
        t = r.test
        spread = r.uncertainty if r.uncertainty is not None else r.bootstrap
        lines.append(
            f"{_tex(r.sample.label)} & {t.n_x} & {t.n_y} & {t.ks_statistic:.3f} & "
            f"{_tex_p(t.ks_pvalue)} & {_tex_range(spread, 'ks_pvalue')} & {t.ad_statistic:.2f} & "
            f"{_tex_p(t.ad_pvalue, 1.0 / (t.permutations + 1))} & "
            f"{_tex_range(spread, 'ad_pvalue', res_spread)} \\\\"
        )
    lines += [r"\bottomrule", r"\end{tabular}"]
    which = (
        "16--84\\,\\% over redraws of the observed $e$ within their errors"
        if any(r.uncertainty is not None for r in report.rows)
        else "16--84\\,\\% over bootstrap resamples of the simulated sample"
    )
    lines.append(f"% ranges: {which}; AD p-values from {o.permutations} permutations")
    if o.survey is not None:
        lines.append(f"% RV survey: K >= {o.survey.k_min:g} m/s, P <= {o.survey.baseline * YEAR_S / DAY_S:g} d")
    lines.append(f"% mass cut in M_J: {o.cuts.mass.describe(1 / MJUP_MSUN) if o.cuts.mass else 'none'}")
    return "\n".join(lines) + "\n"


def render(report: ComparisonReport, fmt: str = "text") -> str:
    """The report in one of :data:`FORMATS`."""
    if fmt == "text":
        return _text(report)
    if fmt == "csv":
        return _csv(report)
    if fmt == "json":
        return _json(report)
    if fmt == "latex":
        return _latex(report)
    raise ValueError(f"format {fmt!r} unknown; allowed: {', '.join(FORMATS)}")
