"""Stage 1 — the ensemble spec: a TOML file read into frozen dataclasses, every key checked, units
converted once to AU, yr, M_sun and radians.

``reader`` holds the spec sections, their ``KEYS`` and :func:`load_spec`; ``cluster_table`` the ``[cluster]`` table
(what kind of Dask cluster runs the ensemble, walltimes); ``keys`` the one key-table checker both use.
"""

from scatter_pop.spec.cluster_table import ClusterConfig, load_cluster_file
from scatter_pop.spec.reader import (
    INTEGRATORS,
    Distribution,
    EnsembleSpec,
    IntegrationSpec,
    OutcomeSpec,
    PlanetsSpec,
    RunSpec,
    StarSpec,
    load_spec,
    parse_spec,
)

__all__ = [
    "load_spec",
    "parse_spec",
    "EnsembleSpec",
    "RunSpec",
    "StarSpec",
    "PlanetsSpec",
    "IntegrationSpec",
    "OutcomeSpec",
    "Distribution",
    "INTEGRATORS",
    "ClusterConfig",
    "load_cluster_file",
]
