"""Hand-made ensembles for tests of the judge, figures and tables.

Outcome records are written by hand (no integration), so every count in
them is known; the dataset is built by the one schema function
(``scatter_pop.store.schema.records_to_dataset``) and written where a run folder
keeps it (``DIR/ensemble.nc``).  Masses in M_J here, converted to M_sun.
"""

from __future__ import annotations

import math
from pathlib import Path

from scatter_pop.constants import MJUP_MSUN, R_JUP_AU
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, SystemRecord
from scatter_pop.store.schema import records_to_dataset

__all__ = ["planet", "system", "dataset", "write_run"]


def planet(m_mj=1.0, a0=5.0, a=5.0, e=0.1, fate=Fate.SURVIVED, tidal=False, t_fate=100.0):
    """One planet record; ``m_mj`` in M_J, ``a0``/``a`` in AU."""
    survived = fate == Fate.SURVIVED
    return PlanetRecord(
        mass_initial=m_mj * MJUP_MSUN, a_initial=a0, e_initial=0.01, inc_initial=0.01,
        radius_initial=R_JUP_AU, mass_final=m_mj * MJUP_MSUN, a_final=a, e_final=e, inc_final=0.05,
        q_final=a * (1.0 - e), radius_final=R_JUP_AU, fate=fate,
        t_fate=math.nan if survived else t_fate, tidal_candidate=tidal)


def system(index, planets, *, reason=EndReason.ONE_PLANET, t_enc=1e3, t_end=1e5, energy=1e-9):
    """One system record with the given planets."""
    return SystemRecord(index=index, seed=1000 + index, planets=tuple(planets), t_end=t_end,
                        end_reason=reason, t_first_encounter=t_enc, energy_error=energy,
                        angmom_error=1e-10, steps=100, wall_seconds=0.1)


def dataset(records, n_planets, star_mass=1.0):
    """Dataset of the records, with the star mass recorded as a run's spec would."""
    ds = records_to_dataset(list(records), n_planets)
    ds.attrs["spec_toml"] = f"[star]\nmass = {star_mass!r}\n"
    return ds


def write_run(folder, records, n_planets, star_mass=1.0) -> Path:
    """Write ``folder/ensemble.nc``; return the folder."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    dataset(records, n_planets, star_mass).to_netcdf(folder / "ensemble.nc")
    return folder
