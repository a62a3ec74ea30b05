"""Sample cuts shared by the observed and the simulated samples, with their counts.

A cut keeps values inside a closed range; rows whose value is unknown (NaN)
are dropped by a cut that needs that value and counted separately, so a
reader can always add the numbers up.  Ranges are in the package's units
(AU, yr, M_sun); converting a user's days or Jupiter masses happens in the
command line, once.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from scatter_pop.errors import InputError

__all__ = ["Range", "SampleCuts", "Step", "CutLog", "check_range"]


@dataclass(frozen=True)
class Range:
    """Closed interval [low, high]; either end may be infinite."""

    low: float = -np.inf
    high: float = np.inf

    def contains(self, values) -> np.ndarray:
        v = np.asarray(values, dtype=float)
        return (v >= self.low) & (v <= self.high)

    def describe(self, scale: float = 1.0, unit: str = "") -> str:
        lo = "-inf" if np.isinf(self.low) else f"{self.low * scale:g}"
        hi = "inf" if np.isinf(self.high) else f"{self.high * scale:g}"
        return f"[{lo}, {hi}]" + (f" {unit}" if unit else "")


def check_range(low: float, high: float, name: str, minimum: float = 0.0) -> Range:
    """Build a :class:`Range`, raising InputError for a reversed or negative one.

    Parameters
    ----------
    low, high : float
        Ends of the interval (package units).
    name : str
        Key or flag the values came from, for the message.
    minimum : float
        Smallest allowed ``low``.
    """
    if np.isnan(low) or np.isnan(high):
        raise InputError(f"{name} = {low!r},{high!r}: both ends must be numbers")
    if low < minimum:
        raise InputError(f"{name} = {low!r},{high!r}: the lower end must be >= {minimum:g}")
    if high < low:
        raise InputError(f"{name} = {low!r},{high!r}: the range is reversed; give LOW,HIGH with LOW <= HIGH")
    return Range(float(low), float(high))


@dataclass(frozen=True)
class SampleCuts:
    """Cuts applied to a sample of planets (package units).

    Attributes
    ----------
    a : Range or None
        Semi-major axis [AU].
    period : Range or None
        Orbital period [yr].
    mass : Range or None
        Planet mass [M_sun]: m sin i where the sample is projected (always for
        the observed catalogue), the true mass otherwise.
    m_star : Range or None
        Stellar mass [M_sun] (observed catalogue only; a simulated ensemble has
        one star).
    """

    a: Range | None = None
    period: Range | None = None
    mass: Range | None = None
    m_star: Range | None = None


@dataclass(frozen=True)
class Step:
    """One line of a cut log: machine key, readable label, rows remaining."""

    key: str
    label: str
    n: int


@dataclass
class CutLog:
    """Ordered counts: how many rows remain after each step."""

    steps: list[Step] = field(default_factory=list)

    def record(self, key: str, label: str, n: int) -> None:
        self.steps.append(Step(key, label, int(n)))

    def apply(
        self, keep: np.ndarray, values, rng: Range | None, name: str, scale: float = 1.0, unit: str = ""
    ) -> np.ndarray:
        """Apply one range cut to the rows still in ``keep`` and log it.

        Rows whose value is unknown are dropped first, under their own step
        ``<name>_known``; then the range keeps ``<name>_range``.  ``scale`` and
        ``unit`` only shape the label (e.g. M_sun shown in M_J).
        """
        if rng is None:
            return keep
        v = np.asarray(values, dtype=float)
        known = np.isfinite(v)
        if (keep & ~known).any():
            keep = keep & known
            self.record(f"{name}_known", f"{name} known", int(np.count_nonzero(keep)))
        with np.errstate(invalid="ignore"):
            keep = keep & rng.contains(v)
        self.record(f"{name}_range", f"{name} in {rng.describe(scale, unit)}", int(np.count_nonzero(keep)))
        return keep

    def as_dict(self) -> dict[str, int]:
        return {s.key: s.n for s in self.steps}

    @property
    def final(self) -> int:
        return self.steps[-1].n if self.steps else 0
