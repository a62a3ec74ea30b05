"""Initial architecture of each system: planet count, mass ratio, spacing (pure).

These are the starting-configuration quantities that :mod:`scatter_pop.target.judgement`
compares between systems that make a target-like planet and the rest, and
that the figures plot final eccentricities against.

Spacing is measured in mutual Hill radii (Chambers, Wetherill & Boss 1996,
Icarus 119, 261; Gladman 1993, Icarus 106, 247):

    R_H,m = [(m_i + m_{i+1}) / (3 M*)]^{1/3} (a_i + a_{i+1}) / 2,
    Δ_i  = (a_{i+1} − a_i) / R_H,m.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from scatter_pop.engine.stability import hill_spacing

__all__ = ["planet_count", "mass_ratio", "min_spacing"]


def planet_count(ds: xr.Dataset) -> np.ndarray:
    """Initial number of planets of each system (int array over ``system``)."""
    return np.sum(np.isfinite(ds["mass_initial"].values) & (ds["mass_initial"].values > 0), axis=1).astype(int)


def mass_ratio(ds: xr.Dataset) -> np.ndarray:
    """Initial mass ratio m_min / m_max of each system (dimensionless, in (0, 1]).

    1 means equal masses; small values a system with one dominant planet.
    """
    m = np.where(ds["mass_initial"].values > 0, ds["mass_initial"].values, np.nan)
    with np.errstate(invalid="ignore"):
        return np.nanmin(m, axis=1) / np.nanmax(m, axis=1)


def min_spacing(ds: xr.Dataset, m_star: float) -> np.ndarray:
    """Smallest initial neighbour separation of each system, in mutual Hill radii.

    Parameters
    ----------
    ds : xarray.Dataset
        Ensemble dataset (``a_initial`` [AU], ``mass_initial`` [M_sun]).
    m_star : float
        Stellar mass [M_sun].

    Returns
    -------
    numpy.ndarray
        One value per system (NaN for systems with fewer than two planets).
    """
    a = ds["a_initial"].values.astype(float)
    m = ds["mass_initial"].values.astype(float)
    order = np.argsort(np.where(np.isfinite(a), a, np.inf), axis=1)
    a = np.take_along_axis(a, order, axis=1)
    m = np.take_along_axis(m, order, axis=1)
    if a.shape[1] < 2:
        return np.full(a.shape[0], np.nan)
    with np.errstate(invalid="ignore"):
        d = hill_spacing(m_star, m[:, :-1], m[:, 1:], a[:, :-1], a[:, 1:])
        d = np.where(np.isfinite(d), d, np.inf)
        out = d.min(axis=1)
    return np.where(np.isfinite(out), out, np.nan)
