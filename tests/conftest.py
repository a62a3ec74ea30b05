"""Shared set-up for the whole suite.

The test folders mirror the package (``spec/``, ``engine/``, ``store/``, ``ensemble/``, ``survey/``,
``target/``, ``paper/``, ``cli/``).  The helper modules beside this file are imported by name from any
of them (``pythonpath = ["tests"]`` in pyproject.toml):

- ``records``: hand-made outcome records and ensembles (one builder, no integration);
- ``ensemble_helpers``: spec text, run-folder polling, subprocess runs of the CLI, reference results;
- ``tight_trio``: an unstable three-planet system that reaches each fate quickly;
- ``slurm_harness``: a real single-node SLURM (and PBS commands on top of it), the ``slurm`` fixture.
"""

from slurm_harness import slurm  # noqa: F401  (session fixture, registered for every test file)
