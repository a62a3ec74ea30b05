"""One ensemble's systems and survivors as arrays (:class:`SystemFrame`), the input of :func:`judge`.

:func:`system_frame` reads a dataset once — survivors from the forward model's one survivor table,
branches, starting configurations, settlement classes and quality cuts — and :func:`pool_frames`
joins the frames of several ensembles (pure: datasets in, arrays out).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import xarray as xr

from scatter_pop.store.schema import QualityCuts, quality_mask
from scatter_pop.survey.forward_model import ensemble_star_mass, quality_counts, survivor_table
from scatter_pop.target.architecture import mass_ratio, min_spacing, planet_count
from scatter_pop.target.branches import system_branch
from scatter_pop.target.planet import Target

__all__ = ["SystemFrame", "system_frame", "pool_frames"]


@dataclass
class SystemFrame:
    """Per-system and per-survivor arrays of one ensemble (or several pooled).

    Everything the judgement needs, already masked to the systems used;
    built by :func:`system_frame`, pooled by :func:`pool_frames`.
    """

    label: str
    n_total: int
    excluded: dict
    branch: np.ndarray  # per system: branch name
    n_survivors: np.ndarray
    n_ejected: np.ndarray
    n_merged: np.ndarray
    n_star: np.ndarray
    t_encounter: np.ndarray  # yr
    mass_ratio: np.ndarray
    spacing: np.ndarray  # mutual Hill radii
    count: np.ndarray
    settlement: np.ndarray  # Settlement code per system
    t_end: np.ndarray  # yr
    s_system: np.ndarray  # per survivor: position of its system in the arrays above
    s_e: np.ndarray
    s_a: np.ndarray  # AU
    s_mass: np.ndarray  # M_sun, true (scaled by mass_scale)
    s_msini: np.ndarray  # M_sun, projected
    s_tidal: np.ndarray  # bool
    mass_scale: float
    star_mass: float | None


def system_frame(
    ds: xr.Dataset,
    *,
    label: str,
    target: Target,
    seed: int = 0,
    quality: QualityCuts = QualityCuts(),
) -> SystemFrame:
    """Extract the arrays of one ensemble (systems used only).

    Parameters
    ----------
    ds : xarray.Dataset
        Ensemble dataset (:mod:`scatter_pop.store.schema`).
    label : str
        Name of the ensemble in reports.
    target : Target
        Its ``mstar`` [M_sun] (mass scaling) and ``true_mass`` (no projection)
        are used here.
    seed : int
        Seed of the lines of sight (one isotropic line of sight per system,
        :func:`scatter_pop.survey.forward_model.survivor_table`).
    quality : QualityCuts
        Which systems are used (|ΔE/E| tolerance, capped systems kept or not).
    """
    use = np.asarray(quality_mask(ds, quality).values, dtype=bool)
    counts = quality_counts(ds, quality)
    excluded = {"failed": counts["failed"], "capped": counts["capped"], "energy": counts["energy_error"]}
    m_star = ensemble_star_mass(ds, name=label)
    scale = target.mstar / m_star if target.mstar is not None else 1.0
    table = survivor_table(
        ds,
        rng=np.random.default_rng(seed),
        project_sin_i=not target.true_mass,
        quality=quality,
    )
    ids = ds["system"].values
    order = np.argsort(ids, kind="stable")
    row = order[np.searchsorted(ids, table["system"], sorter=order)]  # position in ds
    pos = np.cumsum(use) - 1  # position among used systems
    n_surv = ds["n_survivors"].values[use].astype(int)
    return SystemFrame(
        label=label,
        n_total=int(ds.sizes["system"]),
        excluded=excluded,
        branch=system_branch(ds)[use],
        n_survivors=n_surv,
        n_ejected=ds["n_ejected"].values[use].astype(int),
        n_merged=ds["n_merged"].values[use].astype(int),
        n_star=ds["n_star"].values[use].astype(int),
        t_encounter=ds["t_first_encounter"].values[use].astype(float),
        mass_ratio=mass_ratio(ds)[use],
        spacing=min_spacing(ds, m_star)[use],
        count=planet_count(ds)[use],
        settlement=ds["settlement"].values[use].astype(int),
        t_end=ds["t_end"].values[use].astype(float),
        s_system=pos[row],
        s_e=table["e"],
        s_a=table["a"],
        s_mass=table["mass"] * scale,
        s_msini=table["msini"] * scale,
        s_tidal=ds["tidal_candidate"].values[row, table["planet"]] == 1,
        mass_scale=float(scale),
        star_mass=m_star,
    )


def pool_frames(frames: list[SystemFrame], label: str = "all ensembles") -> SystemFrame:
    """Concatenate frames of several ensembles into one (a mixture weighted by size)."""
    offsets = np.cumsum([0] + [f.branch.size for f in frames])[:-1]
    cat = lambda name: np.concatenate([getattr(f, name) for f in frames])  # noqa: E731
    per_system = (
        "branch",
        "n_survivors",
        "n_ejected",
        "n_merged",
        "n_star",
        "t_encounter",
        "mass_ratio",
        "spacing",
        "count",
        "settlement",
        "t_end",
    )
    per_survivor = ("s_e", "s_a", "s_mass", "s_msini", "s_tidal")
    scales = {f.mass_scale for f in frames}
    stars = {f.star_mass for f in frames}
    return SystemFrame(
        label=label,
        n_total=sum(f.n_total for f in frames),
        excluded={k: sum(f.excluded[k] for f in frames) for k in frames[0].excluded},
        **{n: cat(n) for n in per_system + per_survivor},
        s_system=np.concatenate([f.s_system + o for f, o in zip(frames, offsets)]),
        mass_scale=scales.pop() if len(scales) == 1 else float("nan"),
        star_mass=stars.pop() if len(stars) == 1 else None,
    )
