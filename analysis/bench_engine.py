"""Benchmark (not a test): the engine's integration paths against the IAS15 reference.

A thin wrapper of :func:`scatter_pop.ensemble.bench.run_benchmark` (also ``scatter-pop bench``).  Example, the
run behind the README's performance table:

    .venv/bin/python analysis/bench_engine.py --systems 200 --end-time 1e5 --workers 2 \
        --json analysis/bench_engine.json
"""

from __future__ import annotations

import sys

from scatter_pop.cli.main import main

if __name__ == "__main__":
    sys.exit(main(["bench", *sys.argv[1:]]))
