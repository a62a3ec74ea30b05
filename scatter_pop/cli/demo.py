"""The demo end to end: ensemble, comparison, verdict on one planet, figures (``make demo``).

``python -m scatter_pop.cli.demo runs/demo.toml --out runs/demo_out`` runs

1. the ensemble of the spec (:func:`scatter_pop.run_ensemble`; resumable: a
   rerun computes only what is missing);
2. the comparison of its survivors with the shipped observed catalogue
   (``tests/data/observed_rv_giants.csv``), as text, JSON and LaTeX;
3. the judgement of the demo's target planet, as text and JSON;
4. the figure set with its CSV tables and the LaTeX outcome table;

and prints where everything is.  Steps 2–4 are seeded from the run seed, so a
rerun rewrites the same numbers.  The target and the survey settings live in
a small TOML file beside the spec (default ``<spec stem>_target.toml``)::

    [target]                 # flags of `scatter-pop judge`, without the dashes
    name = "..."             # e, e_err, a [AU], a_err [AU], msini [M_J], msini_err [M_J], mstar [M_sun]
    [survey]                 # optional RV detection rule of the comparison
    k_min = 3.0              # m/s
    baseline = 20.0          # yr

The demo's star and planet are invented; the output says so.
"""

from __future__ import annotations

import sys
from pathlib import Path

from scatter_pop.errors import InputError

__all__ = ["main", "load_demo_target", "run_demo", "DEFAULT_OBSERVED"]

DEFAULT_OBSERVED = Path(__file__).resolve().parents[2] / "tests" / "data" / "observed_rv_giants.csv"


def load_demo_target(path):
    """Read the demo's target file: (Target, RVSurvey or None, invented flag).

    The file is the target file of ``scatter-pop judge`` (:mod:`scatter_pop.target.target_file`);
    InputError names the file and the key.
    """
    from scatter_pop.target.target_file import load_target_file

    chosen = load_target_file(path, need_mass=True)
    return chosen.target, chosen.survey, chosen.invented


def run_demo(
    spec_path,
    out,
    *,
    target_path=None,
    observed=DEFAULT_OBSERVED,
    workers=None,
    formats=("pdf", "png"),
    permutations: int = 2000,
    spread_draws: int = 100,
    log=print,
) -> dict:
    """Run the whole demo pipeline; return the paths written (see the module docstring).

    Parameters
    ----------
    spec_path : path
        Ensemble spec (TOML).
    out : path
        Run folder; ``figures/`` and the reports go inside it.
    target_path : path, optional
        Target file (default ``<spec stem>_target.toml`` beside the spec).
    observed : path
        Observed catalogue (CSV, default columns).
    workers : int, optional
        Local Dask workers (default: one per core).
    formats : sequence of str
        Figure formats.
    permutations, spread_draws : int
        Anderson–Darling permutations; error-bar and bootstrap redraws of the comparison.
    log : callable
        Receives progress lines.
    """
    from scatter_pop.ensemble.driver import run_ensemble
    from scatter_pop.paper.figure_set import FORMATS, write_figure_set
    from scatter_pop.spec.reader import load_spec
    from scatter_pop.store.run_folder import atomic_write_text
    from scatter_pop.survey.catalogue import load_catalogue
    from scatter_pop.survey.comparison import CompareOptions, compare
    from scatter_pop.survey.report import render
    from scatter_pop.target.judgement import judge
    from scatter_pop.target.verdict import render_json, render_text, verdict_sentence

    bad = [f for f in formats if f not in FORMATS]
    if not formats or bad:
        raise InputError(
            f"formats = {','.join(formats)!r}: allowed formats: {', '.join(FORMATS)}", arguments=("formats",)
        )
    spec = load_spec(spec_path)
    target_path = Path(target_path) if target_path else Path(spec_path).with_name(Path(spec_path).stem + "_target.toml")
    target, survey, invented = load_demo_target(target_path)
    observed_sample = load_catalogue(observed)  # checked before the long part
    out = Path(out)

    ds = run_ensemble(spec, out=out, workers=workers, log=log)
    label = spec.run.name
    options = CompareOptions(
        survey=survey,
        permutations=permutations,
        uncertainty_draws=spread_draws,
        bootstrap_draws=spread_draws,
        spread_permutations=spread_draws,
        seed=spec.run.seed,
    )
    report = compare([(label, [ds])], observed_sample, options)
    report.sources[label] = str(out)
    paths = {"ensemble": out / "ensemble.nc"}
    for fmt, suffix in (("text", "txt"), ("json", "json"), ("latex", "tex")):
        paths[f"comparison_{suffix}"] = out / f"comparison.{suffix}"
        atomic_write_text(render(report, fmt), paths[f"comparison_{suffix}"])

    result = judge([ds], target, labels=[label], seed=spec.run.seed)
    paths["verdict_txt"], paths["verdict_json"] = out / "verdict.txt", out / "verdict.json"
    atomic_write_text(render_text(result), paths["verdict_txt"])
    atomic_write_text(render_json(result), paths["verdict_json"])

    figs = write_figure_set([(label, ds)], out / "figures", comparison=report, target=target, formats=formats)
    paths["figures"] = out / "figures"
    paths["table_tex"] = figs.latex

    row = report.rows[0]
    note = " (an invented star and planet, for demonstration only)" if invented else ""
    log("")
    log(f"demo target: {target.name}{note}")
    floor = 1.0 / (row.test.permutations + 1)
    ad_p = (
        f"p <= {floor:.2g}, the permutation floor"
        if row.test.ad_pvalue <= floor * (1 + 1e-9)
        else f"p = {row.test.ad_pvalue:.3g}"
    )
    log(
        f"survivors vs {observed_sample.e.size} observed eccentricities: KS D = {row.test.ks_statistic:.3f} "
        f"(p = {row.test.ks_pvalue:.3g}), AD T = {row.test.ad_statistic:.2f} ({ad_p}); "
        f"n_sim = {row.test.n_x}"
    )
    classes = result.ensembles[0].by_class
    log(
        f"settlement: {classes['settled'].n} settled, {classes['likely_stable'].n} likely stable, "
        f"{classes['unsettled'].n} unsettled (snapshots at the end time, left out of the headline) of "
        f"{result.ensembles[0].n_systems} systems used"
    )
    log("verdict: " + verdict_sentence(result.ensembles[0], result))
    log("")
    log(f"ensemble:         {paths['ensemble']}")
    log(f"comparison:       {paths['comparison_txt']} (.json, .tex)")
    log(f"verdict:          {paths['verdict_txt']} (.json)")
    log(f"figures + CSV:    {paths['figures']}/ ({len(figs.figures)} figures, {', '.join(formats)})")
    log(f"LaTeX table:      {paths['table_tex']}")
    return paths


def main(argv=None) -> int:
    """Command line of the demo; returns the exit status."""
    import sys as _sys

    from scatter_pop.cli.main import OneLineParser, attach_negative_values, flags_of

    parser = OneLineParser(
        prog="python -m scatter_pop.cli.demo",
        description="Run the demo end to end (ensemble, comparison, verdict, figures).",
    )
    parser.add_argument("spec", metavar="SPEC", help="ensemble spec (TOML), e.g. runs/demo.toml")
    parser.add_argument("--out", required=True, help="run folder, e.g. runs/demo_out")
    parser.add_argument("--target", help="target file (default <spec stem>_target.toml beside the spec)")
    parser.add_argument("--observed", default=str(DEFAULT_OBSERVED), help="observed catalogue (CSV)")
    parser.add_argument("--workers", help="local Dask workers (default: one per core)")
    parser.add_argument("--format", default="pdf,png", help="figure formats (default pdf,png)")
    try:
        args = parser.parse_args(attach_negative_values(list(_sys.argv[1:] if argv is None else argv)))
    except SystemExit as exc:
        return int(exc.code or 0)
    from scatter_pop.cli.options import integer_flag
    from scatter_pop.ensemble.stop_signals import stop_signals

    try:
        workers = None if args.workers is None else integer_flag(args.workers, "--workers", 1, 100_000)
        formats = tuple(f.strip() for f in args.format.split(",") if f.strip())
        # Ctrl-C and SIGTERM end the demo as they end `scatter-pop run`: at a safe point of the run
        # phase, one line, exit status 130 / 143; a second Ctrl-C does not wait for the clean-up
        with stop_signals("demo"):
            run_demo(
                args.spec,
                args.out,
                target_path=args.target,
                observed=args.observed,
                workers=workers,
                formats=formats,
            )
    except InputError as exc:
        flags = {**flags_of(parser, None), "formats": "--format"}
        print(f"demo: error: {exc.in_terms_of(flags)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("demo: interrupted; rerun the same command to resume", file=sys.stderr)
        return 130
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
