"""REBOUND's IAS15 (Rein & Spiegel 2015, MNRAS 446, 1424): adaptive 15th-order, machine precision."""

from scatter_pop.engine.backends.rebound_family import ReboundBackend

__all__ = ["BACKEND"]


class IAS15(ReboundBackend):
    name = rebound_name = "ias15"
    summary = "REBOUND IAS15, adaptive, error below double precision per orbit (the reference)"
    spec_keys = ("epsilon",)

    def configure(self, sim, integration, initial) -> None:
        from scatter_pop.engine.rebound_setup import MIN_DT_FRACTION, contact_time

        sim.integrator.epsilon = integration.epsilon
        sim.integrator.min_dt = MIN_DT_FRACTION * contact_time(initial)


BACKEND = IAS15()
