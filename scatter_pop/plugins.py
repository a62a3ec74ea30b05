"""Registries of one-module-per-variant packages (integrator back ends, cluster kinds).

Each such package holds one module per variant, defining one object under a fixed name, beside a few
shared modules that are not variants; the variant's name is its module's name.  Listing them imports
none, so a variant whose library is missing is still listed (and says so itself).
"""

from __future__ import annotations

import pkgutil
from importlib import import_module

__all__ = ["variant_names", "load_variant"]


def variant_names(package_path, shared: set[str]) -> tuple[str, ...]:
    """Module names under ``package_path`` that are variants, alphabetical (importing none)."""
    return tuple(
        sorted(
            m.name for m in pkgutil.iter_modules(package_path) if m.name not in shared and not m.name.startswith("_")
        )
    )


def load_variant(package: str, names: tuple[str, ...], name: str, attribute: str):
    """``package.<name>.<attribute>``; KeyError if ``name`` is not among ``names``."""
    if name not in names:
        raise KeyError(name)
    return getattr(import_module(f"{package}.{name}"), attribute)
