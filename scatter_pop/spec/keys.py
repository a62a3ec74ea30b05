"""The one checker of TOML tables: every spec section and the ``[cluster]`` table read through it.

:class:`Table` reads one table key by key (type, range, default) and refuses keys it does not know
with the closest allowed one ("did you mean"); :func:`toml_repr` writes a value back as TOML would,
for the one-line messages of :class:`~scatter_pop.errors.InputError`, which always start with the
full key (``section.key = value: ...``).
"""

from __future__ import annotations

import difflib
import json
import math
from typing import Any

from scatter_pop.errors import InputError

__all__ = ["Table", "toml_repr", "coerce", "unknown_key"]

_TYPE_WORDS = {int: "an integer", float: "a number", str: "a string", bool: "true or false"}


def toml_repr(value) -> str:
    """A value as TOML would write it (for one-line error messages)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    return json.dumps(value) if isinstance(value, str) else repr(value)


def unknown_key(where: str, key: str, value, allowed) -> InputError:
    """The error for a key that ``[where]`` does not take, naming the closest allowed key."""
    allowed = sorted(allowed)
    close = difflib.get_close_matches(key, allowed, n=1)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    return InputError(
        f"{where}.{key} = {toml_repr(value)}: unknown key{hint}; allowed keys in [{where}]: {', '.join(allowed)}"
    )


def coerce(value, typ, key: str, allowed: str = ""):
    """``value`` as ``typ`` (an integer is a number; a boolean is not an integer), finite if a number."""
    word = _TYPE_WORDS[typ]
    if typ is float and isinstance(value, int) and not isinstance(value, bool):
        value = float(value)
    if not isinstance(value, typ) or (typ is not bool and isinstance(value, bool)):
        raise InputError(f"{key} = {toml_repr(value)}: must be {word}" + (f" ({allowed})" if allowed else ""))
    if typ is float and not math.isfinite(value):
        raise InputError(f"{key} = {toml_repr(value)}: must be a finite number" + (f" ({allowed})" if allowed else ""))
    return value


class Table:
    """Reads one TOML table ``[where]``; :meth:`finish` refuses the keys it does not take."""

    def __init__(self, table: Any, where: str, required: bool = True):
        if table is None:
            if required:
                raise InputError(f"section [{where}] is missing")
            table = {}
        if not isinstance(table, dict):
            raise InputError(f"{where} = {toml_repr(table)}: must be a table [{where}]")
        self.table, self.where = table, where

    def name(self, key: str) -> str:
        return f"{self.where}.{key}"

    def has(self, key: str) -> bool:
        return key in self.table

    def get(self, key, typ, default=None, *, required=False, check=None, allowed=""):
        """The value of ``key`` as ``typ``, or ``default``; ``check(value)`` must hold (``allowed`` says what)."""
        if key not in self.table:
            if required:
                raise InputError(f"{self.name(key)} is missing: {allowed or 'required'}")
            return default
        value = coerce(self.table[key], typ, self.name(key), allowed)
        if check is not None and not check(value):
            raise InputError(f"{self.name(key)} = {toml_repr(value)}: must be {allowed}")
        return value

    def finish(self, allowed_keys) -> None:
        """Refuse any key of the table outside ``allowed_keys``."""
        for key, value in self.table.items():
            if key not in allowed_keys:
                raise unknown_key(self.where, key, value, allowed_keys)
