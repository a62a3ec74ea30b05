"""Benchmark (not a test): the engine's integration paths against the IAS15 reference.

A thin wrapper of :func:`scatter_pop.ensemble.bench.run_benchmark`: ``scatter-pop bench --full`` (the full
benchmark; ``scatter-pop bench`` alone is the quick one).  Example, the run behind docs/performance.md:

    .venv/bin/python analysis/bench_engine.py --systems 200 --end-time 1e5 --workers 2 \
        --out analysis/bench_engine.json
"""

from __future__ import annotations

import sys

from scatter_pop.cli.main import main

if __name__ == "__main__":
    sys.exit(main(["bench", "--full", *sys.argv[1:]]))
