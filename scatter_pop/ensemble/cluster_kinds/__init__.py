"""Cluster kinds: one module each, behind one interface (:class:`base.ClusterKind`).

A kind module defines ``KIND``, an instance of a :class:`base.ClusterKind` subclass that starts its
cluster (or attaches to a scheduler) and states its differences as attributes: whether it submits
batch jobs, with which command, how it writes a walltime.  The spec's ``cluster.kind`` names a module
of this package (the ``[cluster]`` keys each kind takes are the spec's, in
:mod:`scatter_pop.spec.cluster_table`); ``base`` and ``jobqueue`` are shared pieces, not kinds.
"""

from __future__ import annotations

from functools import cache

from scatter_pop.plugins import load_variant, variant_names

__all__ = ["cluster_kind", "kind_names"]

_SHARED = {"base", "jobqueue"}


@cache
def kind_names() -> tuple[str, ...]:
    """Names of every kind module, in alphabetical order (importing none of them)."""
    return variant_names(__path__, _SHARED)


def cluster_kind(name: str):
    """The :class:`base.ClusterKind` called ``name``.

    Raises
    ------
    KeyError
        ``name`` is not a kind (the spec reader checks ``cluster.kind`` before this is called).
    """
    return load_variant(__name__, kind_names(), name, "KIND")
