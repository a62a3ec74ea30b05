"""The target planet and the windows that decide what counts as "like it".

A target is one measured planet: e ± σ_e, a ± σ_a [AU], m sin i ± σ [M_sun]
and optionally its star's mass [M_sun].  :func:`target_from_values` builds it
from user values (masses in M_J) and raises
:class:`~scatter_pop.errors.InputError` naming the value when it is not
allowed; :mod:`scatter_pop.target.target_file` reads them from a small TOML file.

A simulated survivor is "like the target" when (see :class:`Windows`)

* its final e is at least the target's e (minus ``e_sigmas`` σ_e; default 0:
  "at or above the measured value");
* its final a lies within ``a_sigmas`` σ_a of the target's a (default 2), or,
  if ``a_factor`` F is given, within [a/F, a·F];
* its projected m sin i lies within ``msini_sigmas`` σ of the target's m sin i
  (default 2), or within [m/F, m·F] if ``msini_factor`` F is given.

±2σ windows are a common-practice choice (about 95 % of a Gaussian
measurement), not a published rule; the windows are user values so that a reader
can see how the answer depends on them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scatter_pop.constants import MJUP_MSUN
from scatter_pop.errors import InputError

__all__ = [
    "Target",
    "Windows",
    "TargetPoint",
    "TARGET_VALUES",
    "target_from_values",
    "windows_from_values",
    "target_point",
    "target_from_flags",
    "windows_from_flags",
]


@dataclass(frozen=True)
class Target:
    """One measured planet.

    Parameters
    ----------
    e, e_err : float
        Eccentricity and its 1σ uncertainty (dimensionless).
    a, a_err : float
        Semi-major axis and its 1σ uncertainty [AU].
    msini, msini_err : float
        Minimum mass m sin i and its 1σ uncertainty [M_sun].
    mstar : float or None
        Mass of the target's star [M_sun]; None: not given.
    name : str
        Name used in reports.
    true_mass : bool
        The mass is a true mass (e.g. from astrometry), not m sin i: simulated
        masses are then compared without projection.
    """

    e: float
    e_err: float
    a: float
    a_err: float
    msini: float
    msini_err: float
    mstar: float | None = None
    name: str = "target"
    true_mass: bool = False

    def __post_init__(self):
        if not (
            0.0 <= self.e < 1.0
            and self.a > 0
            and self.msini > 0
            and self.e_err >= 0
            and self.a_err >= 0
            and self.msini_err >= 0
            and (self.mstar is None or self.mstar > 0)
        ):
            raise ValueError(f"target values out of range: {self!r}")


def _number(key: str, value, allowed: str, ok, where: str = "") -> float:
    """``value`` as a finite float for which ``ok`` holds, or InputError naming ``where + key``."""
    name = f"{where}{key}"
    if isinstance(value, bool):
        raise InputError(f"{name} = {value!r}: must be a number ({allowed})", arguments=(key,))
    try:
        x = float(value)
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"{name} = {value!r}: must be a number ({allowed})", arguments=(key,)) from None
    if not math.isfinite(x) or not ok(x):
        raise InputError(f"{name} = {value!r}: must be {allowed}", arguments=(key,))
    return x


# what each target value may be: (allowed, check)
TARGET_VALUES = {
    "e": ("in [0, 1)", lambda x: 0.0 <= x < 1.0),
    "e_err": (">= 0", lambda x: x >= 0),
    "a": ("> 0 (AU)", lambda x: x > 0),
    "a_err": (">= 0 (AU)", lambda x: x >= 0),
    "msini": ("> 0 (M_J)", lambda x: 0 < x <= 1e5),
    "msini_err": (">= 0 (M_J)", lambda x: x >= 0),
    "star_mass": ("> 0 (M_sun)", lambda x: 0 < x <= 1e3),
}


def target_from_values(
    *, e, e_err, a, a_err, msini, msini_err, star_mass=None, name: str = "target", true_mass: bool = False, where=""
) -> Target:
    """Check target values (masses in M_J) and build a :class:`Target`.

    Parameters
    ----------
    e, e_err : float
        Eccentricity, in [0, 1), and its uncertainty (>= 0).
    a, a_err : float
        Semi-major axis [AU] (> 0) and its uncertainty [AU] (>= 0).
    msini, msini_err : float
        m sin i [M_J] (> 0) and its uncertainty [M_J] (>= 0).
    star_mass : float or None
        Mass of the target's star [M_sun] (> 0).
    name : str
        Name used in reports.
    true_mass : bool
        ``msini`` is a true mass (no projection of simulated masses).
    where : str
        Prefix of the names in messages (e.g. ``"target.toml: target."``).

    Raises
    ------
    InputError
        Naming the argument (``e``, ``e_err``, ...), the value and what is allowed.
    """
    given = dict(e=e, e_err=e_err, a=a, a_err=a_err, msini=msini, msini_err=msini_err)
    v = {k: _number(k, x, *TARGET_VALUES[k], where=where) for k, x in given.items()}
    if star_mass is not None:
        star_mass = _number("star_mass", star_mass, *TARGET_VALUES["star_mass"], where=where)
    return Target(
        v["e"],
        v["e_err"],
        v["a"],
        v["a_err"],
        v["msini"] * MJUP_MSUN,
        v["msini_err"] * MJUP_MSUN,
        star_mass,
        str(name),
        bool(true_mass),
    )


def target_from_flags(*, mstar=None, **values) -> Target:
    """Older name of :func:`target_from_values` (``mstar`` is its ``star_mass``)."""
    return target_from_values(star_mass=mstar, **values)


@dataclass(frozen=True)
class Windows:
    """Which survivors count as like the target (see the module docstring).

    Parameters
    ----------
    a_sigmas : float
        Half-width of the a window in σ_a.
    a_factor : float or None
        If given (> 1), the a window is [a/F, a·F] instead.
    msini_sigmas : float
        Half-width of the m sin i window in σ.
    msini_factor : float or None
        If given (> 1), the m sin i window is [m/F, m·F] instead.
    e_sigmas : float
        The e threshold is e − e_sigmas·σ_e (0: the measured e itself).
    """

    a_sigmas: float = 2.0
    a_factor: float | None = None
    msini_sigmas: float = 2.0
    msini_factor: float | None = None
    e_sigmas: float = 0.0

    def a_range(self, t: Target) -> tuple[float, float]:
        """[low, high] of the a window [AU]."""
        if self.a_factor is not None:
            return t.a / self.a_factor, t.a * self.a_factor
        return max(t.a - self.a_sigmas * t.a_err, 0.0), t.a + self.a_sigmas * t.a_err

    def msini_range(self, t: Target) -> tuple[float, float]:
        """[low, high] of the m sin i window [M_sun]."""
        if self.msini_factor is not None:
            return t.msini / self.msini_factor, t.msini * self.msini_factor
        return max(t.msini - self.msini_sigmas * t.msini_err, 0.0), t.msini + self.msini_sigmas * t.msini_err

    def e_min(self, t: Target) -> float:
        """Smallest final e that counts (dimensionless)."""
        return max(t.e - self.e_sigmas * t.e_err, 0.0)


def windows_from_values(
    target: Target, *, a_window=2.0, a_factor=None, msini_window=2.0, msini_factor=None, e_window=0.0, where=""
) -> Windows:
    """Check the window values against the target and build :class:`Windows`.

    Raises
    ------
    InputError
        For a negative width, a factor <= 1, or a window of zero width (an
        uncertainty of 0 with a σ window), naming the argument.
    """
    a_window = _number("a_window", a_window, "> 0 (in units of a_err)", lambda x: x > 0, where)
    msini_window = _number("msini_window", msini_window, "> 0 (in units of msini_err)", lambda x: x > 0, where)
    e_window = _number("e_window", e_window, ">= 0 (in units of e_err)", lambda x: x >= 0, where)
    if a_factor is not None:
        a_factor = _number("a_factor", a_factor, "> 1", lambda x: x > 1, where)
    elif target.a_err == 0:
        raise InputError(
            f"{where}a_err = 0: the a window of ±a_window x a_err is empty; give a_err > 0 or a_factor F (> 1)",
            arguments=("a_err", "a_window", "a_factor"),
        )
    if msini_factor is not None:
        msini_factor = _number("msini_factor", msini_factor, "> 1", lambda x: x > 1, where)
    elif target.msini_err == 0:
        raise InputError(
            f"{where}msini_err = 0: the m sin i window of ±msini_window x msini_err is "
            "empty; give msini_err > 0 or msini_factor F (> 1)",
            arguments=("msini_err", "msini_window", "msini_factor"),
        )
    return Windows(a_window, a_factor, msini_window, msini_factor, e_window)


windows_from_flags = windows_from_values  # older name


@dataclass(frozen=True)
class TargetPoint:
    """A target as drawn in figures: e ± σ_e and a ± σ_a [AU] (no mass needed).

    :class:`Target` has the same attributes and can be drawn as well.
    """

    e: float
    e_err: float
    a: float
    a_err: float
    name: str = "target"


def target_point(*, e, e_err, a, a_err, name: str = "target", where: str = "") -> TargetPoint:
    """Check e ± σ_e and a ± σ_a [AU] and build a :class:`TargetPoint` (InputError names the argument)."""
    v = {k: _number(k, x, *TARGET_VALUES[k], where=where) for k, x in dict(e=e, e_err=e_err, a=a, a_err=a_err).items()}
    return TargetPoint(v["e"], v["e_err"], v["a"], v["a_err"], str(name))
