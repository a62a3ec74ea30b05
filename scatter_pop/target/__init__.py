"""Stage 6 — the target verdict: how often, and from which starting configurations, scattering makes
a planet like one observed target.

``planet`` (the :class:`Target` and its windows), ``matching`` (hard window and likelihood weight of each
survivor), ``proportions`` (binomial intervals), ``branches`` (outcome branch of each system),
``architecture`` (starting configurations of finished runs), ``pathways`` (how matching systems got
there), ``judgement`` (:func:`judge`), ``verdict`` (text and JSON, the verdict sentence), ``campaign``
(:func:`run_until`: runs that stop when the target's interval is narrow enough).
"""

from scatter_pop.target.campaign import run_until
from scatter_pop.target.judgement import Judgement, judge
from scatter_pop.target.planet import Target, TargetPoint, Windows
from scatter_pop.target.verdict import render_json, render_text, verdict_sentence

__all__ = [
    "judge",
    "run_until",
    "Judgement",
    "Target",
    "Windows",
    "TargetPoint",
    "render_text",
    "render_json",
    "verdict_sentence",
]
