"""Drawing the paper figures: tables in, axes out (matplotlib, Agg; computes nothing new).

Each ``draw_*`` function takes tables made by :mod:`scatter_pop.paper.figure_data`
and a matplotlib Axes and only draws them.  Figures are built with
:class:`matplotlib.figure.Figure` directly (no pyplot state; rendered by the
Agg/PDF canvases) at journal column widths: 3.35 in (single column) and
7.1 in (double column).

Colours are the Okabe–Ito palette, distinguishable with the common forms of
colour-vision deficiency (Okabe, M. & Ito, K. 2008, "Color Universal Design
(CUD): how to make figures and presentations that are friendly to colorblind
people", J*Fly); scatter points also differ in marker shape so that figures
survive greyscale printing.  PDFs embed TrueType fonts (``pdf.fonttype`` 42),
as journals ask.
"""

from __future__ import annotations

from contextlib import contextmanager
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib.figure import Figure

from scatter_pop.paper.figure_data import Table
from scatter_pop.target.branches import BRANCH_LABELS, BRANCHES

__all__ = [
    "OKABE_ITO",
    "BRANCH_STYLE",
    "SINGLE_COLUMN_IN",
    "DOUBLE_COLUMN_IN",
    "STYLE",
    "style",
    "new_figure",
    "ensemble_colour",
    "draw_e_histogram",
    "draw_e_cdf",
    "draw_a_e",
    "draw_branching",
    "draw_instability",
    "draw_e_vs_mass_ratio",
    "save_figure",
]

SINGLE_COLUMN_IN = 3.35
DOUBLE_COLUMN_IN = 7.1

OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

#: branch -> (colour, marker)
BRANCH_STYLE = {
    "none": (OKABE_ITO["blue"], "o"),
    "ejection": (OKABE_ITO["vermillion"], "^"),
    "merger": (OKABE_ITO["bluish_green"], "s"),
    "star": (OKABE_ITO["orange"], "D"),
    "several": (OKABE_ITO["reddish_purple"], "v"),
    "unsettled": ("0.55", "h"),  # grey: not an outcome, a snapshot at the end time
}
UNSETTLED_HATCH = "////"
_ENSEMBLE_COLOURS = ("blue", "vermillion", "bluish_green", "orange", "reddish_purple", "sky_blue")
_DASHES = ("-", "--", "-.", ":")

STYLE = {
    "font.size": 8,
    "axes.labelsize": 8,
    "axes.titlesize": 8,
    "xtick.labelsize": 7,
    "ytick.labelsize": 7,
    "legend.fontsize": 6,
    "legend.frameon": True,
    "legend.framealpha": 0.85,
    "legend.edgecolor": "none",
    "legend.fancybox": False,
    "lines.linewidth": 1.0,
    "axes.linewidth": 0.6,
    "xtick.direction": "in",
    "ytick.direction": "in",
    "xtick.top": True,
    "ytick.right": True,
    "pdf.fonttype": 42,
    "ps.fonttype": 42,
    "savefig.dpi": 300,
    "font.family": "DejaVu Sans",
    "mathtext.default": "regular",
}


@contextmanager
def style():
    """Context in which figures are built and saved with :data:`STYLE`."""
    with matplotlib.rc_context(STYLE):
        yield


def new_figure(width_in: float, height_in: float, ncols: int = 1, nrows: int = 1):
    """A Figure with a grid of axes (always a 2-D array), constrained layout.

    Parameters
    ----------
    width_in, height_in : float
        Size [inch].
    """
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    axes = fig.subplots(nrows, ncols, squeeze=False)
    return fig, axes


def ensemble_colour(i: int) -> str:
    """Colour of the i-th ensemble (observed data are black)."""
    return OKABE_ITO[_ENSEMBLE_COLOURS[i % len(_ENSEMBLE_COLOURS)]]


def _legend(ax, **kw) -> None:
    """A legend, if anything on the axes carries a label (empty samples draw nothing)."""
    if ax.get_legend_handles_labels()[0]:
        ax.legend(**kw)


def draw_e_histogram(ax, hist: Table, *, title: str = "", target_e: float | None = None) -> None:
    """Stacked histogram of final e by outcome branch (one ensemble's rows of the table)."""
    bottom = np.zeros(0)
    for b in BRANCHES:
        rows = hist.where(branch=b)
        if not len(rows):
            continue
        if bottom.size == 0:
            bottom = np.zeros(len(rows))
        counts = rows["count"].astype(float)
        if counts.sum() > 0:
            ax.bar(
                rows["e_low"],
                counts,
                width=rows["e_high"] - rows["e_low"],
                bottom=bottom,
                align="edge",
                color=BRANCH_STYLE[b][0],
                edgecolor="white",
                linewidth=0.3,
                label=BRANCH_LABELS[b],
            )
        bottom = bottom + counts
    if target_e is not None:
        ax.axvline(target_e, color=OKABE_ITO["black"], ls="--", lw=0.8, label="target e")
    ax.set_xlim(0.0, 1.0)
    ax.set_xlabel("final eccentricity e")
    ax.set_ylabel("surviving planets")
    if title:
        ax.set_title(title)
    _legend(ax, loc="upper right")


def _p(p: float, permutations: int = 0) -> str:
    if permutations and p <= 1.0 / (permutations + 1) * (1 + 1e-9):
        return f"p<{1.0 / (permutations + 1):.1g}"
    return f"p={p:.2g}"


def draw_e_cdf(ax, cdf: Table, stats: Table | None = None, *, target_e: float | None = None) -> None:
    """Empirical CDFs of e: simulated samples (colours) and the observed one (black).

    The legend carries each sample's KS distance D and standardised
    Anderson–Darling T with their p-values, taken from ``stats``.
    """
    labels = list(dict.fromkeys(cdf["sample"].tolist()))
    sims = [s for s in labels if s != "observed"]
    for i, s in enumerate(sims):
        rows = cdf.where(sample=s)
        text = f"{s} (n={len(rows)})"
        if stats is not None and s in stats["sample"]:
            r = stats.where(sample=s)
            text += (
                f"\nKS D={r['ks_d'][0]:.3f}, {_p(r['ks_p'][0])}; AD T={r['ad_t'][0]:.2f}, "
                f"{_p(r['ad_p'][0], int(r['ad_permutations'][0]))}"
            )
        ax.step(
            rows["e"], rows["cdf"], where="post", color=ensemble_colour(i), ls=_DASHES[i % len(_DASHES)], label=text
        )
    if "observed" in labels:
        rows = cdf.where(sample="observed")
        ax.step(
            rows["e"], rows["cdf"], where="post", color=OKABE_ITO["black"], lw=1.3, label=f"observed (n={len(rows)})"
        )
    if target_e is not None:
        ax.axvline(target_e, color="0.5", ls=":", lw=0.8, label="target e")
    ax.set_xlim(0.0, 1.0)
    ax.set_ylim(0.0, 1.0)
    ax.set_xlabel("eccentricity e")
    ax.set_ylabel("cumulative fraction")
    _legend(ax, loc="lower right")


def draw_a_e(ax, points: Table, lines: Table, *, target: Table | None = None, title: str = "") -> None:
    """Survivors in the a–e plane by branch, labelled lines of constant pericentre, the target.

    The a axis spans the lines' range (chosen from the survivors'); a target outside it is named
    in a note instead of stretching the axis.
    """
    a_min = float(lines["a_au"].min()) if len(lines) else None
    a_max = float(lines["a_au"].max()) if len(lines) else None
    for q in dict.fromkeys(lines["q_au"].tolist()):
        rows = lines.where(q_au=q)
        ax.plot(rows["a_au"], rows["e"], color="0.6", lw=0.6, ls="--", zorder=1)
        k = int(np.argmin(np.abs(rows["e"] - 0.55)))  # label where the line is nearest mid-height
        if 0.03 < float(rows["e"][k]) < 0.97:
            ax.annotate(
                f"q={q:g} AU", (float(rows["a_au"][k]), float(rows["e"][k])), fontsize=5, color="0.35", ha="left"
            )
    for b in BRANCHES:
        rows = points.where(branch=b)
        if len(rows):
            colour, marker = BRANCH_STYLE[b]
            ax.scatter(
                rows["a_au"],
                rows["e"],
                s=5,
                marker=marker,
                color=colour,
                lw=0,
                alpha=0.8,
                label=BRANCH_LABELS[b],
                zorder=2,
            )
    if target is not None and len(target):
        t_a = float(target["a_au"][0])
        if a_min is None or a_min <= t_a <= a_max:
            ax.errorbar(
                target["a_au"],
                target["e"],
                xerr=target["a_err_au"],
                yerr=target["e_err"],
                fmt="*",
                ms=8,
                color=OKABE_ITO["black"],
                mfc=OKABE_ITO["yellow"],
                mew=0.6,
                lw=0.8,
                capsize=1.5,
                label=str(target["name"][0]),
                zorder=3,
            )
        else:
            side = "left" if t_a < a_min else "right"
            ax.text(
                0.02 if side == "left" else 0.98,
                0.02,
                f"{target['name'][0]} at a = {t_a:.3g} AU: off the {side} edge",
                transform=ax.transAxes,
                fontsize=5,
                ha=side,
                va="bottom",
            )
    ax.set_xscale("log")
    if a_min is not None:
        ax.set_xlim(a_min, a_max)
    ax.set_ylim(0.0, 1.0)
    ax.set_xlabel("final semi-major axis a [AU]")
    ax.set_ylabel("final eccentricity e")
    if title:
        ax.set_title(title)
    _legend(ax, loc="best", markerscale=1.5)


def draw_branching(ax, table: Table) -> None:
    """Fraction of systems per branch, grouped by ensemble, with binomial error bars.

    The ``unsettled`` bar (systems stopped at the end time, not an outcome) is hatched and grey
    edged, with its own legend entry.
    """
    from matplotlib.patches import Patch

    ensembles = list(dict.fromkeys(table["ensemble"].tolist()))
    width = 0.8 / max(len(ensembles), 1)
    x0 = np.arange(len(BRANCHES))
    unsettled = np.array([b == "unsettled" for b in BRANCHES])
    for i, ens in enumerate(ensembles):
        rows = table.where(ensemble=ens)
        x = x0 + (i - (len(ensembles) - 1) / 2) * width
        err = np.vstack([rows["fraction"] - rows["low"], rows["high"] - rows["fraction"]])
        bars = ax.bar(
            x,
            rows["fraction"],
            width=width,
            color=ensemble_colour(i),
            yerr=err,
            error_kw={"lw": 0.7, "capsize": 1.5},
            label=f"{ens} (N={int(rows['n'][0])})",
        )
        for bar, branch in zip(bars, rows["branch"]):
            if branch == "unsettled":
                bar.set_facecolor("white")
                bar.set_edgecolor(BRANCH_STYLE["unsettled"][0])
                bar.set_hatch(UNSETTLED_HATCH)
    if unsettled.any():
        ax.axvspan(x0[unsettled][0] - 0.45, x0[unsettled][0] + 0.45, color="0.93", zorder=0)
        handles, labels = ax.get_legend_handles_labels()
        handles.append(Patch(facecolor="white", edgecolor=BRANCH_STYLE["unsettled"][0], hatch=UNSETTLED_HATCH))
        labels.append("unsettled: a snapshot at the end time, not an outcome")
        ax.legend(handles, labels, loc="upper left")
    else:
        _legend(ax, loc="upper right")
    ax.set_xticks(x0, [BRANCH_LABELS[b].replace(" ", "\n", 1) for b in BRANCHES], fontsize=6)
    ax.set_ylabel("fraction of systems")
    ax.set_ylim(0.0, 1.0)


def draw_instability(ax, table: Table) -> None:
    """CDF of the time of the first close encounter (log time), one line per ensemble; the end
    time of the integrations marked (a band when systems had different end times)."""
    for i, ens in enumerate(dict.fromkeys(table["ensemble"].tolist())):
        rows = table.where(ensemble=ens)
        colour = ensemble_colour(i)
        ax.step(
            rows["t_yr"],
            rows["cdf"],
            where="post",
            color=colour,
            ls=_DASHES[i % len(_DASHES)],
            label=f"{ens} (N={int(rows['n_systems'][0])})",
        )
        if len(rows):
            lo, hi = float(rows["t_limit_min_yr"][0]), float(rows["t_limit_max_yr"][0])
            if hi > lo * 1.05:  # a band only when it can be seen on the log axis
                ax.axvspan(lo, hi, color=colour, alpha=0.15, lw=0, label=f"end of the integrations ({ens})")
            else:
                ax.axvline(hi, color=colour, lw=0.9, ls=":", label=f"end of the integrations ({ens})")
    ax.set_xscale("log")
    ax.set_ylim(0.0, 1.0)
    ax.set_xlabel("time of first close encounter [yr]")
    ax.set_ylabel("fraction of systems")
    _legend(ax, loc="upper left")


def draw_e_vs_mass_ratio(ax, points: Table, medians: Table | None = None, *, title: str = "") -> None:
    """Final e against initial mass ratio, points by branch, binned medians with 16–84 % bars
    (each drawn at the median mass ratio of its bin's points, not at the bin centre)."""
    for b in BRANCHES:
        rows = points.where(branch=b)
        if len(rows):
            colour, marker = BRANCH_STYLE[b]
            ax.scatter(
                rows["mass_ratio"], rows["e"], s=5, marker=marker, color=colour, lw=0, alpha=0.7, label=BRANCH_LABELS[b]
            )
    if medians is not None and len(medians):
        mid = medians["x_median"]
        ax.errorbar(
            mid,
            medians["median"],
            yerr=[medians["median"] - medians["p16"], medians["p84"] - medians["median"]],
            fmt="o",
            color=OKABE_ITO["black"],
            ms=3,
            lw=0.9,
            capsize=1.5,
            label="median of settled + likely stable, 16-84 %",
        )
    ax.set_xlim(0.0, 1.02)
    ax.set_ylim(0.0, 1.0)
    ax.set_xlabel(r"initial mass ratio $m_\mathrm{min}/m_\mathrm{max}$")
    ax.set_ylabel("final eccentricity e")
    if title:
        ax.set_title(title)
    _legend(ax, loc="upper left", markerscale=1.5)


def save_figure(fig, stem, formats=("pdf",)) -> list[Path]:
    """Save ``fig`` as ``stem.<format>`` for each format; return the paths."""
    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    paths = []
    for fmt in formats:
        path = stem.with_suffix(f".{fmt}")
        fig.savefig(path, format=fmt)
        paths.append(path)
    return paths
