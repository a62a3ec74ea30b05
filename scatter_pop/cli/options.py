"""Checks of command-line flag values shared by the subcommands (one-line InputError)."""

from __future__ import annotations

from scatter_pop.errors import InputError

__all__ = ["integer_flag"]


def integer_flag(text, flag: str, minimum: int) -> int:
    """``text`` as an integer >= ``minimum``, or InputError naming ``flag``."""
    try:
        value = int(text)
    except (TypeError, ValueError):
        raise InputError(f"{flag} = {text!r}: expected an integer >= {minimum}") from None
    if value < minimum:
        raise InputError(f"{flag} = {text!r}: expected an integer >= {minimum}")
    return value
