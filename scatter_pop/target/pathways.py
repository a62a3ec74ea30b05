"""Pathways to a target-like planet and the starting configurations that favour it (pure).

Given the systems of an ensemble and which of them made a planet like the
target (:mod:`scatter_pop.target.judgement`):

:func:`pathways`
    what happened to the other planets (branch and numbers ejected / merged /
    lost to the star), how many survivors remain, when the instability began
    (the first separation below one mutual Hill radius, ``t_first_encounter``),
    and how many matching planets are tidal-circularisation candidates —
    each for the matching systems beside all systems.
:func:`compare_configurations`
    initial mass ratio, closest initial spacing (mutual Hill radii) and
    planet count of the matching systems against the *other* systems:
    medians, Cliff's δ (Cliff 1993, Psychol. Bull. 114, 494; computed from
    the Mann–Whitney U of :func:`scipy.stats.mannwhitneyu`: δ = 2U/(n₁n₂) − 1,
    i.e. P(X > Y) − P(X < Y)) and the two-sample KS p-value
    (:func:`scipy.stats.ks_2samp`).  The test uses matching vs the rest
    because the two samples must be disjoint; the report also shows the median
    over all systems.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.stats

from scatter_pop.survey.statistics import Spread
from scatter_pop.target.branches import BRANCHES

__all__ = ["Pathways", "ConfigComparison", "pathways", "compare_configurations", "CONFIG_QUANTITIES", "MIN_SAMPLE"]

#: fewer values than this in a sample: no percentiles, KS p or Cliff's delta ("too few to compare").
#: Common practice: with 4 values the 16th and 84th percentiles are interpolations between two
#: points, and the smallest two-sided KS p-value of a 1-vs-n comparison cannot fall below 2/(n+1).
MIN_SAMPLE = 5

#: frame attribute -> (description, unit)
CONFIG_QUANTITIES = {
    "mass_ratio": ("initial mass ratio m_min/m_max", ""),
    "spacing": ("closest initial spacing", "mutual Hill radii"),
    "count": ("initial planet count", ""),
}


@dataclass(frozen=True)
class Pathways:
    """How the matching systems got there, beside all systems used.

    Attributes
    ----------
    n_matching, n_all : int
        Matching systems; all systems used.
    n_planets : int
        Matching planets (a system may hold more than one).
    branches : tuple of (str, int, int)
        (branch, matching systems, all systems) for each branch.
    lost_matching, lost_all : dict
        Planets ``ejected``, ``merged`` and lost to the ``star``, summed.
    survivors_left : tuple of (int, int, int)
        (survivors remaining, matching systems, all systems).
    instability_matching, instability_all : Spread
        ``t_first_encounter`` [yr]; ``n`` counts systems that had one.
    tidal_candidates : int
        Matching planets flagged as tidal-circularisation candidates.
    pericentre : Spread
        q = a(1 − e) of the matching planets [AU].
    unsettled_matching : int
        Systems with a planet like the target at the end time whose outcome is not final
        (settlement ``unsettled``: not counted as matching above).
    """

    n_matching: int
    n_all: int
    n_planets: int
    branches: tuple
    lost_matching: dict
    lost_all: dict
    survivors_left: tuple
    instability_matching: Spread
    instability_all: Spread
    tidal_candidates: int
    pericentre: Spread
    unsettled_matching: int = 0


def _lost(frame, sel) -> dict:
    return {
        "ejected": int(frame.n_ejected[sel].sum()),
        "merged": int(frame.n_merged[sel].sum()),
        "star": int(frame.n_star[sel].sum()),
    }


def pathways(frame, sys_match, planet_match, unsettled_matching=None) -> Pathways:
    """Pathways of the matching systems.

    Parameters
    ----------
    frame : scatter_pop.target.judgement.SystemFrame
    sys_match : numpy.ndarray of bool
        Per system: made at least one matching planet.
    planet_match : numpy.ndarray of bool
        Per survivor of the frame: is a matching planet.
    unsettled_matching : numpy.ndarray of bool, optional
        Per system: has a planet like the target but its outcome is not final.
    """
    sys_match = np.asarray(sys_match, dtype=bool)
    planet_match = np.asarray(planet_match, dtype=bool)
    everyone = np.ones_like(sys_match)
    left = sorted(set(frame.n_survivors.tolist()))
    q = frame.s_a[planet_match] * (1.0 - frame.s_e[planet_match])
    return Pathways(
        n_matching=int(sys_match.sum()),
        n_all=int(sys_match.size),
        n_planets=int(planet_match.sum()),
        branches=tuple(
            (b, int(np.sum(frame.branch[sys_match] == b)), int(np.sum(frame.branch == b))) for b in BRANCHES
        ),
        lost_matching=_lost(frame, sys_match),
        lost_all=_lost(frame, everyone),
        survivors_left=tuple(
            (int(k), int(np.sum(frame.n_survivors[sys_match] == k)), int(np.sum(frame.n_survivors == k))) for k in left
        ),
        instability_matching=Spread.of(frame.t_encounter[sys_match]),
        instability_all=Spread.of(frame.t_encounter),
        tidal_candidates=int(frame.s_tidal[planet_match].sum()),
        pericentre=Spread.of(q),
        unsettled_matching=0 if unsettled_matching is None else int(np.sum(unsettled_matching)),
    )


@dataclass(frozen=True)
class ConfigComparison:
    """One starting-configuration quantity, matching systems against the rest.

    Attributes
    ----------
    key : str
        ``mass_ratio``, ``spacing`` or ``count``.
    quantity, unit : str
        Description and unit for reports.
    median_matching, median_all : float
        Medians among matching systems and among all systems.
    n_matching, n_rest : int
        Sample sizes of the test (finite values only).
    cliffs_delta : float
        P(X_match > X_rest) − P(X_match < X_rest), in [−1, 1]; NaN if a sample has fewer than
        :data:`MIN_SAMPLE` values.
    ks_pvalue : float
        Two-sample KS p-value, matching vs rest; NaN likewise.
    """

    key: str
    quantity: str
    unit: str
    median_matching: float
    median_all: float
    n_matching: int
    n_rest: int
    cliffs_delta: float
    ks_pvalue: float

    @property
    def too_few(self) -> bool:
        """Fewer than :data:`MIN_SAMPLE` values on one side: nothing to compare."""
        return min(self.n_matching, self.n_rest) < MIN_SAMPLE


def _median(v) -> float:
    v = v[np.isfinite(v)]
    return float(np.median(v)) if v.size else math.nan


def compare_configurations(frame, sys_match, among=None) -> tuple[ConfigComparison, ...]:
    """Starting configurations of matching systems vs the rest (see the module docstring).

    Parameters
    ----------
    frame : scatter_pop.target.judgement.SystemFrame
    sys_match : numpy.ndarray of bool
        Per system: made at least one matching planet.
    among : numpy.ndarray of bool, optional
        Systems the "rest" is drawn from (default all); the medians over all use these too.
    """
    sys_match = np.asarray(sys_match, dtype=bool)
    among = np.ones_like(sys_match) if among is None else np.asarray(among, dtype=bool)
    out = []
    for key, (quantity, unit) in CONFIG_QUANTITIES.items():
        v = np.asarray(getattr(frame, key), dtype=float)
        x = v[sys_match & np.isfinite(v)]
        y = v[~sys_match & among & np.isfinite(v)]
        delta = ks_p = math.nan
        if min(x.size, y.size) >= MIN_SAMPLE:
            u = scipy.stats.mannwhitneyu(x, y, alternative="two-sided").statistic
            delta = float(2.0 * u / (x.size * y.size) - 1.0)
            ks_p = float(scipy.stats.ks_2samp(x, y, method="auto").pvalue)
        out.append(
            ConfigComparison(key, quantity, unit, _median(x), _median(v[among]), int(x.size), int(y.size), delta, ks_p)
        )
    return tuple(out)
