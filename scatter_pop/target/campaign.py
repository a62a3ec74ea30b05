"""Campaigns that stop when the answer is precise enough (``scatter-pop run --until-width``).

A campaign runs an ensemble in rounds of growing size in one run folder: after each round the
target is judged (:func:`scatter_pop.target.judgement.judge`, its headline: systems whose outcome
is settled or likely stable) and the campaign stops when the interval of that fraction is at most
``width`` wide, when the CPU budget (the summed ``wall_seconds`` of every system in the folder) is
spent, or at ``max_systems``.  Systems are added in index order, each from its own seed, so the
result is the fixed-size run of the final number of systems; the sizes of the rounds depend only on
the data, so a rerun of the same campaign replays the finished rounds from the folder (nothing is
computed again) and goes on where it stopped.

Size of the next round: a binomial interval narrows as 1/sqrt(N), so N' = N (w / width)^2, at
least 1.25 N (and one system more) and at most 4 N; with a budget, no more systems than the budget
left pays for at the mean cost per system so far.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scatter_pop.errors import InputError

__all__ = ["CampaignStep", "Campaign", "next_size", "run_until"]

GROWTH_MIN, GROWTH_MAX = 1.25, 4.0


@dataclass(frozen=True)
class CampaignStep:
    """The running estimate after one round.

    Attributes
    ----------
    systems : int
        Systems in the ensemble of this round (0 .. systems-1).
    k, n : int
        Settled or likely-stable systems like the target, and all settled or likely-stable systems.
    fraction, low, high : float
        k / n and its interval (NaN when n = 0).
    cpu_seconds : float
        CPU time integrating, summed over the systems of the folder so far.
    """

    systems: int
    k: int
    n: int
    fraction: float
    low: float
    high: float
    cpu_seconds: float

    @property
    def width(self) -> float:
        return self.high - self.low if self.n else math.inf


@dataclass(frozen=True)
class Campaign:
    """What :func:`run_until` did: the rounds, why it stopped, the final dataset and judgement."""

    steps: tuple[CampaignStep, ...]
    stopped_by: str  # "width", "cpu_budget" or "max_systems"
    dataset: object
    judgement: object


def next_size(systems: int, width: float, wanted: float, *, max_systems: int, affordable: int | None = None) -> int:
    """Systems of the next round (module docstring); ``affordable`` caps the systems the budget pays for."""
    scale = (width / wanted) ** 2 if math.isfinite(width) and width > 0 else GROWTH_MAX
    grow = min(max(scale, GROWTH_MIN), GROWTH_MAX)
    n = max(systems + 1, math.ceil(systems * grow))
    if affordable is not None:
        n = min(n, systems + affordable)
    return min(n, max_systems)


def run_until(
    spec,
    out,
    target,
    *,
    width: float,
    cpu_budget: float | None = None,
    max_systems: int | None = None,
    windows=None,
    confidence: float = 0.95,
    method: str = "exact",
    log=print,
    **run_options,
) -> Campaign:
    """Run ``spec`` in ``out`` in growing rounds until the target's headline interval is at most
    ``width`` wide (see the module docstring).

    Parameters
    ----------
    spec : EnsembleSpec
        Its ``run.systems`` is the size of the first round.
    out : path
        Run folder.
    target : Target
    width : float
        Largest accepted width (high - low) of the interval of the fraction, 0 < width < 1.
    cpu_budget : float, optional
        CPU seconds of integration (summed over the folder's systems) after which no round starts.
    max_systems : int, optional
        Largest ensemble (default 100 x the first round).
    windows : Windows, optional
    confidence, method
        Of the interval (:func:`scatter_pop.target.judgement.judge`).
    log : callable
        Receives the running estimate after each round.
    **run_options
        Keyword arguments of :class:`scatter_pop.ensemble.driver.EnsembleRun` (workers, client, ...).
    """
    from scatter_pop.ensemble.driver import EnsembleRun
    from scatter_pop.spec.reader import with_systems
    from scatter_pop.target.judgement import judge
    from scatter_pop.target.verdict import _pct

    if not 0 < width < 1:
        raise InputError(f"width {width!r}: the interval width must be a fraction between 0 and 1")
    if cpu_budget is not None and not cpu_budget > 0:
        raise InputError(f"cpu_budget {cpu_budget!r}: must be a number of CPU seconds > 0")
    first = spec.run.systems
    max_systems = 100 * first if max_systems is None else int(max_systems)
    if max_systems < first:
        raise InputError(f"max_systems {max_systems}: must be at least run.systems = {first}")
    if run_options.get("client") is None:  # one cluster for every round
        from scatter_pop.ensemble.cluster import connect
        from scatter_pop.ensemble.stop_signals import deferred_stop

        config = run_options.pop("cluster", None) or spec.cluster
        workers, scheduler = run_options.pop("workers", None), run_options.pop("scheduler", None)
        with deferred_stop():
            with connect(
                config, workers=workers, scheduler=scheduler, longest_task_seconds=spec.integration.wall_seconds_max
            ) as client:
                return run_until(
                    spec,
                    out,
                    target,
                    width=width,
                    cpu_budget=cpu_budget,
                    max_systems=max_systems,
                    windows=windows,
                    confidence=confidence,
                    method=method,
                    log=log,
                    client=client,
                    **run_options,
                )
    steps = []
    n = first
    fresh = run_options.pop("fresh", False)  # the first round only: later ones add to the same folder
    while True:
        round_spec = with_systems(spec, n)
        ds = EnsembleRun(round_spec, out, log=log, fresh=fresh and not steps, **run_options).run()
        result = judge(
            [ds], target, windows, labels=[spec.run.name], seed=spec.run.seed, confidence=confidence, method=method
        )
        p = result.ensembles[0].systems
        cpu = float(ds["wall_seconds"].sum())
        step = CampaignStep(n, p.k, p.n, p.fraction, p.low, p.high, cpu)
        steps.append(step)
        log(
            f"[until] {n} systems: {p.k} of {p.n} settled or likely-stable systems like {target.name}, "
            f"{_pct(p.fraction, step.width if p.n else None)} ({100 * confidence:g} % interval {_pct(p.low)} to "
            f"{_pct(p.high)}, width {_pct(step.width)}; asked <= {_pct(width)}); CPU {cpu:.3g} s"
        )
        if p.n and step.width <= width:
            stopped = "width"
            break
        if cpu_budget is not None and cpu >= cpu_budget:
            stopped = "cpu_budget"
            break
        if n >= max_systems:
            stopped = "max_systems"
            break
        affordable = None
        if cpu_budget is not None:
            per_system = cpu / n if cpu > 0 else 0.0
            affordable = int((cpu_budget - cpu) / per_system) if per_system > 0 else None
            if affordable is not None and affordable < 1:
                stopped = "cpu_budget"
                break
        n = next_size(n, step.width, width, max_systems=max_systems, affordable=affordable)
    words = {
        "width": "the interval is as narrow as asked",
        "cpu_budget": "the CPU budget is spent",
        "max_systems": "the largest ensemble allowed is reached",
    }
    log(f"[until] stopped at {n} systems: {words[stopped]}")
    return Campaign(tuple(steps), stopped, ds, result)
