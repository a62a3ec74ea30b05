"""The numbers each paper figure plots, as tables (pure: datasets in, tables out).

Every figure of :mod:`scatter_pop.paper.drawing` draws one or more :class:`Table`
made here and nothing else; the same tables are written as CSV beside the
figure, so a reader can check or re-plot every point.  Units are in the
column names (``a_au``, ``t_yr``); masses never appear (mass ratios only).

Survivors are :func:`scatter_pop.store.schema.survivor_mask`'s (fate ``survived``: bound planets)
of the systems that pass :func:`scatter_pop.store.schema.quality_mask` (failed, capped and
energy-flagged systems left out), the same rule as
:func:`scatter_pop.survey.forward_model.survivor_table`.  Systems whose outcome is not final
(settlement ``unsettled``) are their own branch, ``unsettled``, in every figure.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from scatter_pop.store.schema import QualityCuts, quality_mask, survivor_mask
from scatter_pop.target.architecture import mass_ratio
from scatter_pop.target.branches import BRANCHES, branching_ratios, planet_branch

__all__ = [
    "Table",
    "E_BINS",
    "PERICENTRE_LINES_AU",
    "bound_survivors",
    "e_histogram_by_branch",
    "ecdf",
    "e_cdf_table",
    "comparison_stats_table",
    "a_e_points",
    "pericentre_lines",
    "survivors_a_range",
    "target_table",
    "branching_table",
    "instability_cdf",
    "e_vs_mass_ratio",
    "binned_median",
]

E_BINS = np.linspace(0.0, 1.0, 21)  # final-e histogram bins (width 0.05)
PERICENTRE_LINES_AU = (0.05, 0.1, 0.5, 1.0, 2.0)  # lines of constant q = a(1 - e) [AU]


@dataclass
class Table:
    """Named columns of equal length, in order.

    Attributes
    ----------
    columns : dict of str -> numpy.ndarray
        Column name (with its unit, e.g. ``a_au``) -> values.
    """

    columns: dict = field(default_factory=dict)

    def __getitem__(self, name: str) -> np.ndarray:
        return self.columns[name]

    def __len__(self) -> int:
        return len(next(iter(self.columns.values()))) if self.columns else 0

    def where(self, **equal) -> Table:
        """Rows whose columns equal the given values, e.g. ``t.where(ensemble="A")``."""
        keep = np.ones(len(self), dtype=bool)
        for name, value in equal.items():
            keep &= self.columns[name] == value
        return Table({k: v[keep] for k, v in self.columns.items()})

    def write_csv(self, path) -> None:
        """Write the table as CSV (header line of column names; floats with repr precision)."""
        path = Path(path)
        with path.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(list(self.columns))
            for row in zip(*self.columns.values()):
                w.writerow(
                    [
                        repr(float(x))
                        if isinstance(x, (float, np.floating))
                        else (int(x) if isinstance(x, (np.integer, np.bool_)) else x)
                        for x in row
                    ]
                )


def _table(**columns) -> Table:
    return Table({k: np.asarray(v) for k, v in columns.items()})


def _concat(tables: list[Table]) -> Table:
    tables = [t for t in tables if t.columns]
    if not tables:
        return Table()
    return Table({k: np.concatenate([t.columns[k] for t in tables]) for k in tables[0].columns})


def bound_survivors(ds: xr.Dataset, quality: QualityCuts = QualityCuts()) -> np.ndarray:
    """Mask (system × planet) of bound survivors of the systems used."""
    return np.asarray(survivor_mask(ds, quality).values, dtype=bool)


def e_histogram_by_branch(runs, *, bins=E_BINS, quality: QualityCuts = QualityCuts()) -> Table:
    """Counts of survivors' final e per bin, per outcome branch, per ensemble.

    Parameters
    ----------
    runs : sequence of (str, xarray.Dataset)
        Label and dataset of each ensemble.
    bins : array_like
        Bin edges of e (dimensionless).
    quality : QualityCuts
        Which systems are used (see :func:`bound_survivors`).

    Returns
    -------
    Table
        ``ensemble``, ``branch``, ``e_low``, ``e_high``, ``count``.
    """
    bins = np.asarray(bins, dtype=float)
    out = []
    for label, ds in runs:
        keep = bound_survivors(ds, quality)
        e, branch = ds["e_final"].values[keep], planet_branch(ds)[keep]
        for b in BRANCHES:
            counts, _ = np.histogram(e[branch == b], bins=bins)
            out.append(
                _table(
                    ensemble=[label] * counts.size,
                    branch=[b] * counts.size,
                    e_low=bins[:-1],
                    e_high=bins[1:],
                    count=counts,
                )
            )
    return _concat(out)


def ecdf(values) -> tuple[np.ndarray, np.ndarray]:
    """Empirical CDF: sorted finite values x and F(x) = (rank)/n at each."""
    x = np.sort(np.asarray(values, dtype=float)[np.isfinite(values)])
    return x, np.arange(1, x.size + 1) / x.size


def e_cdf_table(samples, observed_e=None) -> Table:
    """Empirical CDFs of e for each sample and, optionally, the observed one.

    Parameters
    ----------
    samples : sequence of (str, array_like)
        Label and eccentricities of each simulated sample.
    observed_e : array_like, optional
        Observed eccentricities (sample label "observed").

    Returns
    -------
    Table
        ``sample``, ``e``, ``cdf``.
    """
    pairs = list(samples) + ([("observed", observed_e)] if observed_e is not None else [])
    out = []
    for label, e in pairs:
        x, f = ecdf(e)
        out.append(_table(sample=[label] * x.size, e=x, cdf=f))
    return _concat(out)


def comparison_stats_table(rows) -> Table:
    """KS and Anderson–Darling results of each sample against the observed one.

    Parameters
    ----------
    rows : sequence of (str, scatter_pop.survey.statistics.TwoSampleResult)

    Returns
    -------
    Table
        ``sample``, ``n_sim``, ``n_obs``, ``ks_d``, ``ks_p``, ``ad_t``, ``ad_p``,
        ``ad_permutations``.
    """
    rows = list(rows)
    return _table(
        sample=[r[0] for r in rows],
        n_sim=[r[1].n_x for r in rows],
        n_obs=[r[1].n_y for r in rows],
        ks_d=[r[1].ks_statistic for r in rows],
        ks_p=[r[1].ks_pvalue for r in rows],
        ad_t=[r[1].ad_statistic for r in rows],
        ad_p=[r[1].ad_pvalue for r in rows],
        ad_permutations=[r[1].permutations for r in rows],
    )


def a_e_points(runs, quality: QualityCuts = QualityCuts()) -> Table:
    """Survivors in the a–e plane: ``ensemble``, ``branch``, ``a_au``, ``e``, ``q_au``."""
    out = []
    for label, ds in runs:
        keep = bound_survivors(ds, quality)
        a, e = ds["a_final"].values[keep], ds["e_final"].values[keep]
        out.append(_table(ensemble=[label] * a.size, branch=planet_branch(ds)[keep], a_au=a, e=e, q_au=a * (1.0 - e)))
    return _concat(out)


def survivors_a_range(points: Table, margin: float = 1.25) -> tuple[float, float]:
    """The a range [AU] of the a–e plane: the survivors' range widened by ``margin`` each way
    (a decade around 1 AU when there are none)."""
    a = points["a_au"] if len(points) else np.array([])
    a = a[np.isfinite(a) & (a > 0)]
    if a.size == 0:
        return 0.3, 3.0
    lo, hi = float(a.min()) / margin, float(a.max()) * margin
    return (lo, hi) if hi > lo * 1.5 else (lo / 1.25, hi * 1.25)


def pericentre_lines(a_min: float, a_max: float, q_values=None, n: int = 200) -> Table:
    """Lines of constant pericentre e = 1 − q/a on a log grid of a [AU] (e >= 0 only).

    Without ``q_values``: those of :data:`PERICENTRE_LINES_AU` that cross the range, or, when
    none does, three pericentres spread over it.

    Returns
    -------
    Table
        ``q_au``, ``a_au``, ``e``.
    """
    a = np.geomspace(a_min, a_max, n)
    if q_values is None:
        q_values = [q for q in PERICENTRE_LINES_AU if a_min * 0.05 < q < a_max * 0.95]
        if not q_values:
            q_values = [float(f"{x:.2g}") for x in np.geomspace(a_min * 0.2, a_max * 0.8, 3)]
    out = []
    for q in q_values:
        sel = a >= q
        out.append(_table(q_au=np.full(int(sel.sum()), q), a_au=a[sel], e=1.0 - q / a[sel]))
    return _concat(out)


def target_table(target) -> Table:
    """The target with its 1σ errors: ``name``, ``a_au``, ``a_err_au``, ``e``, ``e_err``."""
    return _table(name=[target.name], a_au=[target.a], a_err_au=[target.a_err], e=[target.e], e_err=[target.e_err])


def branching_table(
    runs, *, confidence: float = 0.95, method: str = "exact", quality: QualityCuts = QualityCuts()
) -> Table:
    """Fraction of systems in each branch with binomial intervals.

    Returns
    -------
    Table
        ``ensemble``, ``branch``, ``k``, ``n``, ``fraction``, ``low``, ``high``.
    """
    out = []
    for label, ds in runs:
        rows = branching_ratios(ds, mask=quality_mask(ds, quality), confidence=confidence, method=method)
        out.append(
            _table(
                ensemble=[label] * len(rows),
                branch=[r.branch for r in rows],
                k=[r.proportion.k for r in rows],
                n=[r.proportion.n for r in rows],
                fraction=[r.proportion.fraction for r in rows],
                low=[r.proportion.low for r in rows],
                high=[r.proportion.high for r in rows],
            )
        )
    return _concat(out)


def instability_cdf(runs, quality: QualityCuts = QualityCuts()) -> Table:
    """CDF of the time of the first close encounter, over all systems used.

    Systems that never had one are in the denominator but not in the curve,
    so the curve ends at the fraction of systems that went unstable.

    Returns
    -------
    Table
        ``ensemble``, ``t_yr``, ``cdf``, ``n_systems``, and the end times the systems were
        integrated towards, ``t_limit_min_yr`` and ``t_limit_max_yr`` (no encounter after
        them can be seen).
    """
    out = []
    for label, ds in runs:
        use = np.asarray(quality_mask(ds, quality).values, dtype=bool)
        t = ds["t_first_encounter"].values[use].astype(float)
        n = int(use.sum())
        x = np.sort(t[np.isfinite(t)])
        limit = ds["t_limit"].values[use].astype(float)
        limit = limit[np.isfinite(limit)]
        lo, hi = (float(limit.min()), float(limit.max())) if limit.size else (np.nan, np.nan)
        out.append(
            _table(
                ensemble=[label] * x.size,
                t_yr=x,
                cdf=np.arange(1, x.size + 1) / max(n, 1),
                n_systems=np.full(x.size, n),
                t_limit_min_yr=np.full(x.size, lo),
                t_limit_max_yr=np.full(x.size, hi),
            )
        )
    return _concat(out)


def e_vs_mass_ratio(runs, quality: QualityCuts = QualityCuts()) -> Table:
    """Survivors' final e against their system's initial mass ratio m_min/m_max.

    Returns
    -------
    Table
        ``ensemble``, ``branch``, ``mass_ratio``, ``e``.
    """
    out = []
    for label, ds in runs:
        keep = bound_survivors(ds, quality)
        q = np.repeat(mass_ratio(ds)[:, None], ds.sizes["planet"], axis=1)[keep]
        out.append(
            _table(
                ensemble=[label] * q.size, branch=planet_branch(ds)[keep], mass_ratio=q, e=ds["e_final"].values[keep]
            )
        )
    return _concat(out)


def binned_median(points: Table, x: str, y: str, edges, *, group: str = "ensemble", min_count: int = 5) -> Table:
    """Median of ``y`` in bins of ``x`` per group (bins with fewer than ``min_count`` points dropped).

    Returns
    -------
    Table
        ``<group>``, ``x_low``, ``x_high``, ``x_median`` (median x of the bin's points: where the
        median is drawn, on the data), ``median``, ``p16``, ``p84``, ``count``.
    """
    edges = np.asarray(edges, dtype=float)
    out = []
    for g in dict.fromkeys(points[group].tolist()):
        sub = points.where(**{group: g})
        idx = np.digitize(sub[x], edges) - 1
        idx[sub[x] == edges[-1]] = edges.size - 2  # the last bin is closed on the right
        rows = []
        for i in range(edges.size - 1):
            v = sub[y][idx == i]
            if v.size >= min_count:
                p16, med, p84 = np.percentile(v, [16, 50, 84])
                rows.append((edges[i], edges[i + 1], float(np.median(sub[x][idx == i])), med, p16, p84, v.size))
        if rows:
            lo, hi, xm, med, p16, p84, cnt = map(np.asarray, zip(*rows))
            out.append(
                _table(
                    **{group: [g] * lo.size},
                    x_low=lo,
                    x_high=hi,
                    x_median=xm,
                    median=med,
                    p16=p16,
                    p84=p84,
                    count=cnt,
                )
            )
    return _concat(out)
