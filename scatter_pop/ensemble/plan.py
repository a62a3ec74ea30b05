"""What a run still has to compute in its folder, cut into tasks; where their results go.

A :class:`Plan` is made from the part files already on disk (:mod:`scatter_pop.store.run_folder`):

* *new* systems are the indices ``0 .. run.systems-1`` that no part holds; they are cut into
  batches of consecutive indices, each written as a new part when it finishes;
* *continued* systems are capped ones (end reason ``stopped_by_wall_clock_cap``).  The cap is a budget of
  wall-clock seconds per system, counted over all its runs: a capped system whose time so far
  (``wall_seconds``) is below the spec's ``integration.wall_seconds_max`` (the cap was raised)
  continues up to it; with ``extend`` every capped system gets another ``wall_seconds_max`` on
  top of what it has used;
* *retried* systems are failed ones when ``retry_failed`` is asked for;
* *carried further* systems are those stopped at the end time (end reason ``stopped_at_end_time``:
  no stopping rule met, a snapshot) when the spec's end time is now later than the one they were
  integrated towards (``t_limit``).  They continue from the final state kept in their checkpoint
  file, with another ``wall_seconds_max`` on top of the time they have used; systems that settled
  (a stopping rule ended them) are not touched.  Because checks fall on the same chunk boundaries
  whatever the end time (:mod:`scatter_pop.engine.rebound_run`), the result equals a run made with
  the later end time from the start.

Continued and retried systems are recomputed per part, at most :data:`REDO_BATCH` to a task, and
their rows replaced in that part.

Consolidation: once :data:`CONSOLIDATE_PARTS` parts of adjacent ranges (none of them already a
merged one) are on disk, they are merged into one file, so that a long run leaves a few hundred
files rather than one per batch (file-count quotas, resume time: each part costs one file open).

Automatic batch size: single systems until one has finished, then as many systems as fit in
:data:`TARGET_TASK_SECONDS` at the mean cost per system so far, at most a quarter of the remaining
systems per worker (so the end of the run stays balanced) and at most :data:`MAX_AUTO_BATCH`.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass

import numpy as np
import xarray as xr

from scatter_pop.engine.outcome import EndReason
from scatter_pop.ensemble.progress import Tally
from scatter_pop.spec.reader import EnsembleSpec
from scatter_pop.store.run_folder import Part, RunFolder, read_parts

__all__ = ["Task", "Plan", "make_plan", "end_time_of", "TARGET_TASK_SECONDS", "MAX_AUTO_BATCH", "CONSOLIDATE_PARTS"]


def end_time_of(spec: EnsembleSpec, index: int) -> float:
    """The end time (yr) system ``index`` is integrated towards under ``spec`` (as the engine computes it)."""
    if spec.integration.end_time is not None:  # the same for every system
        return spec.integration.end_time
    from scatter_pop.engine.initial_conditions import draw_system

    return spec.integration.end_time_years(draw_system(spec, index).inner_period())


TARGET_TASK_SECONDS = 60.0
MAX_AUTO_BATCH = 100
CONSOLIDATE_PARTS = 64
REDO_BATCH = 16  # continued systems per task (each finished task rewrites the part holding them)


@dataclass(frozen=True)
class Task:
    """Systems integrated by one Dask task, in order.

    New systems (``redo`` False) become a new part; the results of a ``redo`` task replace the
    rows of the part that holds those systems.
    """

    indices: tuple[int, ...]
    redo: bool = False
    budgets: tuple[float, ...] | None = None  # per system wall_seconds_max, s (None: the spec's)

    def split(self) -> list[Task]:
        budgets = self.budgets or (None,) * len(self.indices)
        return [Task((i,), self.redo, None if b is None else (b,)) for i, b in zip(self.indices, budgets)]


class Plan:
    """Work left in a run folder and the bookkeeping of its results."""

    def __init__(
        self,
        spec: EnsembleSpec,
        folder: RunFolder,
        parts: list[Part],
        batch_size: int,
        extend: bool,
        retry_failed: bool,
    ):
        self.spec, self.folder, self.batch_size = spec, folder, batch_size
        n = spec.run.systems
        self.parts = {p.first: p for p in parts}
        self.tally = Tally()
        held = np.zeros(n, dtype=bool)
        self.redo: list[Task] = []
        self.kept_capped = 0
        self.n_further = 0  # systems carried to a later end time
        cap = spec.integration.wall_seconds_max
        for p in parts:
            inside = p.data.sel(system=p.indices < n)
            if inside.sizes["system"] == 0:
                continue
            self.tally.add(inside)
            held[inside["system"].values] = True
            reason = inside["end_reason"].values
            idx = inside["system"].values
            spent = inside["wall_seconds"].values
            again = {}
            for i, used in zip(idx[reason == int(EndReason.CAPPED)], spent[reason == int(EndReason.CAPPED)]):
                if extend:
                    again[int(i)] = float(used) + cap
                elif used < cap:
                    again[int(i)] = cap
                else:
                    self.kept_capped += 1
            if retry_failed:
                again.update({int(i): cap for i in idx[reason == int(EndReason.FAILED)]})
            stopped = reason == int(EndReason.END_TIME)
            for i, used, limit in zip(idx[stopped], spent[stopped], inside["t_limit"].values[stopped]):
                if end_time_of(spec, int(i)) > limit:
                    again[int(i)] = float(used) + cap
                    self.n_further += 1
            order = sorted(again)
            for k in range(0, len(order), REDO_BATCH):  # several tasks, so that carrying a run further is parallel
                chunk = order[k : k + REDO_BATCH]
                self.redo.append(Task(tuple(chunk), True, tuple(again[i] for i in chunk)))
        self.n_continue = sum(len(t.indices) for t in self.redo)
        missing = np.flatnonzero(~held)
        self.n_new = int(missing.size)
        # consecutive runs of missing indices, as (first, last)
        breaks = np.flatnonzero(np.diff(missing) != 1)
        starts = np.concatenate([[0], breaks + 1]) if missing.size else np.array([], dtype=int)
        ends = np.concatenate([breaks, [missing.size - 1]]) if missing.size else np.array([], dtype=int)
        self._runs = [[int(missing[a]), int(missing[b])] for a, b in zip(starts, ends)]
        self._redo_queue = list(self.redo)
        self.remaining_new = self.n_new

    # ---- work
    def has_work(self) -> bool:
        return self.n_new > 0 or self.n_continue > 0

    def auto_batch(self, workers: int) -> int:
        """Systems per new task (see the module docstring)."""
        if self.batch_size > 0:
            return self.batch_size
        done = self.tally.systems - len(self.tally.failed)
        if done <= 0 or self.tally.cpu_seconds <= 0:
            return 1
        mean = self.tally.cpu_seconds / done
        fit = max(1, int(TARGET_TASK_SECONDS // mean))
        balance = max(1, math.ceil(self.remaining_new / (4 * max(workers, 1))))
        return int(min(fit, balance, MAX_AUTO_BATCH))

    def next_task(self, workers: int) -> Task | None:
        """The next task to submit, or None when every task has been handed out."""
        if self._redo_queue:
            return self._redo_queue.pop(0)
        if not self._runs:
            return None
        run = self._runs[0]
        size = self.auto_batch(workers)
        last = min(run[0] + size - 1, run[1])
        task = Task(tuple(range(run[0], last + 1)))
        run[0] = last + 1
        if run[0] > run[1]:
            self._runs.pop(0)
        self.remaining_new -= len(task.indices)
        return task

    # ---- results
    def store(self, task: Task, data: xr.Dataset) -> None:
        """Write the records of a finished task (new part or rows replaced in its part)."""
        if not task.redo:
            part = self.folder.write_part(data, self.spec)
            self.parts[part.first] = part
            self.tally.add(data)
            self._consolidate_around(part)
            return
        old = self._holding(int(data["system"].values[0]))
        self.tally.add(old.data.sel(system=data["system"].values), sign=-1)
        self.parts[old.first] = self.folder.replace_systems(old, data, self.spec)
        self.tally.add(data)

    def _holding(self, index: int) -> Part:
        firsts = sorted(self.parts)
        return self.parts[firsts[bisect.bisect_right(firsts, index) - 1]]

    def _consolidate_around(self, part: Part) -> None:
        """Merge the block of adjacent unmerged parts around ``part`` once it is large enough."""
        firsts = sorted(k for k, p in self.parts.items() if not p.consolidated)
        i = firsts.index(part.first)
        lo, hi = i, i
        while lo > 0 and self.parts[firsts[lo - 1]].last + 1 == self.parts[firsts[lo]].first:
            lo -= 1
        while hi + 1 < len(firsts) and self.parts[firsts[hi]].last + 1 == self.parts[firsts[hi + 1]].first:
            hi += 1
        if hi - lo + 1 < CONSOLIDATE_PARTS:
            return
        block = [self.parts.pop(k) for k in firsts[lo : hi + 1]]
        merged = self.folder.consolidate(block, self.spec)
        self.parts[merged.first] = merged

    def parts_list(self) -> list[Part]:
        return [self.parts[k] for k in sorted(self.parts)]

    def summary(self) -> str:
        n = self.spec.run.systems
        words = [f"{self.n_new} new systems"]
        if self.n_further:
            words.append(f"{self.n_further} systems carried from their end time to the later one")
        if self.n_continue - self.n_further:
            words.append(f"{self.n_continue - self.n_further} capped/failed systems again")
        text = (
            f"run folder {self.folder.path}: {self.tally.systems}/{n} systems on disk; computing "
            f"{' and '.join(words)}; batch size {self.batch_size or 'automatic'}"
        )
        if self.kept_capped:
            text += f"; {self.kept_capped} capped systems kept as they are (continue them with extend=True, the run's --extend)"
        return text


def make_plan(
    spec: EnsembleSpec,
    folder: RunFolder,
    *,
    extend: bool = False,
    retry_failed: bool = False,
    batch_size: int = 0,
    read_only: bool = False,
    log=print,
) -> Plan:
    """Read the folder's parts and plan the rest of the run.

    With ``read_only`` (dry runs) damaged parts are only reported, not moved aside.
    """
    if read_only:
        parts, bad = read_parts(folder, spec)
        for line in bad:
            log(f"part {line}; would be moved aside and recomputed")
    else:
        parts, reports = folder.scan_parts(spec)
        for line in reports:
            log(line)
    return Plan(spec, folder, parts, batch_size, extend, retry_failed)
