"""Stage 5 — survey comparison: the survivors as a radial-velocity survey would see them, against an
observed catalogue.

``catalogue`` (observed CSV, units converted once), ``cuts`` (quality and sample cuts with counts),
``radial_velocity`` (K, Kepler's third law, isotropic sin i), ``forward_model`` (survivors -> what a
survey detects), ``statistics`` (KS, Anderson–Darling, reference laws), ``resampling`` (error-bar and
bootstrap spreads), ``comparison`` (:func:`compare`), ``report`` (text, CSV, JSON, LaTeX rendering).
"""

from scatter_pop.survey.catalogue import ObservedSample, load_catalogue
from scatter_pop.survey.comparison import CompareOptions, ComparisonReport, compare
from scatter_pop.survey.forward_model import RVSurvey
from scatter_pop.survey.statistics import one_sample, two_sample

__all__ = [
    "load_catalogue",
    "ObservedSample",
    "compare",
    "CompareOptions",
    "ComparisonReport",
    "RVSurvey",
    "two_sample",
    "one_sample",
]
