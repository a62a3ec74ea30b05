"""The paper's figure set and table from one or more ensembles, written to a folder.

For each figure: its numbers (:mod:`scatter_pop.paper.figure_data`) are written as
CSV, then drawn (:mod:`scatter_pop.paper.drawing`) and saved in each format.  The
LaTeX table (:mod:`scatter_pop.paper.latex_tables`) goes beside them as
``outcomes_table.tex``.  Used by ``scatter-pop figures``, the demo and
``analysis/paper_figures.py``.

Figures (file stems):

``e_histogram_by_branch``  final-e histograms of survivors split by outcome branch
``e_cdf``                  CDF of survivors' e (as compared) against the observed one, KS/AD in the legend
``a_e_plane``              survivors in the a–e plane, lines of constant pericentre, the target
``branching_ratios``       fraction of systems per branch with binomial error bars
``instability_times``      CDF of the time of the first close encounter
``e_vs_mass_ratio``        final e against the initial mass ratio, binned medians of the settled and
                           likely-stable survivors (only when the mass ratio varies)

Unsettled systems (snapshots at the end time) are their own branch in every figure.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

import scatter_pop.paper.drawing as fg
import scatter_pop.paper.figure_data as fd
from scatter_pop.errors import InputError
from scatter_pop.paper.latex_tables import latex_table
from scatter_pop.store.schema import QualityCuts

__all__ = ["FIGURE_NAMES", "FORMATS", "WIDTHS", "FigureFiles", "FigureSet", "write_figure_set"]

FIGURE_NAMES = (
    "e_histogram_by_branch",
    "e_cdf",
    "a_e_plane",
    "branching_ratios",
    "instability_times",
    "e_vs_mass_ratio",
)
FORMATS = ("pdf", "png", "svg", "eps")
WIDTHS = ("auto", "single", "double")
PANEL_HEIGHT_IN = 2.4
MASS_RATIO_EDGES = np.linspace(0.0, 1.0, 6)


@dataclass(frozen=True)
class FigureFiles:
    """Files written for one figure: images (one per format) and CSV tables."""

    name: str
    images: tuple[Path, ...]
    tables: tuple[Path, ...]


@dataclass(frozen=True)
class FigureSet:
    """Everything :func:`write_figure_set` wrote."""

    figures: tuple[FigureFiles, ...]
    latex: Path
    branching_csv: Path


def _grid(n: int, width: str) -> tuple[float, int, int]:
    """(width_in, ncols, nrows) for n per-ensemble panels."""
    if width == "single" or (width == "auto" and n == 1):
        return fg.SINGLE_COLUMN_IN, 1, n
    ncols = min(n, 3)
    return fg.DOUBLE_COLUMN_IN, ncols, -(-n // ncols)


def _one_panel_width(width: str) -> float:
    return fg.DOUBLE_COLUMN_IN if width == "double" else fg.SINGLE_COLUMN_IN


def _write(out: Path, name: str, fig, tables: dict, formats) -> FigureFiles:
    csvs = []
    for suffix, table in tables.items():
        path = out / (f"{name}.csv" if suffix == "" else f"{name}_{suffix}.csv")
        table.write_csv(path)
        csvs.append(path)
    images = fg.save_figure(fig, out / name, formats)
    return FigureFiles(name, tuple(images), tuple(csvs))


def _per_ensemble(out, name, labels, width, formats, tables, draw) -> FigureFiles:
    w, ncols, nrows = _grid(len(labels), width)
    fig, axes = fg.new_figure(w, PANEL_HEIGHT_IN * nrows, ncols, nrows)
    flat = axes.ravel()
    for ax, label in zip(flat, labels):
        draw(ax, label)
    for ax in flat[len(labels) :]:
        ax.set_visible(False)
    return _write(out, name, fig, tables, formats)


def write_figure_set(
    runs,
    out,
    *,
    comparison=None,
    target=None,
    formats=("pdf",),
    width: str = "auto",
    confidence: float = 0.95,
    method: str = "exact",
    quality: QualityCuts = QualityCuts(),
) -> FigureSet:
    """Write the figure set, its CSV tables and the LaTeX table into ``out``.

    Parameters
    ----------
    runs : sequence of (str, xarray.Dataset)
        Label and dataset of each ensemble.
    out : str or Path
        Folder for the files (created).
    comparison : scatter_pop.survey.comparison.ComparisonReport or None
        The comparison with an observed catalogue; its samples' e and test
        results make the CDF figure and the table's statistics.  Without it
        the CDF figure shows the survivors' e only.
    target : scatter_pop.target.planet.Target or None
        Drawn in the a–e plane (with 1σ bars) and as a line at its e.
    formats : sequence of str
        Image formats, from :data:`FORMATS`.
    width : {"auto", "single", "double"}
        Single (3.35 in) or double (7.1 in) column; "auto" uses single column
        for one panel, double for several.
    confidence, method
        Binomial intervals of the branching ratios.
    quality : QualityCuts
        Which systems are used (:func:`scatter_pop.store.schema.quality_mask`).
    """
    for f in formats:
        if f not in FORMATS:
            raise InputError(f"formats: {f!r}: allowed formats: {', '.join(FORMATS)}", arguments=("formats",))
    if width not in WIDTHS:
        raise InputError(f"width = {width!r}: allowed: {', '.join(WIDTHS)}", arguments=("width",))
    runs = list(runs)
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    labels = [label for label, _ in runs]
    target_e = None if target is None else target.e
    written = []
    with fg.style():
        hist = fd.e_histogram_by_branch(runs, quality=quality)
        written.append(
            _per_ensemble(
                out,
                "e_histogram_by_branch",
                labels,
                width,
                formats,
                {"": hist},
                lambda ax, lab: fg.draw_e_histogram(ax, hist.where(ensemble=lab), title=lab, target_e=target_e),
            )
        )

        if comparison is not None:
            cdf = fd.e_cdf_table([(r.sample.label, r.sample.e) for r in comparison.rows], comparison.observed.e)
            stats = fd.comparison_stats_table([(r.sample.label, r.test) for r in comparison.rows])
        else:
            points = fd.a_e_points(runs, quality=quality)
            cdf = fd.e_cdf_table([(lab, points.where(ensemble=lab)["e"]) for lab in labels])
            stats = None
        fig, axes = fg.new_figure(_one_panel_width(width), PANEL_HEIGHT_IN + 0.3)
        fg.draw_e_cdf(axes[0, 0], cdf, stats, target_e=target_e)
        written.append(_write(out, "e_cdf", fig, {"": cdf, **({"stats": stats} if stats else {})}, formats))

        points = fd.a_e_points(runs, quality=quality)
        lines = fd.pericentre_lines(*fd.survivors_a_range(points))
        ttab = fd.target_table(target) if target is not None else None
        tables = {"": points, "lines": lines, **({"target": ttab} if ttab is not None else {})}
        written.append(
            _per_ensemble(
                out,
                "a_e_plane",
                labels,
                width,
                formats,
                tables,
                lambda ax, lab: fg.draw_a_e(ax, points.where(ensemble=lab), lines, target=ttab, title=lab),
            )
        )

        branching = fd.branching_table(runs, confidence=confidence, method=method, quality=quality)
        fig, axes = fg.new_figure(_one_panel_width(width), PANEL_HEIGHT_IN)
        fg.draw_branching(axes[0, 0], branching)
        written.append(_write(out, "branching_ratios", fig, {"": branching}, formats))

        inst = fd.instability_cdf(runs, quality=quality)
        fig, axes = fg.new_figure(_one_panel_width(width), PANEL_HEIGHT_IN)
        fg.draw_instability(axes[0, 0], inst)
        written.append(_write(out, "instability_times", fig, {"": inst}, formats))

        emr = fd.e_vs_mass_ratio(runs, quality=quality)
        final = fd.Table({k: v[emr["branch"] != "unsettled"] for k, v in emr.columns.items()}) if len(emr) else emr
        med = fd.binned_median(final, "mass_ratio", "e", MASS_RATIO_EDGES)  # outcomes only, not snapshots
        ratios = emr["mass_ratio"] if len(emr) else np.array([])
        if ratios.size and np.ptp(ratios) > 0:  # nothing to show when the mass ratio does not vary
            written.append(
                _per_ensemble(
                    out,
                    "e_vs_mass_ratio",
                    labels,
                    width,
                    formats,
                    {"": emr, "medians": med},
                    lambda ax, lab: fg.draw_e_vs_mass_ratio(
                        ax, emr.where(ensemble=lab), med.where(ensemble=lab) if len(med) else None, title=lab
                    ),
                )
            )
    latex = out / "outcomes_table.tex"
    latex.write_text(latex_table(branching, stats, confidence=confidence), encoding="utf-8")
    return FigureSet(tuple(written), latex, out / "branching_ratios.csv")
