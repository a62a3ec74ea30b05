"""A paper's figure set and tables from several runs (e.g. two- vs three-planet ensembles).

    .venv/bin/python analysis/paper_figures.py runs/paper2_out runs/paper3_out \
        --labels "two giants,three giants" --out paper/ \
        [--observed tests/data/observed_rv_giants.csv] [--rv-survey 3,20] [--a-range 0.03,30] \
        [--format pdf,png] [--seed 1]

Writes into ``--out``:

* the figure set of :func:`scatter_pop.paper.figure_set.write_figure_set`, each ensemble a
  panel or a line, with the CSV of every plotted number;
* ``outcomes_table.tex``: branching ratios and KS/AD statistics (booktabs);
* ``comparison.tex`` / ``.json`` / ``.txt``: the full comparison with the observed catalogue
  (:func:`scatter_pop.survey.comparison.compare`: permutation AD p-values, their spread over the observed
  error bars and over bootstrap resamples, one-sample tests against published laws), plus a
  row pooling all runs.

Everything is computed by the library; this script only chooses the options and the file names.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from scatter_pop.constants import MJUP_MSUN
from scatter_pop.errors import InputError
from scatter_pop.paper.figure_set import write_figure_set
from scatter_pop.survey.catalogue import load_catalogue
from scatter_pop.survey.comparison import CompareOptions, compare
from scatter_pop.survey.cuts import SampleCuts, check_range
from scatter_pop.survey.forward_model import RVSurvey
from scatter_pop.survey.report import render

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_OBSERVED = ROOT / "tests" / "data" / "observed_rv_giants.csv"


def _pair(text, flag):
    if text is None:
        return None
    try:
        low, high = (float(x) for x in text.split(","))
    except ValueError:
        raise InputError(f"{flag} {text!r}: must be two numbers LOW,HIGH") from None
    return low, high


def build(
    dirs,
    labels,
    out,
    *,
    observed=DEFAULT_OBSERVED,
    rv_survey=None,
    a_range=None,
    mass_range=None,
    formats=("pdf",),
    seed=1,
    draws=200,
    permutations=2000,
) -> dict:
    """Make the figure set and the tables; return the paths written.

    Parameters
    ----------
    dirs : sequence of path
        Run folders (or ensemble.nc files).
    labels : sequence of str
        Names of the runs in legends and tables.
    out : path
        Output folder.
    observed : path
        Observed catalogue (CSV, default columns).
    rv_survey : (float, float) or None
        K_min [m/s] and baseline [yr] of the RV survey model.
    a_range, mass_range : (float, float) or None
        Cuts on a [AU] and m sin i [M_J], both samples.
    formats : sequence of str
        Figure formats.
    seed : int
        Seed of every random draw.
    draws, permutations : int
        Error-bar / bootstrap redraws and AD permutations of the comparison.
    """
    from scatter_pop.store.run_folder import atomic_write_text
    from scatter_pop.survey.comparison import load_ensemble

    if len(labels) != len(dirs):
        raise InputError(f"--labels: {len(labels)} names for {len(dirs)} runs")
    cuts = SampleCuts(
        a=None if a_range is None else check_range(*a_range, "--a-range"),
        mass=None
        if mass_range is None
        else check_range(mass_range[0] * MJUP_MSUN, mass_range[1] * MJUP_MSUN, "--mass-range"),
    )
    options = CompareOptions(
        cuts=cuts,
        survey=None if rv_survey is None else RVSurvey(*rv_survey),
        permutations=permutations,
        uncertainty_draws=draws,
        bootstrap_draws=draws,
        spread_permutations=min(draws, permutations),
        seed=seed,
    )
    catalogue = load_catalogue(observed, cuts=cuts)
    runs = [(label, load_ensemble(d)) for label, d in zip(labels, dirs)]
    samples = [(label, [ds]) for label, ds in runs]
    if len(runs) > 1:
        samples.append(("all runs pooled", [ds for _, ds in runs]))
    report = compare(samples, catalogue, options)
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    paths = {}
    for fmt, suffix in (("latex", "tex"), ("json", "json"), ("text", "txt")):
        paths[f"comparison_{suffix}"] = out / f"comparison.{suffix}"
        atomic_write_text(render(report, fmt), paths[f"comparison_{suffix}"])
    figs = write_figure_set(runs, out, comparison=report, formats=formats, width="double")
    paths["outcomes_table"] = figs.latex
    paths["figures"] = [p for f in figs.figures for p in f.images]
    return paths


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("dirs", nargs="+", help="run folders")
    parser.add_argument("--labels", help="comma-separated names (default: folder names)")
    parser.add_argument("--out", required=True, help="output folder")
    parser.add_argument("--observed", default=str(DEFAULT_OBSERVED))
    parser.add_argument("--rv-survey", metavar="K_MIN,BASELINE", help="m/s, yr")
    parser.add_argument("--a-range", metavar="LOW,HIGH", help="AU")
    parser.add_argument("--mass-range", metavar="LOW,HIGH", help="M_J (m sin i)")
    parser.add_argument("--format", default="pdf")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--draws", type=int, default=200, help="error-bar and bootstrap redraws")
    parser.add_argument("--permutations", type=int, default=2000)
    args = parser.parse_args(argv)
    labels = [s.strip() for s in args.labels.split(",")] if args.labels else [Path(d).resolve().name for d in args.dirs]
    try:
        paths = build(
            args.dirs,
            labels,
            args.out,
            observed=args.observed,
            rv_survey=_pair(args.rv_survey, "--rv-survey"),
            a_range=_pair(args.a_range, "--a-range"),
            mass_range=_pair(args.mass_range, "--mass-range"),
            formats=tuple(args.format.split(",")),
            seed=args.seed,
            draws=args.draws,
            permutations=args.permutations,
        )
    except InputError as exc:
        print(f"paper_figures: error: {exc}", file=sys.stderr)
        return 2
    for key, value in paths.items():
        print(f"{key}: {value if not isinstance(value, list) else ', '.join(map(str, value))}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
