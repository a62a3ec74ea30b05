"""Stage 3 — the store: what a run folder holds and how it is written.

``schema`` defines the dataset once (names, dtypes, units, CF attributes, flags) and turns records into
an ``xarray.Dataset``; ``parts`` reads and stacks part files; ``atomic`` writes crash-safely (tmp, fsync,
rename); ``run_folder`` is the folder's layout, lock, spec identity check, gathering and
:func:`open_ensemble`.
"""

from scatter_pop.store.run_folder import RunFolder, open_ensemble
from scatter_pop.store.schema import PHYSICS_VARIABLES, VARIABLES, records_to_dataset, survivor_mask

__all__ = ["open_ensemble", "RunFolder", "records_to_dataset", "survivor_mask", "VARIABLES", "PHYSICS_VARIABLES"]
