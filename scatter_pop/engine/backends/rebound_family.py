"""What the REBOUND back ends share: :class:`ReboundBackend`, run by :mod:`scatter_pop.engine.rebound_run`."""

from __future__ import annotations

from scatter_pop.engine.backends.base import Backend

__all__ = ["ReboundBackend"]


class ReboundBackend(Backend):
    """A REBOUND integrator.

    Attributes
    ----------
    rebound_name : str
        ``sim.integrator`` value.
    hybrid : bool
        Takes a fixed step that must resolve the most demanding orbit (re-chosen as orbits change).
    collision : str
        REBOUND's collision search: ``"line"`` (along each step's path) or ``"direct"`` (step ends,
        approaching pairs only).
    """

    rebound_name: str = ""
    hybrid: bool = False
    collision: str = "line"

    def configure_simulation(self, sim, integration, initial) -> None:
        """Choose the integrator of a freshly built simulation, its parameters and its collision search."""
        sim.integrator = self.rebound_name
        self.configure(sim, integration, initial)
        sim.collision = self.collision

    def configure(self, sim, integration, initial) -> None:
        """Set the integrator's own parameters (after ``sim.integrator`` was chosen)."""

    def integrate_one(self, initial, integration, outcomes, *, checkpoint_path=None, reference=False):
        from scatter_pop.engine.rebound_run import SystemRun

        return SystemRun(initial, integration, outcomes, checkpoint_path, reference, backend=self).run()
