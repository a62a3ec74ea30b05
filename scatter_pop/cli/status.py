"""``scatter-pop status DIR``: progress, outcome counts, CPU time and ETA of a run folder.

Reads the folder only (never moves or writes anything), so it is safe while a run is going on.
"""

from __future__ import annotations

from scatter_pop.engine.outcome import EndReason, Fate, Settlement
from scatter_pop.ensemble.progress import Tally, format_duration
from scatter_pop.store.run_folder import RunFolder, read_parts

__all__ = ["configure", "execute", "status_lines"]


def configure(parser) -> None:
    parser.add_argument("dir", metavar="DIR", help="run folder (the --out of scatter-pop run)")


def _listing(indices, limit: int = 20) -> str:
    shown = ", ".join(str(i) for i in indices[:limit])
    return shown + (f", ... ({len(indices)} in all)" if len(indices) > limit else "")


def _further_line(tally: Tally, spec, workers: int) -> str:
    """How many systems a raised end time would continue, and its cost at their measured rate."""
    n_open = tally.reasons[EndReason.END_TIME]
    key, value = spec.end_setting()
    if not n_open:
        return "carry on     no system stopped at the end time: raising it would compute nothing"
    unit = "yr" if key == "end_time" else "inner orbits"
    text = (
        f"carry on     {n_open} systems stopped at the end time would continue if integration.{key} "
        f"(now {value:g} {unit}) is raised"
    )
    if tally.open_years > 0 and tally.open_cpu_seconds > 0:
        rate = tally.open_cpu_seconds / tally.open_years  # CPU s per simulated yr, summed over them
        costs = []
        for factor in (2, 10):
            cpu = rate * tally.open_years * (factor - 1)
            costs.append(
                f"x{factor}: {format_duration(cpu)} CPU, ~{format_duration(cpu / workers)} on {workers} workers"
            )
        text += f"; at their measured rate ({rate * 1e3:.3g} CPU ms per simulated yr) " + "; ".join(costs)
        text += " (an upper estimate: some will settle on the way)"
    return text


def status_lines(path) -> list[str]:
    """The lines ``scatter-pop status`` prints for the run folder ``path``."""
    folder = RunFolder(path)
    spec = folder.stored_spec("dir")
    n = spec.run.systems
    parts, bad = read_parts(folder, spec)
    tally = Tally()
    for part in parts:
        inside = part.data.sel(system=part.indices < n)
        if inside.sizes["system"]:
            tally.add(inside)
    state = folder.state()
    running = folder.locked_by_other()
    lines = [
        f"run folder   {folder.path}  (run {spec.run.name!r}, seed {spec.run.seed}, identity {spec.digest()[:12]})"
    ]
    if running:
        lines.append(
            f"state        running since {state.get('started', '?')} "
            f"(pid {state.get('pid', '?')} on {state.get('host', '?')}, {state.get('workers', '?')} workers)"
        )
    elif tally.systems >= n and folder.ensemble_is_current(spec):
        lines.append(f"state        finished; {folder.ensemble_path}")
    else:
        lines.append("state        not running; rerun `scatter-pop run` on the spec to continue")
    remaining = max(n - tally.systems, 0)
    lines.append(f"systems      {tally.systems}/{n} done ({100.0 * tally.systems / n:.1f} %), {remaining} to go")
    f = tally.fates
    lines.append(
        f"planets      survived {f[Fate.SURVIVED]}, ejected {f[Fate.EJECTED]}, merged {f[Fate.MERGED]}, "
        f"hit star {f[Fate.HIT_STAR]}, tidally disrupted {f[Fate.DISRUPTED]}, unbound at the end {f[Fate.UNBOUND]}"
    )
    lines.append("end reasons  " + ", ".join(f"{r.word} {tally.reasons[r]}" for r in EndReason))
    c = tally.settlement
    lines.append(
        f"settlement   settled {c[Settlement.SETTLED]}, likely stable {c[Settlement.LIKELY_STABLE]}, "
        f"unsettled {c[Settlement.UNSETTLED]} (snapshots; only settled + likely stable are outcomes)"
    )
    lines.append(_further_line(tally, spec, state.get("workers") or 1))
    computed = tally.systems - len(tally.failed)
    mean = tally.cpu_seconds / computed if computed else float("nan")
    lines.append(
        f"CPU time     {format_duration(tally.cpu_seconds)} integrating"
        + (f" (mean {mean:.3g} s per system)" if computed else "")
    )
    if remaining and not running:
        lines.append("ETA          none: no run is going on (rerun `scatter-pop run` on the spec to continue)")
    elif remaining and computed:
        workers = state.get("workers") or 1
        lines.append(
            f"ETA          {format_duration(remaining * mean / workers)} on {workers} workers "
            f"({format_duration(remaining * mean)} of CPU time at the mean cost so far)"
        )
    elif remaining:
        lines.append("ETA          unknown (no system finished yet)")
    lines.append(
        f"capped       {len(tally.capped)}"
        + (
            f": systems {_listing(sorted(tally.capped))} (continue with scatter-pop run SPEC --extend)"
            if tally.capped
            else ""
        )
    )
    lines.append(
        f"failed       {len(tally.failed)}"
        + (
            f": systems {_listing(sorted(tally.failed))} (compute again with scatter-pop run SPEC --retry-failed)"
            if tally.failed
            else ""
        )
    )
    if bad:
        lines.append(f"damaged      {len(bad)} part files, recomputed on the next run: {'; '.join(bad[:5])}")
    return lines


def execute(args) -> int:
    for line in status_lines(args.dir):
        print(line)
    return 0
