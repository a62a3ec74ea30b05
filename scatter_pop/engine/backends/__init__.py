"""Integrator back ends: one module each, behind one interface (:class:`base.Backend`).

A back end module defines ``BACKEND``, an instance of a :class:`base.Backend` subclass that holds its
differences from the others as attributes (REBOUND's integrator name, whether it takes a fixed hybrid
step, how REBOUND searches for contacts, which spec keys tune it).  The spec's
``integration.integrator`` names a module of this package; adding a back end is adding one module.
``base`` and ``rebound_family`` are the shared pieces, not back ends.
"""

from __future__ import annotations

import pkgutil
from functools import cache
from importlib import import_module

__all__ = ["backend", "backend_names"]

_SUPPORT = {"base", "rebound_family"}


@cache
def backend_names() -> tuple[str, ...]:
    """Names of every back end module, in alphabetical order (importing none of them)."""
    return tuple(
        sorted(m.name for m in pkgutil.iter_modules(__path__) if m.name not in _SUPPORT and not m.name.startswith("_"))
    )


def backend(name: str):
    """The :class:`base.Backend` called ``name``.

    Raises
    ------
    KeyError
        ``name`` is not a back end (the spec reader checks names before this is called).
    """
    if name not in backend_names():
        raise KeyError(name)
    return import_module(f"{__name__}.{name}").BACKEND
