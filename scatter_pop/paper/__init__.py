"""Stage 7 — the paper: figures and tables of a theory paper.

``figure_data`` computes the numbers each figure plots (pure, returns tables), ``drawing`` draws them
(Axes in, nothing computed), ``figure_set`` writes the set (CSV of every plotted number, PDF/PNG),
``latex_tables`` the booktabs tables.
"""

from scatter_pop.paper.figure_set import FIGURE_NAMES, write_figure_set

__all__ = ["write_figure_set", "FIGURE_NAMES"]
