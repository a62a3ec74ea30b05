"""Hand-made outcome records for tests of the survey comparison, the judge, figures and tables.

Records are written by hand (no integration), so every count in them is known; the dataset is built
by the one schema function (``scatter_pop.store.schema.records_to_dataset``) and written where a
run folder keeps it (``DIR/ensemble.nc``).  Masses in M_J here, converted to M_sun; lengths in AU.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from scatter_pop.constants import MJUP_MSUN, R_JUP_AU
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, Settlement, SystemRecord
from scatter_pop.engine.settlement import classify
from scatter_pop.store.schema import records_to_dataset

__all__ = ["planet", "system", "dataset", "random_ensemble", "write_run"]


def planet(
    mass_mj=1.0, a=5.0, e=0.1, *, a_initial=None, inc=0.05, node=0.0, fate=Fate.SURVIVED, tidal=False, t_fate=100.0
):
    """One planet record: ``mass_mj`` in M_J, final ``a`` (AU) and ``e``; ``a_initial`` defaults to ``a``."""
    m = mass_mj * MJUP_MSUN
    return PlanetRecord(
        mass_initial=m,
        a_initial=a if a_initial is None else a_initial,
        e_initial=0.01,
        inc_initial=0.01,
        radius_initial=R_JUP_AU,
        mass_final=m,
        a_final=a,
        e_final=e,
        inc_final=inc,
        q_final=a * (1.0 - e),
        radius_final=R_JUP_AU,
        omega_final=0.0,
        node_final=node,
        fate=fate,
        t_fate=math.nan if fate == Fate.SURVIVED else t_fate,
        tidal_candidate=tidal,
    )


def system(
    index,
    planets,
    *,
    reason=EndReason.ONE_PLANET,
    t_enc=1e3,
    t_end=1e5,
    energy=1e-9,
    hill_ratio=math.nan,
    recent_gap=math.nan,
    star_mass=1.0,
    hill_margin=1.01,
):
    """One system record with the given planets; its settlement class comes from the engine's rule
    (``scatter_pop.engine.settlement.classify``) with ``hill_ratio``, ``recent_gap`` and the star mass."""
    planets = tuple(planets)
    settlement = classify(
        reason, planets, star_mass, hill_ratio=hill_ratio, recent_gap=recent_gap, hill_margin=hill_margin
    )
    return SystemRecord(
        index=index,
        seed=1000 + index,
        planets=planets,
        t_end=t_end,
        end_reason=reason,
        t_first_encounter=t_enc,
        energy_error=energy,
        angmom_error=1e-10,
        steps=100,
        wall_seconds=0.1,
        t_limit=t_end,
        hill_ratio=hill_ratio,
        recent_gap=recent_gap,
        settlement=Settlement.UNSETTLED if settlement is None else settlement,
    )


def dataset(records, n_planets, star_mass=1.0):
    """Dataset of the records, with the star mass recorded as a run's spec would."""
    ds = records_to_dataset(list(records), n_planets)
    ds.attrs["spec_toml"] = f"[star]\nmass = {star_mass!r}\n"
    return ds


def random_ensemble(n, seed, e_sampler, *, star_mass=1.0, mass_mj=(0.5, 10.0), a_range=(0.5, 5.0)):
    """n two-planet systems: the inner planet survives with e from ``e_sampler(rng)``, the
    outer one is ejected.  Orbit normals are random within 0.3 rad of the reference axis."""
    rng = np.random.default_rng(seed)
    records = []
    for i in range(n):
        a = float(np.exp(rng.uniform(*np.log(a_range))))
        m = float(rng.uniform(*mass_mj))
        records.append(
            system(
                i,
                [
                    planet(
                        m,
                        a,
                        float(e_sampler(rng)),
                        inc=float(rng.uniform(0, 0.3)),
                        node=float(rng.uniform(0, 2 * math.pi)),
                        a_initial=a * 1.5,
                    ),
                    planet(m, -10.0, 1.5, fate=Fate.EJECTED, a_initial=a * 2.0),
                ],
                t_end=1e6,
                energy=1e-8,
            )
        )
    ds = records_to_dataset(records, 2)
    ds.attrs["star_mass"] = star_mass  # as a run records it, without the spec text
    return ds


def write_run(folder, records_or_dataset, n_planets=None, star_mass=1.0) -> Path:
    """Write ``folder/ensemble.nc`` from records (with ``n_planets``) or a dataset; return the folder."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    ds = records_or_dataset if n_planets is None else dataset(records_or_dataset, n_planets, star_mass)
    ds.to_netcdf(folder / "ensemble.nc", engine="netcdf4")
    return folder
