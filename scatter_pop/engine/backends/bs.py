"""REBOUND's Gragg–Bulirsch–Stoer integrator (Hairer, Nørsett & Wanner 1993), adaptive order and step."""

from scatter_pop.engine.backends.rebound_family import ReboundBackend

__all__ = ["BACKEND"]


class BulirschStoer(ReboundBackend):
    name = rebound_name = "bs"
    summary = "REBOUND Bulirsch-Stoer, adaptive; tolerance integration.bs_epsilon"
    spec_keys = ("bs_epsilon",)

    def configure(self, sim, integration, initial) -> None:
        sim.integrator.eps_abs = integration.bs_epsilon
        sim.integrator.eps_rel = integration.bs_epsilon


BACKEND = BulirschStoer()
