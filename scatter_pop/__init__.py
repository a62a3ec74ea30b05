"""scatter_pop: population synthesis of planet-planet scattering.

The pipeline, one subpackage per stage, data flowing one way::

    spec -> engine -> store -> ensemble -> survey -> target -> paper -> cli

``spec`` reads and checks the ensemble spec; ``engine`` integrates one system (initial conditions,
back ends, encounters, fates); ``store`` is the dataset schema and the run folder; ``ensemble`` runs
many systems on Dask; ``survey`` compares the survivors with an observed RV catalogue; ``target``
judges one observed planet; ``paper`` makes the figures and tables; ``cli`` is ``scatter-pop``.

What a notebook reaches for is importable from here (lazily, so ``import scatter_pop`` stays cheap)::

    import scatter_pop as sp
    spec = sp.load_spec("runs/demo.toml")
    ds = sp.run_ensemble(spec, out="runs/demo_out")
    report = sp.compare([("demo", [ds])], sp.load_catalogue("catalogue.csv"))
"""

from __future__ import annotations

import importlib.abc
import importlib.util
import sys
from importlib import import_module
from importlib.metadata import PackageNotFoundError as _NotInstalled
from importlib.metadata import version as _dist_version

try:
    __version__ = _dist_version("scatter_pop")
except _NotInstalled:  # run from a source tree that was never installed
    __version__ = "0+unknown"

_API = {
    "load_spec": "scatter_pop.spec",
    "parse_spec": "scatter_pop.spec",
    "EnsembleSpec": "scatter_pop.spec",
    "draw_system": "scatter_pop.engine",
    "integrate_system": "scatter_pop.engine",
    "SystemRecord": "scatter_pop.engine",
    "Fate": "scatter_pop.engine",
    "EndReason": "scatter_pop.engine",
    "Settlement": "scatter_pop.engine",
    "run_ensemble": "scatter_pop.ensemble",
    "open_ensemble": "scatter_pop.store",
    "load_catalogue": "scatter_pop.survey",
    "compare": "scatter_pop.survey",
    "CompareOptions": "scatter_pop.survey",
    "RVSurvey": "scatter_pop.survey",
    "two_sample": "scatter_pop.survey",
    "one_sample": "scatter_pop.survey",
    "judge": "scatter_pop.target",
    "run_until": "scatter_pop.target",
    "Target": "scatter_pop.target",
    "Windows": "scatter_pop.target",
    "load_target_file": "scatter_pop.target.target_file",
    "QualityCuts": "scatter_pop.store.schema",
    "write_figure_set": "scatter_pop.paper",
    "InputError": "scatter_pop.errors",
}

# Modules of the flat layout before the subpackages, and where they went.  ``compare`` and
# ``judge`` are not among them: those names are now the functions.
_MOVED = {
    "cluster_config": "spec.cluster_table",
    "initial_conditions": "engine.initial_conditions",
    "integrate": "engine.integrate",
    "encounters": "engine.encounters",
    "ledger": "engine.ledger",
    "outcome": "engine.outcome",
    "stability": "engine.stability",
    "schema": "store.schema",
    "cluster": "ensemble.cluster",
    "observed": "survey.catalogue",
    "cuts": "survey.cuts",
    "simulated": "survey.forward_model",
    "radial_velocity": "survey.radial_velocity",
    "statistics": "survey.statistics",
    "resampling": "survey.resampling",
    "verdict": "target.verdict",
    "proportions": "target.proportions",
    "figure_data": "paper.figure_data",
    "figures": "paper.drawing",
    "figure_set": "paper.figure_set",
    "demo": "cli.demo",
}

__all__ = ["__version__", *_API]


def __getattr__(name):
    if name in _API:
        return getattr(import_module(_API[name]), name)
    if name in _MOVED:
        return import_module(f"scatter_pop.{_MOVED[name]}")
    raise AttributeError(f"module 'scatter_pop' has no attribute {name!r}")


_STAGES = ("spec", "engine", "store", "ensemble", "survey", "target", "paper", "cli", "constants", "errors")


def __dir__():
    return sorted({*_API, *_STAGES, "__version__"})


class _MovedFinder(importlib.abc.MetaPathFinder, importlib.abc.Loader):
    """``import scatter_pop.schema`` (an old path) gives the module at its new place."""

    def find_spec(self, fullname, path=None, target=None):
        head, _, tail = fullname.partition(".")
        if head == "scatter_pop" and tail in _MOVED:
            return importlib.util.spec_from_loader(fullname, self)
        return None

    def create_module(self, spec):
        module = import_module(f"scatter_pop.{_MOVED[spec.name.split('.', 1)[1]]}")
        self._own_spec = module.__spec__  # the import system sets the alias's spec on it
        return module

    def exec_module(self, module):
        module.__spec__ = self._own_spec


if not any(isinstance(f, _MovedFinder) for f in sys.meta_path):
    sys.meta_path.append(_MovedFinder())
