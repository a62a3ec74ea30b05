"""The interface every integrator back end keeps."""

from __future__ import annotations

__all__ = ["Backend"]


class Backend:
    """One integrator back end.

    Attributes
    ----------
    name : str
        The value of the spec key ``integration.integrator`` that selects it.
    summary : str
        One line for ``scatter-pop check`` and the docs.
    integrates_together : bool
        Integrates a task's systems together (SIMD lanes); the worker then hands it the whole batch.
    spec_keys : tuple of str
        The ``[integration]`` keys that tune it (besides those every back end reads).
    """

    name: str = ""
    summary: str = ""
    integrates_together: bool = False
    spec_keys: tuple[str, ...] = ()

    def unavailable(self) -> str | None:
        """Why this back end cannot run in this Python (a missing package), or None."""
        return None

    def lanes(self) -> int:
        """SIMD lanes it integrates together on this machine (0: one system at a time)."""
        return 0

    def prepare(self, integration, bodies: int) -> float:
        """Do once what the first integration in this process would (compile, say) for systems of up
        to ``bodies`` bodies, so that a benchmark can time it apart; the seconds it took."""
        return 0.0

    def integrate_one(self, initial, integration, outcomes, *, checkpoint_path=None, reference=False):
        """Integrate one :class:`~scatter_pop.engine.initial_conditions.InitialSystem`; a SystemRecord.

        ``checkpoint_path`` is the system's state file: written when the system stops at the
        wall-clock cap or at the end time (its identity leaving out ``end_time``, ``end_orbits`` and
        ``wall_seconds_max``), continued from when it exists — to a larger cap or a later end time,
        with a record equal to an uninterrupted run with that end time — and removed once the system
        settles.  A back end that cannot continue ignores the file and starts over (DEVELOPERS.md,
        "Adding an integrator back end").
        """
        raise NotImplementedError

    def integrate_many(self, initials, integration, outcomes, *, checkpoint_paths=None, budgets=None, reference=False):
        """Integrate several systems of one task; records in the order of ``initials``.

        A back end that integrates systems together (SIMD lanes) overrides this; the default takes
        them one after the other.  ``budgets`` replaces ``integration.wall_seconds_max`` per system.
        """
        from dataclasses import replace

        records = []
        for k, initial in enumerate(initials):
            integ = integration if budgets is None else replace(integration, wall_seconds_max=budgets[k])
            path = None if checkpoint_paths is None else checkpoint_paths[k]
            records.append(self.integrate_one(initial, integ, outcomes, checkpoint_path=path, reference=reference))
        return records

    def __repr__(self) -> str:
        return f"<{type(self).__name__} back end {self.name!r}>"
