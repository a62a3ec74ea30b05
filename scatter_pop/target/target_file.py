"""The target file: one measured planet and its windows in a small TOML file.

The same file serves ``scatter-pop judge``, ``scatter-pop figures`` and the demo; single values
may be overridden (the command line's flags)::

    [target]
    name = "..."          # used in reports
    e = 0.84              # eccentricity, in [0, 1)
    e_err = 0.03          # its 1-sigma uncertainty
    a = 15.0              # semi-major axis [AU]
    a_err = 3.0           # [AU]
    msini = 1.8           # m sin i [M_J] (a true mass with true_mass = true)
    msini_err = 0.4       # [M_J]
    star_mass = 1.1       # the target's star [M_sun], optional: simulated masses are scaled to it
    true_mass = false     # optional
    invented = false      # optional: say in every report that the planet is not real

    [windows]             # optional: what counts as "like the target"
    a_window = 2          # a within +-K a_err (or a_factor F: [a/F, a F])
    msini_window = 2      # m sin i within +-K msini_err (or msini_factor F)
    e_window = 0          # e at least e - K e_err

    [survey]              # optional: RV detection rule applied to the simulated survivors
    k_min = 3.0           # m/s
    baseline = 40.0       # yr

Errors name the file and the key (``target.toml: target.e = 1.2: must be in [0, 1)``); an error in
an override names the override (its argument name, which the command line says as its flag).
"""

from __future__ import annotations

import difflib
import tomllib
from dataclasses import dataclass
from pathlib import Path

from scatter_pop.errors import InputError
from scatter_pop.target.planet import (
    Target,
    TargetPoint,
    Windows,
    target_from_values,
    target_point,
    windows_from_values,
)

__all__ = ["TargetFile", "load_target_file", "TARGET_KEYS", "WINDOW_KEYS", "SURVEY_KEYS"]

TARGET_KEYS = ("name", "e", "e_err", "a", "a_err", "msini", "msini_err", "star_mass", "true_mass", "invented")
WINDOW_KEYS = ("a_window", "a_factor", "msini_window", "msini_factor", "e_window")
SURVEY_KEYS = ("k_min", "baseline")
_SECTIONS = {"target": TARGET_KEYS, "windows": WINDOW_KEYS, "survey": SURVEY_KEYS}
_POINT = ("e", "e_err", "a", "a_err")
_MASS = ("msini", "msini_err")


@dataclass(frozen=True)
class TargetFile:
    """What a target file (with overrides) says.

    ``target`` is a :class:`Target` when the masses are given, else None; ``point`` (e, a and their
    errors) is always there; ``survey`` is a :class:`~scatter_pop.survey.forward_model.RVSurvey` or None.
    """

    point: TargetPoint
    target: Target | None
    windows: Windows | None
    survey: object | None
    invented: bool
    source: str


def _unknown(where: str, key: str, allowed) -> InputError:
    near = difflib.get_close_matches(key, allowed, n=1)
    hint = f" (did you mean {near[0]}?)" if near else ""
    return InputError(f"{where}{key}: unknown key{hint}; allowed: {', '.join(allowed)}")


def _read(path: Path) -> dict:
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"target file {str(path)!r} does not exist", arguments=("target",)) from None
    except IsADirectoryError:
        raise InputError(f"target file {str(path)!r} is a folder, not a TOML file", arguments=("target",)) from None
    except OSError as exc:
        raise InputError(f"target file {str(path)!r} cannot be read ({exc.strerror})", arguments=("target",)) from None
    try:
        text = raw.decode("utf-8-sig")  # a byte-order mark (spreadsheet and editor exports) is accepted
    except UnicodeDecodeError as exc:
        raise InputError(f"target file {str(path)!r}: byte {exc.start} is not UTF-8; save the file as UTF-8") from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"target file {str(path)!r}: not valid TOML: {exc}") from None
    for section, value in doc.items():
        if section not in _SECTIONS:
            raise _unknown(f"{path.name}: [", section, tuple(_SECTIONS)) from None
        if not isinstance(value, dict):
            raise InputError(f"{path.name}: {section} = {value!r}: must be a table [{section}]")
        for key in value:
            if key not in _SECTIONS[section]:
                raise _unknown(f"{path.name}: {section}.", key, _SECTIONS[section])
    return doc


def load_target_file(path=None, overrides: dict | None = None, *, need_mass: bool = True) -> TargetFile:
    """Read a target file and apply ``overrides`` (target and window keys, None = not given).

    Parameters
    ----------
    path : str or Path or None
        The TOML file; None: everything comes from ``overrides``.
    overrides : dict
        Values that replace the file's (keys of ``[target]`` and ``[windows]``).
    need_mass : bool
        Require ``msini`` and ``msini_err`` (judging needs them; drawing a target does not).

    Raises
    ------
    InputError
        One line naming the file and key, or the override, and what is allowed.
    """
    doc = _read(Path(path)) if path is not None else {}
    file_where = f"{Path(path).name}: " if path is not None else ""
    overrides = {k: v for k, v in (overrides or {}).items() if v is not None}
    for key in overrides:
        if key not in TARGET_KEYS + WINDOW_KEYS:
            raise ValueError(f"override {key!r} is not a target or window key")
    values, where = {}, {}
    for section, keys in (("target", TARGET_KEYS), ("windows", WINDOW_KEYS)):
        for key in keys:
            if key in overrides:
                values[key], where[key] = overrides[key], ""
            elif key in doc.get(section, {}):
                values[key], where[key] = doc[section][key], f"{file_where}{section}."
    required = _POINT + (_MASS if need_mass else ())
    missing = [k for k in required if k not in values]
    if missing:
        first = missing[0]
        source = f"{file_where}target.{first}" if path is not None else first
        raise InputError(
            f"{source} is missing: give the target's {', '.join(missing)} (a target file [target] table, "
            "or each value on its own)",
            arguments=(first, "target"),
        )

    def checked(keys, build, **extra):
        # the message starts with the value at fault (its first argument): say where that came from
        try:
            return build(**{k: values[k] for k in keys if k in values}, **extra)
        except InputError as exc:
            key = exc.arguments[0] if exc.arguments else None
            if key is None or not where.get(key):
                raise
            raise InputError(f"{where[key]}{exc}") from None

    name = values.get("name", "target")
    if not isinstance(name, str) or not name.strip():
        raise InputError(f"{where['name']}name = {name!r}: must be a non-empty string", arguments=("name",))
    for flag in ("true_mass", "invented"):
        if flag in values and not isinstance(values[flag], bool):
            raise InputError(f"{where[flag]}{flag} = {values[flag]!r}: must be true or false", arguments=(flag,))
    point = checked(_POINT, target_point, name=name)
    target = windows = None
    if all(k in values for k in _MASS):
        target = checked(
            _POINT + _MASS + (("star_mass",) if "star_mass" in values else ()),
            target_from_values,
            name=name,
            true_mass=values.get("true_mass", False),
        )
        windows = checked(WINDOW_KEYS, lambda **w: windows_from_values(target, **w))
    survey = None
    if "survey" in doc:
        from scatter_pop.survey.forward_model import RVSurvey

        s = doc["survey"]
        missing = [k for k in SURVEY_KEYS if k not in s]
        if missing:
            raise InputError(
                f"{file_where}survey.{missing[0]} is missing: [survey] needs k_min (m/s) and baseline (yr)"
            )
        for key, ok, allowed in (("k_min", lambda x: x >= 0, ">= 0 (m/s)"), ("baseline", lambda x: x > 0, "> 0 (yr)")):
            x = s[key]
            if isinstance(x, bool) or not isinstance(x, int | float) or not ok(x) or x != x or abs(x) == float("inf"):
                raise InputError(f"{file_where}survey.{key} = {x!r}: must be a number {allowed}")
        survey = RVSurvey(float(s["k_min"]), float(s["baseline"]))
    return TargetFile(point, target, windows, survey, bool(values.get("invented", False)), str(path or "values"))
