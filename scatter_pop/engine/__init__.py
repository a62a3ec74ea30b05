"""Stage 2 — the engine: one system from its initial conditions to a classified outcome.

``initial_conditions`` draws system *i* from its own seed; ``integrate`` runs it through the back end
the spec names (``backends/``: one module per integrator, behind :class:`backends.base.Backend`);
``rebound_run``, ``rebound_setup``, ``rebound_state`` and ``search_radii`` are the REBOUND path;
``encounters`` (contact, escape and Hill geometry), ``ledger`` (fates, energy books, checkpoints),
``record_builder``, ``outcome`` (fate, end-reason and settlement codes, records) and ``settlement``
(whether an outcome is final) are shared by every back end;
``stability`` holds the closed-form criteria (Gladman, Marchal–Bozis, Petrovich, Safronov, r_t).
"""

from scatter_pop.engine.initial_conditions import InitialSystem, draw_system, system_seed
from scatter_pop.engine.integrate import integrate_initial, integrate_system
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, Settlement, SystemRecord

__all__ = [
    "draw_system",
    "system_seed",
    "InitialSystem",
    "integrate_system",
    "integrate_initial",
    "SystemRecord",
    "PlanetRecord",
    "Fate",
    "EndReason",
    "Settlement",
]
