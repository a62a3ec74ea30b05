"""The ``scatter-pop`` command line: a thin layer over the library.

Each subcommand lives in its own module ``scatter_pop.cli.<name>`` that defines

``configure(parser)``
    add the subcommand's arguments to an :class:`argparse.ArgumentParser`;
``execute(args) -> int``
    do the work by calling library code and return the exit status;
``ARGUMENT_FLAGS`` (optional)
    library argument names the command says as other flags than ``--<name>``.

Mistakes a user can make end here as one line on stderr and exit status 2, before anything is
computed: :class:`~scatter_pop.errors.InputError` from the library (its argument names said as this
command's flags) and argparse's own usage errors (one line, not the usage block).  A closed pipe
(``scatter-pop status DIR | head -1``) ends the command quietly.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import os
import re
import sys

from scatter_pop.errors import InputError

__all__ = ["main", "COMMANDS", "build_parser", "flags_of"]

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


class OneLineParser(argparse.ArgumentParser):
    """argparse with usage errors said in one line (and where to find the usage)."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {' '.join(message.split())} (see {self.prog} --help)\n")


def _available_commands() -> dict[str, tuple[str, str]]:
    return {n: (m, h) for n, (m, h) in COMMANDS.items() if importlib.util.find_spec(m) is not None}


def _add_verbosity(parser, suppress: bool) -> None:
    default = argparse.SUPPRESS if suppress else 0
    g = parser.add_mutually_exclusive_group()
    g.add_argument(
        "-q", "--quiet", dest="verbosity", action="store_const", const=-1, default=default, help="print results only"
    )
    g.add_argument(
        "-v",
        "--verbose",
        dest="verbosity",
        action="store_const",
        const=1,
        default=default,
        help="also print the libraries' own messages (Dask, warnings)",
    )


def build_parser() -> argparse.ArgumentParser:
    from scatter_pop.provenance import describe

    parser = OneLineParser(prog="scatter-pop", description="Planet-planet scattering population synthesis.")
    parser.add_argument("--version", action="version", version=describe())
    _add_verbosity(parser, suppress=False)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True, parser_class=OneLineParser)
    for name, (module, help_text) in _available_commands().items():
        p = sub.add_parser(name, help=help_text, description=help_text)
        importlib.import_module(module).configure(p)
        _add_verbosity(p, suppress=True)
        p.set_defaults(_module=module, _parser=p)
    return parser


def flags_of(parser, module) -> dict[str, str]:
    """Library argument name -> this command's flag: every ``--flag`` by its dest, then the module's
    ``ARGUMENT_FLAGS`` (which win)."""
    flags = {}
    for action in parser._actions:  # argparse keeps no public list of a parser's arguments
        longs = [o for o in action.option_strings if o.startswith("--")]
        if longs:
            flags.setdefault(action.dest, longs[0])
        elif not action.option_strings and action.dest not in ("help",):
            flags.setdefault(action.dest, action.metavar or action.dest.upper())
    flags.update(getattr(module, "ARGUMENT_FLAGS", {}))
    return flags


_NUMBER = re.compile(r"-(\d|\.\d)")


def attach_negative_values(argv: list[str]) -> list[str]:
    """``--flag -3,10`` -> ``--flag=-3,10``: a value that starts with a minus sign and a digit after a
    long option is that option's value (argparse would take ``-3,10`` for an unknown option)."""
    out: list[str] = []
    for token in argv:
        if (
            out
            and _NUMBER.match(token)
            and out[-1].startswith("--")
            and "=" not in out[-1]
            and out[-1] not in ("--quiet", "--verbose", "--")
        ):
            out[-1] = f"{out[-1]}={token}"
        else:
            out.append(token)
    return out


def _unrecognized(parser, extras: list[str]) -> None:
    """Refuse unknown arguments in the subcommand's name, with the nearest known flag."""
    import difflib

    known = [o for action in parser._actions for o in action.option_strings if o.startswith("--")]
    near = difflib.get_close_matches(extras[0].split("=")[0], known, n=1)
    hint = f" (did you mean {near[0]}?)" if near and extras[0].startswith("-") else ""
    parser.error(f"unrecognized arguments: {' '.join(extras)}{hint}")


def _quiet_broken_pipe() -> int:
    # the reader went away (`| head`): stop writing, say nothing (Python docs, "Note on SIGPIPE")
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass
    return 0


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit status (also used by tests)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args, extras = parser.parse_known_args(attach_negative_values(argv))
        if extras:
            _unrecognized(args._parser, extras)
    except BrokenPipeError:  # --help or --version into a closed pipe
        return _quiet_broken_pipe()
    except SystemExit as exc:  # argparse: --help, --version (0) or a usage error (2, one line printed)
        return int(exc.code or 0)
    module = importlib.import_module(args._module)
    _configure_output(args.verbosity)
    try:
        status = int(module.execute(args) or 0)
        sys.stdout.flush()
        return status
    except InputError as exc:
        message = exc.in_terms_of(flags_of(args._parser, module))
        print(f"scatter-pop {args.command}: error: {message}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        return _quiet_broken_pipe()
    except KeyboardInterrupt:
        print(f"scatter-pop {args.command}: interrupted; rerun the same command to resume", file=sys.stderr)
        return 130


def _configure_output(verbosity: int) -> None:
    """-q: results only; default: results and progress; -v: also the libraries' log messages."""
    import logging
    import warnings

    from scatter_pop.ensemble import progress

    progress.VERBOSITY = verbosity
    if verbosity < 1:
        for name in ("distributed", "dask_jobqueue", "tornado", "bokeh"):
            logging.getLogger(name).setLevel(logging.ERROR)
    else:
        logging.basicConfig(level=logging.INFO, format="%(name)s: %(message)s")
    if verbosity < 0:
        warnings.simplefilter("ignore")


def entry() -> None:
    """The console script: :func:`main`, then the last flush of standard output, which meets a closed
    pipe quietly too (``scatter-pop --version | true``)."""
    status = main()
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        status = _quiet_broken_pipe() or status
    sys.exit(status)


if __name__ == "__main__":  # pragma: no cover
    entry()
