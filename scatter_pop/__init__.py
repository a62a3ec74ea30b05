"""scatter_pop: population synthesis of planet-planet scattering.

Data flow: spec -> initial conditions -> integration of one system -> outcome
record -> ensemble store -> statistics -> figures and reports.

The public API is imported lazily so that ``import scatter_pop`` stays cheap.
Functions that share their module's name live there: ``scatter_pop.compare.compare``,
``scatter_pop.judge.judge``.
"""

from importlib import import_module

__version__ = "0.1.0"

_API = {
    "load_spec": "scatter_pop.spec",
    "parse_spec": "scatter_pop.spec",
    "draw_system": "scatter_pop.initial_conditions",
    "integrate_system": "scatter_pop.integrate",
    "run_ensemble": "scatter_pop.ensemble",
    "open_ensemble": "scatter_pop.store",
    "load_catalogue": "scatter_pop.observed",
    "two_sample": "scatter_pop.statistics",
    "write_figure_set": "scatter_pop.figure_set",
    "InputError": "scatter_pop.errors",
}

__all__ = ["__version__", *_API]


def __getattr__(name):
    if name in _API:
        return getattr(import_module(_API[name]), name)
    raise AttributeError(f"module 'scatter_pop' has no attribute {name!r}")
