"""The target planet and the windows that decide what counts as "like it".

A target is one measured planet: e ± σ_e, a ± σ_a [AU], m sin i ± σ [M_sun]
and optionally its star's mass [M_sun].  :func:`target_from_flags` builds it
from command-line values (masses in M_J) and raises
:class:`~scatter_pop.errors.InputError` naming the flag when a value is not
allowed.

A simulated survivor is "like the target" when (see :class:`Windows`)

* its final e is at least the target's e (minus ``e_sigmas`` σ_e; default 0:
  "at or above the measured value");
* its final a lies within ``a_sigmas`` σ_a of the target's a (default 2), or,
  if ``a_factor`` F is given, within [a/F, a·F];
* its projected m sin i lies within ``msini_sigmas`` σ of the target's m sin i
  (default 2), or within [m/F, m·F] if ``msini_factor`` F is given.

±2σ windows are a common-practice choice (about 95 % of a Gaussian
measurement), not a published rule; the windows are flags so that a reader
can see how the answer depends on them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scatter_pop.constants import MJUP_MSUN
from scatter_pop.errors import InputError

__all__ = ["Target", "Windows", "TargetPoint", "target_from_flags", "windows_from_flags", "target_point_from_flag"]


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


def _number(flag: str, value, allowed: str, ok) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{flag} {value!r}: must be a number ({allowed})") from None
    if not math.isfinite(x) or not ok(x):
        raise InputError(f"{flag} {value!r}: must be {allowed}")
    return x


def target_from_flags(
    *, e, e_err, a, a_err, msini, msini_err, mstar=None, name: str = "target", true_mass: bool = False
) -> Target:
    """Check command-line target values and build a :class:`Target`.

    Parameters
    ----------
    e, e_err : float
        Eccentricity, in [0, 1), and its uncertainty (>= 0).
    a, a_err : float
        Semi-major axis [AU] (> 0) and its uncertainty [AU] (>= 0).
    msini, msini_err : float
        m sin i [M_J] (> 0) and its uncertainty [M_J] (>= 0).
    mstar : float or None
        Stellar mass [M_sun] (> 0).
    name : str
        Name used in reports.
    true_mass : bool
        ``msini`` is a true mass (no projection of simulated masses).

    Raises
    ------
    InputError
        Naming the flag (``--e``, ``--e-err``, ...), the value and what is allowed.
    """
    e = _number("--e", e, "in [0, 1)", lambda x: 0.0 <= x < 1.0)
    e_err = _number("--e-err", e_err, ">= 0", lambda x: x >= 0)
    a = _number("--a", a, "> 0 (AU)", lambda x: x > 0)
    a_err = _number("--a-err", a_err, ">= 0 (AU)", lambda x: x >= 0)
    msini = _number("--msini", msini, "> 0 (M_J)", lambda x: x > 0)
    msini_err = _number("--msini-err", msini_err, ">= 0 (M_J)", lambda x: x >= 0)
    if mstar is not None:
        mstar = _number("--mstar", mstar, "> 0 (M_sun)", lambda x: x > 0)
    return Target(e, e_err, a, a_err, msini * MJUP_MSUN, msini_err * MJUP_MSUN, mstar, str(name), bool(true_mass))


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


def windows_from_flags(
    target: Target, *, a_window=2.0, a_factor=None, msini_window=2.0, msini_factor=None, e_window=0.0
) -> Windows:
    """Check the window flags against the target and build :class:`Windows`.

    Raises
    ------
    InputError
        For a negative width, a factor <= 1, or a window of zero width (an
        uncertainty of 0 with a σ window).
    """
    a_window = _number("--a-window", a_window, "> 0 (in units of --a-err)", lambda x: x > 0)
    msini_window = _number("--msini-window", msini_window, "> 0 (in units of --msini-err)", lambda x: x > 0)
    e_window = _number("--e-window", e_window, ">= 0 (in units of --e-err)", lambda x: x >= 0)
    if a_factor is not None:
        a_factor = _number("--a-factor", a_factor, "> 1", lambda x: x > 1)
    elif target.a_err == 0:
        raise InputError(
            "--a-err 0: the a window of ±--a-window x --a-err is empty; give --a-err > 0 or --a-factor F (> 1)"
        )
    if msini_factor is not None:
        msini_factor = _number("--msini-factor", msini_factor, "> 1", lambda x: x > 1)
    elif target.msini_err == 0:
        raise InputError(
            "--msini-err 0: the m sin i window of ±--msini-window x --msini-err is "
            "empty; give --msini-err > 0 or --msini-factor F (> 1)"
        )
    return Windows(a_window, a_factor, msini_window, msini_factor, e_window)


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


def target_point_from_flag(text: str, name: str = "target", flag: str = "--target") -> TargetPoint:
    """Read ``E,E_ERR,A,A_ERR`` (a in AU) from one flag.

    Raises
    ------
    InputError
        Naming the flag, the value and what is allowed.
    """
    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != 4:
        raise InputError(f"{flag} {text!r}: must be E,E_ERR,A,A_ERR (four numbers, a in AU), e.g. 0.9,0.02,9,1.5")
    e = _number(f"{flag} (E)", parts[0], "in [0, 1)", lambda x: 0.0 <= x < 1.0)
    e_err = _number(f"{flag} (E_ERR)", parts[1], ">= 0", lambda x: x >= 0)
    a = _number(f"{flag} (A)", parts[2], "> 0 (AU)", lambda x: x > 0)
    a_err = _number(f"{flag} (A_ERR)", parts[3], ">= 0 (AU)", lambda x: x >= 0)
    return TargetPoint(e, e_err, a, a_err, str(name))
