"""REBOUND's TRACE (Lu et al. 2024, MNRAS 533, 3708; from memory): a time-reversible hybrid map."""

from scatter_pop.engine.backends.rebound_family import ReboundBackend

__all__ = ["BACKEND"]


class Trace(ReboundBackend):
    name = rebound_name = "trace"
    summary = "REBOUND TRACE, hybrid fixed step (integration.steps_per_orbit, r_crit_hill)"
    spec_keys = ("steps_per_orbit", "r_crit_hill")
    hybrid = True

    def configure(self, sim, integration, initial) -> None:
        sim.integrator.r_crit_hill = integration.r_crit_hill


BACKEND = Trace()
