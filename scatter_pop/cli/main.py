"""The ``scatter-pop`` command line: a thin layer over the library.

Each subcommand lives in its own module ``scatter_pop.cli_<name>`` that defines

``configure(parser)``
    add the subcommand's arguments to an :class:`argparse.ArgumentParser`;
``execute(args) -> int``
    do the work by calling library code and return the exit status.

Mistakes a user can make end here as one line on stderr and exit status 2:
:class:`~scatter_pop.errors.InputError` from the library, and argparse's own
usage errors (argparse exits with 2 by itself).
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import sys

from scatter_pop.errors import InputError

__all__ = ["main", "COMMANDS"]

# subcommand -> (module, one-line help). Modules are imported only when used,
# so `scatter-pop check` does not pay for importing dask or matplotlib.
COMMANDS: dict[str, tuple[str, str]] = {
    "check": ("scatter_pop.cli.check", "validate an ensemble spec and print it resolved"),
    "run": ("scatter_pop.cli.run", "integrate an ensemble (local Dask cluster by default)"),
    "status": ("scatter_pop.cli.status", "progress and outcome counts of a run folder"),
    "compare": ("scatter_pop.cli.compare", "compare survivors with an observed catalogue"),
    "judge": ("scatter_pop.cli.judge", "how often scattering makes a planet like a target"),
    "figures": ("scatter_pop.cli.figures", "paper figures and tables from run folders"),
    "bench": ("scatter_pop.cli.bench", "integrator throughput and accuracy benchmark"),
}


def _available_commands() -> dict[str, tuple[str, str]]:
    found = {}
    for name, (module, help_text) in COMMANDS.items():
        if importlib.util.find_spec(module) is not None:
            found[name] = (module, help_text)
    return found


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="scatter-pop",
        description="Planet-planet scattering population synthesis.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for name, (module, help_text) in _available_commands().items():
        p = sub.add_parser(name, help=help_text, description=help_text)
        importlib.import_module(module).configure(p)
        p.set_defaults(_module=module)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit status (also used by tests)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(importlib.import_module(args._module).execute(args) or 0)
    except InputError as exc:
        print(f"scatter-pop {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"scatter-pop {args.command}: interrupted; rerun the same command to resume", file=sys.stderr)
        return 130


def entry() -> None:  # pragma: no cover - console script wrapper
    sys.exit(main())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
