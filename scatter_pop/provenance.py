"""Which scatter_pop made a file: the package version from its installed metadata, and the git commit
when the package is imported from a git checkout (with ``-dirty`` if the checkout has changes)."""

from __future__ import annotations

import functools
import subprocess
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

__all__ = ["package_version", "source_commit", "describe"]


def package_version() -> str:
    """The version in the installed distribution's metadata (``0+unknown`` if it was never installed)."""
    try:
        return version("scatter_pop")
    except PackageNotFoundError:
        return "0+unknown"


@functools.lru_cache(maxsize=1)
def source_commit() -> str | None:
    """The commit of the git checkout the package is imported from (``<sha>-dirty`` with local
    changes to tracked files), or None when it is not imported from a checkout or git is missing."""
    here = Path(__file__).resolve().parent
    try:
        top = subprocess.run(
            ["git", "-C", str(here), "rev-parse", "--show-toplevel", "HEAD"],
            capture_output=True,
            text=True,
            timeout=10,
            check=True,
        ).stdout.split()
        if len(top) != 2 or not (Path(top[0]) / "scatter_pop" / "__init__.py").resolve().is_relative_to(here):
            return None
        dirty = subprocess.run(
            ["git", "-C", top[0], "status", "--porcelain", "--untracked-files=no"],
            capture_output=True,
            text=True,
            timeout=10,
            check=True,
        ).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        return None
    return top[1] + ("-dirty" if dirty else "")


def describe() -> str:
    """``scatter_pop <version>`` and, from a checkout, ``(commit <sha>)``."""
    commit = source_commit()
    return f"scatter_pop {package_version()}" + (f" (commit {commit})" if commit else "")
