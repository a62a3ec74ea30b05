"""Outcome tallies and the progress of a running ensemble: a bar on a terminal, plain lines in logs.

In a batch system's log file (or whenever :data:`BAR` is off, the library default) the progress is
one ordinary line of text per report (no carriage returns, no colour)::

    [scatter-pop] 37/100 systems (37.0 %) | ejected 21 merged 4 star 2 | capped 1 failed 0 | 0:01:12 elapsed, ETA 0:02:03

On a terminal the command line turns :data:`BAR` on and the same counts ride on a tqdm bar with its
rate and ETA (on standard error, so that standard output keeps only results).
"""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from scatter_pop.engine.outcome import EndReason, Fate, Settlement

__all__ = ["Tally", "Progress", "format_duration", "BAR", "VERBOSITY"]

BAR = False  # draw a tqdm bar instead of plain lines (the command line sets it on a terminal)
VERBOSITY = 0  # -1 quiet, 0 normal, 1 verbose (set by the command line)


def format_duration(seconds: float) -> str:
    """``H:MM:SS`` (days prefixed as ``Nd``) for a duration in seconds; ``?`` if unknown."""
    if seconds is None or not np.isfinite(seconds) or seconds < 0:
        return "?"
    s = int(round(seconds))
    days, s = divmod(s, 86400)
    h, s = divmod(s, 3600)
    m, s = divmod(s, 60)
    return (f"{days}d " if days else "") + f"{h}:{m:02d}:{s:02d}"


@dataclass
class Tally:
    """Counts over finished systems: planet fates, end reasons, integration time.

    ``fates`` and ``reasons`` map the codes of :class:`~scatter_pop.engine.outcome.Fate` and
    :class:`~scatter_pop.engine.outcome.EndReason` to counts; ``cpu_seconds`` sums each system's
    ``wall_seconds`` (one thread per system, so it is the CPU time spent integrating).
    ``settlement`` counts the settlement classes; ``open_cpu_seconds`` and ``open_years`` sum the CPU
    time and the integrated time of the systems stopped at the end time (those a raised end time
    continues), whose ratio is their measured cost per simulated year.
    """

    systems: int = 0
    fates: dict = field(default_factory=lambda: {f: 0 for f in Fate})
    reasons: dict = field(default_factory=lambda: {r: 0 for r in EndReason})
    cpu_seconds: float = 0.0
    settlement: dict = field(default_factory=lambda: {c: 0 for c in Settlement})
    open_cpu_seconds: float = 0.0
    open_years: float = 0.0
    capped: list = field(default_factory=list)
    failed: list = field(default_factory=list)

    def add(self, ds: xr.Dataset, sign: int = 1) -> None:
        """Add (``sign=1``) or remove (``sign=-1``) the systems of a schema dataset."""
        self.systems += sign * ds.sizes["system"]
        reason = ds["end_reason"].values
        ok = reason != int(EndReason.FAILED)
        fate = ds["fate"].values[ok]
        for f in Fate:
            self.fates[f] += sign * int((fate == int(f)).sum())
        for r in EndReason:
            self.reasons[r] += sign * int((reason == int(r)).sum())
        self.cpu_seconds += sign * float(np.nansum(ds["wall_seconds"].values))
        classes = ds["settlement"].values
        for c in Settlement:
            self.settlement[c] += sign * int((classes == int(c)).sum())
        stopped = reason == int(EndReason.END_TIME)
        self.open_cpu_seconds += sign * float(np.nansum(ds["wall_seconds"].values[stopped]))
        self.open_years += sign * float(np.nansum(ds["t_end"].values[stopped]))
        idx = ds["system"].values
        for name, code in (("capped", EndReason.CAPPED), ("failed", EndReason.FAILED)):
            chosen = idx[reason == int(code)].tolist()
            target = getattr(self, name)
            if sign > 0:
                target.extend(chosen)
            else:
                for i in chosen:
                    target.remove(i)

    def outcome_words(self) -> str:
        f = self.fates
        return f"ejected {f[Fate.EJECTED]} merged {f[Fate.MERGED]} star {f[Fate.HIT_STAR] + f[Fate.DISRUPTED]}"


class Progress:
    """Prints the progress line at most every ``interval`` seconds (and at the end).

    Parameters
    ----------
    total : int
        Systems the run must hold when finished.
    tally : Tally
        Counts so far, including systems finished by earlier runs in the folder.
    interval : float
        Minimum time between two printed lines, s.
    emit : callable, optional
        Receives each line (default: print to standard output, flushed).
    """

    def __init__(self, total: int, tally: Tally, interval: float = 10.0, emit=None):
        self.total, self.tally, self.interval = total, tally, interval
        self.emit = emit if emit is not None else (lambda line: print(line, file=sys.stdout, flush=True))
        self.start = time.monotonic()
        self.at_start = tally.systems
        self.last_print = -np.inf
        self.last_line_systems = -1
        self.bar = None
        if BAR:
            from tqdm import tqdm

            self.bar = tqdm(
                total=total, initial=tally.systems, unit="system", dynamic_ncols=True, file=sys.stderr, leave=True
            )

    def eta_seconds(self) -> float:
        """Remaining time extrapolated from this session's rate, s (NaN before any result)."""
        done_here = self.tally.systems - self.at_start
        if done_here <= 0:
            return float("nan")
        elapsed = time.monotonic() - self.start
        return elapsed / done_here * max(self.total - self.tally.systems, 0)

    def line(self) -> str:
        t = self.tally
        pct = 100.0 * t.systems / self.total if self.total else 100.0
        elapsed = time.monotonic() - self.start
        return (
            f"[scatter-pop] {t.systems}/{self.total} systems ({pct:.1f} %) | {t.outcome_words()} | "
            f"capped {len(t.capped)} failed {len(t.failed)} | {format_duration(elapsed)} elapsed, "
            f"ETA {format_duration(self.eta_seconds())}"
        )

    def update(self, force: bool = False) -> None:
        if self.bar is not None:
            t = self.tally
            self.bar.n = t.systems
            self.bar.set_postfix_str(
                f"{t.outcome_words()} | capped {len(t.capped)} failed {len(t.failed)}", refresh=False
            )
            self.bar.refresh()
            if force:
                self.bar.close()
            return
        now = time.monotonic()
        if (force and self.tally.systems != self.last_line_systems) or now - self.last_print >= self.interval:
            self.last_print, self.last_line_systems = now, self.tally.systems
            self.emit(self.line())
