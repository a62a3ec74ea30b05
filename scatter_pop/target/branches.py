"""Outcome branches of systems: which kinds of planet loss happened (pure).

Every system that entered the statistics falls in exactly one branch, from
its counts ``n_ejected``, ``n_merged`` and ``n_star`` (see
:mod:`scatter_pop.store.schema`):

``none``      no planet was lost (all survived to the end);
``ejection``  only ejections;
``merger``    only planet–planet mergers;
``star``      only losses to the star (collision or tidal disruption);
``several``   more than one of these kinds (e.g. an ejection and a merger);
``unsettled`` the outcome is not final (settlement class ``unsettled``: a snapshot at the end
              time, whatever was lost before) — its own category, never mixed with the others.

:func:`branching_ratios` gives the fraction of systems in each branch with
its binomial interval (:mod:`scatter_pop.target.proportions`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import xarray as xr

from scatter_pop.engine.outcome import Settlement
from scatter_pop.store.schema import quality_mask
from scatter_pop.target.proportions import Proportion, proportion

__all__ = ["BRANCHES", "BRANCH_LABELS", "system_branch", "planet_branch", "BranchRatio", "branching_ratios"]

BRANCHES = ("none", "ejection", "merger", "star", "several", "unsettled")

#: words for axis labels, legends and tables
BRANCH_LABELS = {
    "none": "no planet lost",
    "ejection": "ejection",
    "merger": "merger",
    "star": "lost to star",
    "several": "several kinds of loss",
    "unsettled": "unsettled (snapshot)",
}


def system_branch(ds: xr.Dataset) -> np.ndarray:
    """Branch name of every system (array of str over ``system``).

    Systems without a result (failed: negative counts) get "" — they are
    left out by :func:`scatter_pop.store.schema.quality_mask` anyway.
    """
    ej = np.asarray(ds["n_ejected"].values, dtype=int)
    me = np.asarray(ds["n_merged"].values, dtype=int)
    st = np.asarray(ds["n_star"].values, dtype=int)
    kinds = (ej > 0).astype(int) + (me > 0) + (st > 0)
    out = np.full(ej.shape, "none", dtype=object)
    out[(kinds == 1) & (ej > 0)] = "ejection"
    out[(kinds == 1) & (me > 0)] = "merger"
    out[(kinds == 1) & (st > 0)] = "star"
    out[kinds > 1] = "several"
    out[np.asarray(ds["settlement"].values) == int(Settlement.UNSETTLED)] = "unsettled"
    out[(ej < 0) | (me < 0) | (st < 0)] = ""
    return out.astype(str)


def planet_branch(ds: xr.Dataset) -> np.ndarray:
    """Branch of each planet's system, broadcast over (system, planet)."""
    b = system_branch(ds)
    return np.repeat(b[:, None], ds.sizes["planet"], axis=1)


@dataclass(frozen=True)
class BranchRatio:
    """Fraction of systems in one branch.

    Attributes
    ----------
    branch : str
        One of :data:`BRANCHES`.
    proportion : Proportion
        Systems in the branch out of the systems used, with its interval.
    """

    branch: str
    proportion: Proportion


def branching_ratios(
    ds: xr.Dataset, *, mask=None, confidence: float = 0.95, method: str = "exact"
) -> tuple[BranchRatio, ...]:
    """Fraction of systems in each branch, with binomial intervals.

    Parameters
    ----------
    ds : xarray.Dataset
        An ensemble dataset (:mod:`scatter_pop.store.schema`).
    mask : array_like of bool over ``system``, optional
        Systems to count; default :func:`scatter_pop.store.schema.quality_mask`
        (failed, capped and energy-flagged systems left out).
    confidence : float
        Two-sided confidence level of the intervals.
    method : {"exact", "wilson"}
        Clopper–Pearson or Wilson interval.
    """
    if mask is None:
        mask = quality_mask(ds)
    mask = np.asarray(mask, dtype=bool)
    branch = system_branch(ds)[mask]
    n = int(mask.sum())
    return tuple(
        BranchRatio(b, proportion(int(np.sum(branch == b)), n, confidence=confidence, method=method)) for b in BRANCHES
    )
