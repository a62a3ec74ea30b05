"""Hand-made ensembles for the comparison tests (not real integrations).

Each system has a known set of final orbits, written with the project's own
schema (scatter_pop.store.schema.records_to_dataset), so the tests know exactly what
a reader of ensemble.nc must find.
"""

from __future__ import annotations

import math

import numpy as np

from scatter_pop.constants import MJUP_MSUN, R_JUP_AU
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, SystemRecord
from scatter_pop.store.schema import records_to_dataset


def planet(mass_mj, a, e, *, inc=0.0, node=0.0, fate=Fate.SURVIVED, a_initial=None):
    m = mass_mj * MJUP_MSUN
    return PlanetRecord(
        mass_initial=m, a_initial=a if a_initial is None else a_initial, e_initial=0.01,
        inc_initial=0.01, radius_initial=R_JUP_AU, mass_final=m, a_final=a, e_final=e,
        inc_final=inc, q_final=a * (1 - e), radius_final=R_JUP_AU, omega_final=0.0,
        node_final=node, fate=fate, t_fate=math.nan if fate == Fate.SURVIVED else 1e4)


def system(index, planets, *, end_reason=EndReason.ONE_PLANET, energy_error=1e-8):
    return SystemRecord(index=index, seed=1000 + index, planets=tuple(planets), t_end=1e6,
                        end_reason=end_reason, energy_error=energy_error, angmom_error=1e-9)


def random_ensemble(n, seed, e_sampler, *, star_mass=1.0, mass_mj=(0.5, 10.0), a_range=(0.5, 5.0)):
    """n two-planet systems: the inner planet survives with e from ``e_sampler(rng)``, the
    outer one is ejected.  Orbit normals are random within 0.3 rad of the reference axis."""
    rng = np.random.default_rng(seed)
    records = []
    for i in range(n):
        a = float(np.exp(rng.uniform(*np.log(a_range))))
        m = float(rng.uniform(*mass_mj))
        records.append(system(i, [
            planet(m, a, float(e_sampler(rng)), inc=float(rng.uniform(0, 0.3)),
                   node=float(rng.uniform(0, 2 * math.pi)), a_initial=a * 1.5),
            planet(m, -10.0, 1.5, fate=Fate.EJECTED, a_initial=a * 2.0),
        ]))
    ds = records_to_dataset(records, 2)
    ds.attrs["star_mass"] = star_mass
    return ds


def write_run(folder, ds):
    """Write ``ds`` as ``folder/ensemble.nc`` and return the folder."""
    folder.mkdir(parents=True, exist_ok=True)
    ds.to_netcdf(folder / "ensemble.nc", engine="netcdf4")
    return folder
