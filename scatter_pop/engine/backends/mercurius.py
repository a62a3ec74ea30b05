"""REBOUND's MERCURIUS (Rein et al. 2019, MNRAS 485, 5490): a hybrid symplectic map switching to IAS15."""

from scatter_pop.engine.backends.rebound_family import ReboundBackend

__all__ = ["BACKEND"]


class Mercurius(ReboundBackend):
    name = rebound_name = "mercurius"
    summary = "REBOUND MERCURIUS, hybrid fixed step (integration.steps_per_orbit, r_crit_hill)"
    spec_keys = ("steps_per_orbit", "r_crit_hill")
    hybrid = True
    collision = "direct"  # REBOUND's search at step ends, approaching pairs only

    def configure(self, sim, integration, initial) -> None:
        sim.integrator.r_crit_hill = integration.r_crit_hill


BACKEND = Mercurius()
