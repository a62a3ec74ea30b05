"""Stage 8 — the command line ``scatter-pop``: one module per command, shared option helpers in
``options``.  Only this package speaks of flags: it turns library errors (which name arguments and spec
keys) into one line naming the flag, exit status 2.
"""

from scatter_pop.cli.main import COMMANDS, entry, main

__all__ = ["main", "entry", "COMMANDS"]
