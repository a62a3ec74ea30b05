"""Integrate systems through the back end their spec names (``integration.integrator``).

The one entry point of the engine for the stages after it: the ensemble's worker task calls
:func:`integrate_systems` with a batch of indices; notebooks and tests call :func:`integrate_system`
for one index or :func:`integrate_initial` for hand-made initial conditions.  Which back end runs
is decided here and nowhere else (:func:`scatter_pop.engine.backends.backend`).
"""

from __future__ import annotations

from scatter_pop.engine.backends import backend
from scatter_pop.engine.initial_conditions import InitialSystem, draw_system
from scatter_pop.engine.outcome import SystemRecord

__all__ = ["integrate_system", "integrate_systems", "integrate_initial"]


def integrate_system(spec, index: int, *, checkpoint_path=None, reference: bool = False) -> SystemRecord:
    """Draw system ``index`` of ``spec``, integrate it and classify its outcome.

    Parameters
    ----------
    spec : scatter_pop.spec.EnsembleSpec
    index : int
        System index (its initial conditions come from ``draw_system(spec, index)``).
    checkpoint_path : str or Path, optional
        If the file exists, continue from it (it must belong to the same system
        and settings).  If the wall-clock cap is reached, the state is written
        there and the record has end_reason CAPPED.  Removed when the system
        finishes.
    reference : bool
        Never stop early (validation mode): run to the end time even when the
        outcome is settled.

    Returns
    -------
    SystemRecord
    """
    return integrate_systems(
        spec, [index], checkpoint_paths=None if checkpoint_path is None else [checkpoint_path], reference=reference
    )[0]


def integrate_systems(spec, indices, *, checkpoint_paths=None, budgets=None, reference: bool = False):
    """Integrate systems ``indices`` of ``spec`` (one Dask task's batch); records in that order.

    ``checkpoint_paths`` (one per index) and ``budgets`` (wall-clock caps in s, one per index,
    instead of ``integration.wall_seconds_max``) are optional.  A back end may integrate the systems
    together; every record still depends only on the spec and its index.
    """
    initials = [draw_system(spec, int(i)) for i in indices]
    return backend(spec.integration.integrator).integrate_many(
        initials,
        spec.integration,
        spec.outcomes,
        checkpoint_paths=checkpoint_paths,
        budgets=budgets,
        reference=reference,
    )


def integrate_initial(
    initial: InitialSystem, integration, outcomes, *, checkpoint_path=None, reference: bool = False
) -> SystemRecord:
    """Integrate given initial conditions and classify the outcome.

    Same as :func:`integrate_system` but from an :class:`InitialSystem` (e.g. a
    hand-made orbit) and the spec's ``integration`` (IntegrationSpec) and
    ``outcomes`` (OutcomeSpec) sections.
    """
    return backend(integration.integrator).integrate_one(
        initial, integration, outcomes, checkpoint_path=checkpoint_path, reference=reference
    )
