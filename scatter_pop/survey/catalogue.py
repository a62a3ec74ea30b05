"""The observed catalogue: a CSV of planets read into arrays, with cuts and counts.

Catalogue units (one per column, documented in README): eccentricity and its
errors dimensionless, semi-major axis in AU, period in days, planet mass in
Jupiter masses (m sin i for RV planets), stellar mass in M_sun.  They are
converted here, once, to AU, yr and M_sun.

Rules
-----
* Blank cells (or nan, NA, N/A, null, none) are missing values.  A row missing its eccentricity is dropped
  and counted; a row missing a value that a cut needs is dropped by that cut
  and counted.
* Exact ``e = 0`` entries are usually fits with the orbit fixed circular,
  not measurements (common practice), so they are dropped and counted unless
  ``keep_zero_e`` is set.
* A missing semi-major axis is filled from the period and the stellar mass by
  Kepler's third law (m sin i added to M*), and counted.
* Error columns may hold signed or unsigned numbers; their magnitude is used.
* Anything malformed (missing column, non-numeric cell, e outside [0, 1),
  non-positive a, period or mass) raises :class:`InputError` naming the
  column, the line and the value.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field, fields
from pathlib import Path

import numpy as np

from scatter_pop.constants import DAY_S, MJUP_MSUN, YEAR_S
from scatter_pop.errors import InputError
from scatter_pop.survey.cuts import CutLog, SampleCuts
from scatter_pop.survey.radial_velocity import orbital_period

__all__ = ["ColumnMap", "ObservedSample", "load_catalogue", "CATALOGUE_UNITS"]

#: quantity -> unit expected in the CSV
CATALOGUE_UNITS = {
    "e": "1",
    "e_err_lo": "1",
    "e_err_hi": "1",
    "a": "AU",
    "period": "d",
    "mass": "M_J",
    "m_star": "M_sun",
}


@dataclass(frozen=True)
class ColumnMap:
    """Which CSV column holds each quantity (units in :data:`CATALOGUE_UNITS`).

    The defaults are the column names of the shipped ``observed_rv_giants.csv``.
    """

    e: str = "e"
    e_err_lo: str = "e_err_lo"
    e_err_hi: str = "e_err_hi"
    a: str = "a_au"
    period: str = "period_days"
    mass: str = "mass_mjup"
    m_star: str = "mstar_msun"

    @classmethod
    def parse(cls, text: str, flag: str = "columns") -> tuple[ColumnMap, frozenset[str]]:
        """Read ``quantity=column,...``; return the map and the quantities given explicitly."""
        known = {f.name for f in fields(cls)}
        mapping = {}
        for item in (p.strip() for p in text.split(",") if p.strip()):
            key, sep, column = item.partition("=")
            key, column = key.strip(), column.strip()
            if not sep or not column:
                raise InputError(f"{flag} = {text!r}: items must look like quantity=column, e.g. e=ecc")
            if key not in known:
                raise InputError(f"{flag}: unknown quantity {key!r}; allowed: {', '.join(sorted(known))}")
            mapping[key] = column
        return cls(**mapping), frozenset(mapping)


@dataclass(frozen=True, eq=False)
class ObservedSample:
    """Observed planets after the cuts (package units).

    Attributes
    ----------
    source : str
        Path of the catalogue.
    e, e_err_lo, e_err_hi : numpy.ndarray
        Eccentricity and its lower/upper 1σ errors (NaN: unknown).
    a : numpy.ndarray
        Semi-major axis [AU].
    period : numpy.ndarray
        Period [yr].
    mass : numpy.ndarray
        Catalogue planet mass (m sin i) [M_sun].
    m_star : numpy.ndarray
        Stellar mass [M_sun].
    line : numpy.ndarray
        Line of each kept row in the CSV (header is line 1).
    a_from_kepler : numpy.ndarray of bool
        Rows whose a was computed from P and M* (Kepler's third law).
    log : CutLog
        Rows remaining after each step.
    zeros_kept : bool
        Whether exact e = 0 entries were kept.
    """

    source: str
    e: np.ndarray
    e_err_lo: np.ndarray
    e_err_hi: np.ndarray
    a: np.ndarray
    period: np.ndarray
    mass: np.ndarray
    m_star: np.ndarray
    line: np.ndarray
    a_from_kepler: np.ndarray
    log: CutLog = field(default_factory=CutLog)
    zeros_kept: bool = False

    @property
    def n(self) -> int:
        return int(self.e.size)

    @property
    def n_a_derived(self) -> int:
        return int(np.count_nonzero(self.a_from_kepler))

    @property
    def n_with_errors(self) -> int:
        return int(np.count_nonzero((np.nan_to_num(self.e_err_lo) + np.nan_to_num(self.e_err_hi)) > 0))


_MISSING = {"nan", "na", "n/a", "null", "none"}  # spellings of a missing value


def _read_rows(path: Path) -> tuple[list[str], list[dict], list[int]]:
    """Header, rows and the line each row starts on, read strictly.

    A byte-order mark (what spreadsheet exports write) is accepted; refused with one line: a file
    that is not UTF-8, a header naming a column twice, a row with more cells than the header, and a
    quote that is not closed on its own line (csv would otherwise read the following lines into one
    cell and silently lose those rows).
    """
    name = path.name
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"catalogue {str(path)!r} does not exist") from None
    except IsADirectoryError:
        raise InputError(f"catalogue {str(path)!r} is a folder; expected a CSV file") from None
    except OSError as exc:
        raise InputError(f"catalogue {str(path)!r} cannot be read ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            f"catalogue {name}, line {line}: not UTF-8 (byte {exc.start}); save the file as UTF-8"
        ) from None
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    start = 1
    try:
        header = [h.strip() for h in next(reader, [])]
        rows, lines = [], []
        start = reader.line_num + 1
        for cells in reader:
            if reader.line_num != start:  # one record spanning several lines: a quote left open
                raise InputError(
                    f'catalogue {name}, line {start}: a quote (") opened on this line is not closed on it; '
                    "close it or remove it (quoted cells may not span lines)"
                )
            if cells and len(cells) > len(header):
                raise InputError(
                    f"catalogue {name}, line {start}: {len(cells)} cells but the header has {len(header)} columns"
                )
            if any(c.strip() for c in cells):
                rows.append(dict(zip(header, cells)))
                lines.append(start)
            start = reader.line_num + 1
    except csv.Error as exc:
        why = (
            'a quote (") opened on this line is never closed' if "end of data" in str(exc) else f"not valid CSV ({exc})"
        )
        raise InputError(f"catalogue {name}, line {start}: {why}") from None
    if not any(header):
        raise InputError(f"catalogue {str(path)!r} is empty: expected a CSV header line")
    seen = set()
    for column in header:
        if column in seen:
            raise InputError(f"catalogue {name}, line 1: column {column!r} appears twice in the header; rename one")
        seen.add(column)
    return header, rows, lines


def _column(
    rows, lines, column: str, path: Path, *, lower=None, upper=None, strict_upper=False, positive=False, magnitude=False
) -> np.ndarray:
    out = np.full(len(rows), np.nan)
    for i, (row, line) in enumerate(zip(rows, lines)):
        text = (row.get(column) or "").strip()
        if not text or text.lower() in _MISSING:
            continue
        try:
            value = float(text)
        except ValueError:
            raise InputError(
                f"catalogue {path.name}, column {column!r}, line {line}: {text!r} is not a "
                f"number (blank for a missing value)"
            ) from None
        if not np.isfinite(value):
            raise InputError(
                f"catalogue {path.name}, column {column!r}, line {line}: {text!r} is not a "
                f"finite number (blank for a missing value)"
            )
        if magnitude:
            value = abs(value)
        if positive and value <= 0:
            raise InputError(f"catalogue {path.name}, column {column!r}, line {line}: {text} must be > 0")
        if lower is not None and (value < lower or (value >= upper if strict_upper else value > upper)):
            bracket = ")" if strict_upper else "]"
            raise InputError(
                f"catalogue {path.name}, column {column!r}, line {line}: {text} is outside "
                f"[{lower:g}, {upper:g}{bracket}"
            )
        out[i] = value
    return out


def load_catalogue(
    path,
    *,
    columns: ColumnMap = ColumnMap(),
    cuts: SampleCuts = SampleCuts(),
    keep_zero_e: bool = False,
    explicit: frozenset[str] = frozenset(),
) -> ObservedSample:
    """Read an observed catalogue and apply the cuts.

    Parameters
    ----------
    path : str or pathlib.Path
        CSV file with a header line.
    columns : ColumnMap
        Column of each quantity.
    cuts : SampleCuts
        Ranges in package units: a [AU], period [yr], mass (m sin i) [M_sun],
        m_star [M_sun].
    keep_zero_e : bool
        Keep entries with e exactly 0 (default: drop and count them).
    explicit : frozenset of str
        Quantities whose column the user named; such a column must exist
        even when no cut needs it.

    Returns
    -------
    ObservedSample
    """
    path = Path(path)
    header, rows, lines = _read_rows(path)
    needed = {"e"} | set(explicit)
    needed |= {name for name in ("a", "period", "mass", "m_star") if getattr(cuts, name) is not None}
    if cuts.a is not None and columns.a not in header:
        needed -= {"a"}
        needed |= {"period", "m_star"}  # a then comes from Kepler's third law
    for quantity in sorted(needed):
        column = getattr(columns, quantity)
        if column not in header:
            raise InputError(
                f"catalogue {path.name}: column {column!r} ({quantity}, "
                f"{CATALOGUE_UNITS[quantity]}) not found; columns present: {', '.join(header)}"
            )

    def get(quantity, **kw):
        column = getattr(columns, quantity)
        if column not in header:
            return np.full(len(rows), np.nan)
        return _column(rows, lines, column, path, **kw)

    e = get("e", lower=0.0, upper=1.0, strict_upper=True)
    err_lo = get("e_err_lo", magnitude=True)
    err_hi = get("e_err_hi", magnitude=True)
    a = get("a", positive=True)
    period = get("period", positive=True) * (DAY_S / YEAR_S)
    mass = get("mass", positive=True) * MJUP_MSUN
    m_star = get("m_star", positive=True)

    # a from Kepler's third law where the catalogue lacks it
    derivable = ~np.isfinite(a) & np.isfinite(period) & np.isfinite(m_star)
    a_kepler = (period / orbital_period(1.0, m_star, np.nan_to_num(mass))) ** (2.0 / 3.0)
    a = np.where(derivable, a_kepler, a)

    log = CutLog()
    log.record("read", "rows read", len(rows))
    keep = np.isfinite(e)
    log.record("e_known", "e given", int(np.count_nonzero(keep)))
    if not keep_zero_e:
        keep &= e != 0.0
        log.record("e_nonzero", "e not exactly 0 (fixed circular fits left out)", int(np.count_nonzero(keep)))
    log_units = {
        "a": (1.0, "AU"),
        "period": (YEAR_S / DAY_S, "d"),
        "mass": (1.0 / MJUP_MSUN, "M_J"),
        "m_star": (1.0, "M_sun"),
    }
    for name, values in (("a", a), ("period", period), ("mass", mass), ("m_star", m_star)):
        scale, unit = log_units[name]
        keep = log.apply(keep, values, getattr(cuts, name), name, scale, unit)
    if not keep.any():
        summary = "; ".join(f"{s.label}: {s.n}" for s in log.steps)
        raise InputError(f"catalogue {path.name}: no rows left after the cuts ({summary})")
    return ObservedSample(
        source=str(path),
        e=e[keep],
        e_err_lo=err_lo[keep],
        e_err_hi=err_hi[keep],
        a=a[keep],
        period=period[keep],
        mass=mass[keep],
        m_star=m_star[keep],
        line=np.asarray(lines, dtype=int)[keep],
        a_from_kepler=derivable[keep],
        log=log,
        zeros_kept=bool(keep_zero_e),
    )
