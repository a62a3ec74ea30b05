"""Integrator back ends: one module each, behind one interface (:class:`base.Backend`).

A back end module defines ``BACKEND``, an instance of a :class:`base.Backend` subclass that holds its
differences from the others as attributes (REBOUND's integrator name, whether it takes a fixed hybrid
step, how REBOUND searches for contacts, which spec keys tune it).  The spec's
``integration.integrator`` names a module of this package; adding a back end is adding one module.
``base`` and ``rebound_family`` are the shared pieces, not back ends.
"""

from __future__ import annotations

from functools import cache

from scatter_pop.plugins import load_variant, variant_names

__all__ = ["backend", "backend_names"]

_SHARED = {"base", "rebound_family"}


@cache
def backend_names() -> tuple[str, ...]:
    """Names of every back end module, in alphabetical order (importing none of them)."""
    return variant_names(__path__, _SHARED)


def backend(name: str):
    """The :class:`base.Backend` called ``name``.

    Raises
    ------
    KeyError
        ``name`` is not a back end (the spec reader checks names before this is called).
    """
    return load_variant(__name__, backend_names(), name, "BACKEND")
