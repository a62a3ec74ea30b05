"""The run folder: spec copy, atomic part files, checkpoints, gathering, resume bookkeeping.

Layout of a run folder ``DIR``::

    DIR/spec.toml                      the exact spec text of the latest run in this folder
    DIR/run.json                       who ran it last: pid, host, workers, start/finish times
    DIR/parts/part_<first>_<last>.nc   outcome records of systems first..last (8-digit indices)
    DIR/checkpoints/system_<i>.bin     REBOUND snapshot of a system stopped by the wall-clock cap
    DIR/damaged/                       unreadable part files moved aside on resume (recomputed)
    DIR/failures.log                   tracebacks of systems that raised (recorded as failed)
    DIR/ensemble.nc                    every system gathered, netCDF4 + zlib (written at the end)
    DIR/.lock                          held (flock) while a run uses the folder

Every file this module writes is written atomically: ``<name>.tmp.<pid>``, fsync, ``os.replace``,
so a part is either whole or absent.  The dataset layout itself (names, units, flags) is
:mod:`scatter_pop.store.schema`'s.
"""

from __future__ import annotations

import datetime as _dt
import fcntl
import json
import os
import platform
import socket
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import xarray as xr

from scatter_pop.errors import InputError
from scatter_pop.spec.reader import EnsembleSpec, parse_spec
from scatter_pop.store.atomic import atomic_write_netcdf, atomic_write_text
from scatter_pop.store.parts import Part, drop_contained, load, part_name, scan, stack
from scatter_pop.store.schema import LENGTH_UNITS, MASS_UNITS, SETTLEMENT_RULE, validate_dataset

__all__ = [
    "RunFolder",
    "Part",
    "prepare_folder",
    "atomic_write_netcdf",
    "atomic_write_text",
    "open_ensemble",
    "read_parts",
    "versions",
    "end_time_change",
    "part_name",
    "SPEC_FILE",
    "ENSEMBLE_FILE",
]

SPEC_FILE = "spec.toml"
STATE_FILE = "run.json"
ENSEMBLE_FILE = "ensemble.nc"
PARTS, CHECKPOINTS, DAMAGED = "parts", "checkpoints", "damaged"
FAILURE_LOG = "failures.log"
LOCK_FILE = ".lock"
ENSEMBLE_COMPRESSION = {"zlib": True, "complevel": 4}


def _utc_now() -> str:
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")


def _package_version(name: str) -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version(name)
    except PackageNotFoundError:
        return "not installed"


def versions() -> dict[str, str]:
    """Versions of the software that produced a file (global attributes)."""
    import dask
    import netCDF4
    import rebound

    from scatter_pop.provenance import package_version, source_commit

    commit = source_commit()
    return {
        "scatter_pop_version": package_version(),
        **({"scatter_pop_commit": commit} if commit else {}),
        "rebound_version": rebound.__version__,
        "heyoka_version": _package_version("heyoka"),  # read without importing it (LLVM loads in ~1 s)
        "numpy_version": np.__version__,
        "dask_version": dask.__version__,
        "xarray_version": xr.__version__,
        "netcdf4_version": netCDF4.__version__,
        "python_version": platform.python_version(),
    }


class RunFolder:
    """Paths and bookkeeping of one run folder (see the module docstring for the layout)."""

    def __init__(self, path):
        self.path = Path(path)
        self.parts_dir = self.path / PARTS
        self.checkpoints_dir = self.path / CHECKPOINTS
        self.damaged_dir = self.path / DAMAGED
        self.spec_path = self.path / SPEC_FILE
        self.state_path = self.path / STATE_FILE
        self.ensemble_path = self.path / ENSEMBLE_FILE
        self.failure_log = self.path / FAILURE_LOG

    def __repr__(self) -> str:
        return f"RunFolder({str(self.path)!r})"

    # ---- identity
    def is_run_folder(self) -> bool:
        return self.spec_path.is_file()

    def stored_spec(self, flag: str = "path") -> EnsembleSpec:
        """The spec kept in the folder; InputError (naming the argument ``flag``) if it is not a run folder."""
        if not self.is_run_folder():
            raise InputError(
                f"{flag} = {str(self.path)!r}: not a scatter-pop run folder (no {SPEC_FILE})", arguments=(flag,)
            )
        try:
            text = self.spec_path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"{self.spec_path}: cannot be read: {exc}") from None
        return parse_spec(text, source=str(self.spec_path))

    def checkpoint_path(self, index: int) -> Path:
        return self.checkpoints_dir / f"system_{index:08d}.bin"

    def state(self) -> dict:
        """Contents of run.json (empty if absent or unreadable)."""
        try:
            return json.loads(self.state_path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return {}

    def write_state(self, **fields) -> None:
        state = {**self.state(), **fields}
        atomic_write_text(json.dumps(state, indent=1, sort_keys=True) + "\n", self.state_path)

    # ---- locking
    @contextmanager
    def lock(self):
        """Hold the folder's lock; InputError if another run holds it."""
        self.path.mkdir(parents=True, exist_ok=True)
        fh = open(self.path / LOCK_FILE, "a+")
        try:
            try:
                fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                fh.seek(0)
                who = fh.read().strip() or "unknown"
                raise InputError(
                    f"out = {str(self.path)!r}: another scatter-pop run is using this folder "
                    f"({who}); wait for it to end or choose another out",
                    arguments=("out",),
                ) from None
            fh.seek(0)
            fh.truncate()
            fh.write(f"pid {os.getpid()} on {socket.gethostname()}\n")
            fh.flush()
            yield self
        finally:
            fh.close()  # closing releases the flock

    def locked_by_other(self) -> bool:
        """True while some process holds the folder's lock (a run in progress)."""
        lock = self.path / LOCK_FILE
        if not lock.exists():
            return False
        with open(lock, "a+") as fh:
            try:
                fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                return True
            fcntl.flock(fh, fcntl.LOCK_UN)
        return False

    # ---- parts
    def remove_stale_tmp(self) -> list[Path]:
        """Delete temporary files left by an interrupted writer (call with the lock held)."""
        stale = [p for d in (self.path, self.parts_dir) if d.is_dir() for p in d.glob("*.tmp.*")]
        for p in stale:
            p.unlink(missing_ok=True)
        return stale

    def scan_parts(self, spec: EnsembleSpec) -> tuple[list[Part], list[str]]:
        """Load every part; move unreadable or foreign ones to ``damaged/``; delete leftovers of
        an interrupted consolidation.

        Returns the good parts (sorted by first index) and one report line per part moved aside.
        """
        good, reports = [], []
        for path, first, last, part, problem in scan(self.parts_dir, spec.lineage_digest(), spec.planets.count):
            if part is not None:
                good.append(part)
                continue
            self.damaged_dir.mkdir(exist_ok=True)
            os.replace(path, self.damaged_dir / f"{path.name}.{_dt.datetime.now():%Y%m%dT%H%M%S%f}")
            reports.append(
                f"part {path.name}: {problem}; moved to {DAMAGED}/, systems {first}-{last} will be recomputed"
            )
        try:
            kept, contained = drop_contained(good)
        except ValueError as exc:
            raise InputError(f"{self.parts_dir}: {exc}; remove one of them by hand") from None
        for part in contained:  # already held by a consolidated part
            part.path.unlink()
        return kept, reports

    def write_part(self, data: xr.Dataset, spec: EnsembleSpec) -> Part:
        """Write records (a schema dataset of consecutive systems) as one part file, atomically."""
        idx = data["system"].values
        first, last = int(idx[0]), int(idx[-1])
        if not np.array_equal(idx, np.arange(first, last + 1)):
            raise ValueError(f"a part must hold consecutive systems, got {idx.tolist()}")
        data = data.copy()
        data.attrs.update(spec_digest=spec.lineage_digest(), date_written=_utc_now())
        self.parts_dir.mkdir(parents=True, exist_ok=True)
        path = self.parts_dir / part_name(first, last)
        atomic_write_netcdf(data, path)
        return Part(path, first, last, data)

    def replace_systems(self, part: Part, new: xr.Dataset, spec: EnsembleSpec) -> Part:
        """Rewrite ``part`` with the systems in ``new`` replacing its rows (atomic)."""
        return self.write_part(stack([part.data.drop_sel(system=new["system"].values), new]), spec)

    def consolidate(self, parts: list[Part], spec: EnsembleSpec) -> Part:
        """Merge parts of adjacent ranges into one file, then delete them (a crash in between
        leaves pieces that :meth:`scan_parts` recognises as contained and deletes)."""
        merged = stack([p.data for p in parts])
        merged.attrs["consolidated"] = 1
        whole = self.write_part(merged, spec)
        for part in parts:
            if part.path != whole.path:
                part.path.unlink()
        return whole

    # ---- gathering
    def gather(
        self, parts: list[Part], spec: EnsembleSpec, systems: int | None = None, write: bool = True
    ) -> xr.Dataset:
        """Concatenate parts into the ensemble dataset of systems 0..systems-1.

        With ``write`` the result goes to ``DIR/ensemble.nc`` (zlib level 4); it must then hold
        every system exactly once.
        """
        n = spec.run.systems if systems is None else systems
        datasets = [p.data for p in sorted(parts, key=lambda p: p.first) if p.first < n]
        if not datasets:
            raise InputError(f"{self.path}: no finished systems yet")
        ds = stack(datasets)
        ds = ds.sel(system=ds["system"].values < n)
        if write and not np.array_equal(ds["system"].values, np.arange(n)):
            raise RuntimeError(f"{self.path}: parts do not hold systems 0..{n - 1} exactly once")
        ds.attrs = self.global_attrs(spec, n, ds.attrs.get("Conventions", "CF-1.10"))
        validate_dataset(ds)
        if write:
            encoding = {v: dict(ENSEMBLE_COMPRESSION) for v in ds.data_vars}
            atomic_write_netcdf(ds, self.ensemble_path, encoding=encoding)
        return ds

    def global_attrs(self, spec: EnsembleSpec, systems: int, conventions: str) -> dict:
        """Global attributes of ensemble.nc (CF / ACDD names where one exists)."""
        from scatter_pop.provenance import package_version

        now = _utc_now()
        return {
            "Conventions": conventions,
            "title": f"scatter_pop ensemble {spec.run.name!r}: outcomes of planet-planet scattering",
            "source": "scatter_pop (REBOUND N-body integrations)",
            "date_created": now,
            "history": f"{now} scatter_pop {package_version()}: run_ensemble of spec {spec.source!r} "
            f"(identity {spec.digest()[:16]}), {systems} systems gathered into {ENSEMBLE_FILE}",
            "run_name": spec.run.name,
            "run_seed": np.uint64(spec.run.seed),
            "systems": np.int64(systems),
            "integrator": spec.integration.integrator,
            "star_mass": float(spec.star.mass),  # M_sun
            "star_mass_units": MASS_UNITS,  # nominal solar masses (netCDF global attributes have no units of their own)
            "star_radius": float(spec.star.radius),  # au
            "star_radius_units": LENGTH_UNITS,
            "spec_digest": spec.digest(),
            "spec_toml": spec.text,
            "settlement_rule": SETTLEMENT_RULE,
            **versions(),
        }

    def ensemble_is_current(self, spec: EnsembleSpec) -> bool:
        """ensemble.nc exists, holds the spec's systems and is newer than every part."""
        if not self.ensemble_path.is_file():
            return False
        mtime = self.ensemble_path.stat().st_mtime
        if self.parts_dir.is_dir() and any(p.stat().st_mtime > mtime for p in self.parts_dir.glob("part_*.nc")):
            return False
        try:
            with xr.open_dataset(self.ensemble_path, engine="netcdf4") as ds:
                return (
                    int(ds.attrs.get("systems", -1)) == spec.run.systems
                    and ds.attrs.get("spec_digest") == spec.digest()
                )
        except (OSError, RuntimeError, ValueError, KeyError):
            return False


# --------------------------------------------------------------------------- preparing and opening
def _flat(d: dict, prefix: str = "") -> dict:
    return {
        k2: v2
        for k, v in d.items()
        for k2, v2 in (_flat(v, f"{prefix}{k}.") if isinstance(v, dict) else {f"{prefix}{k}": v}).items()
    }


def _identity_differences(old: EnsembleSpec, new: EnsembleSpec) -> list[str]:
    """``key old -> new`` for each identity entry that differs (internal units), the end time apart
    (see :func:`end_time_change`)."""
    a, b = _flat(old.lineage()), _flat(new.lineage())
    keys = sorted(k for k in a.keys() | b.keys() if a.get(k) != b.get(k))
    return [f"{'run.seed' if k == 'seed' else k} {a.get(k)!r} -> {b.get(k)!r}" for k in keys]


def end_time_change(old: EnsembleSpec, new: EnsembleSpec, where: str = "DIR") -> bool:
    """True when ``new`` raises the end time of ``old`` (the only change of it a run folder takes).

    Raises InputError when the end time is lowered or given by the other key (``end_time`` in yr
    against ``end_orbits`` in inner orbits): records integrated further cannot be cut back.
    """
    (k_old, v_old), (k_new, v_new) = old.end_setting(), new.end_setting()
    if k_old != k_new:
        raise InputError(
            f"integration.{k_new}: {where} holds a run ended by integration.{k_old} = {v_old!r}; keep that key "
            "(raise its value to carry the run further) or use another folder"
        )
    if v_new < v_old:
        raise InputError(
            f"integration.{k_new} = {v_new!r}: {where} holds systems integrated to {v_old!r}; the end time can "
            "only be raised in a run folder (use another folder for a shorter run)"
        )
    return v_new > v_old


def prepare_folder(spec: EnsembleSpec, out, *, fresh: bool = False, dry_run: bool = False, log=print) -> RunFolder:
    """Check that ``out`` can hold a run of ``spec``; with ``fresh`` move an old run aside.

    A raised end time (same key, larger value) is accepted: the folder's unsettled systems are
    then continued (:mod:`scatter_pop.ensemble.plan`); a lowered one is refused.  A folder holding a
    run of a spec with another lineage (:meth:`EnsembleSpec.lineage`: the identity without the end
    time) is refused with InputError unless ``fresh``; then (and whenever ``fresh`` finds an old run) the
    old folder is renamed to ``<out>.replaced-<UTC time>``, never deleted or mixed.  A non-empty
    folder that is not a run folder is always refused.  With ``dry_run`` nothing is changed.
    """
    folder = RunFolder(out)
    if folder.path.exists() and not folder.path.is_dir():
        raise InputError(f"out = {str(folder.path)!r}: exists and is not a folder", arguments=("out",))
    if not folder.path.is_dir() or not any(p.name != LOCK_FILE for p in folder.path.iterdir()):
        return folder
    if not folder.is_run_folder():
        raise InputError(
            f"out = {str(folder.path)!r}: a non-empty folder that is not a scatter-pop run "
            f"folder (no {SPEC_FILE}); choose another out",
            arguments=("out",),
        )
    try:
        old = folder.stored_spec("out")
    except InputError:
        if not fresh:
            raise InputError(
                f"out = {str(folder.path)!r}: its {SPEC_FILE} is not a valid spec; "
                "rerun with fresh=True to move the old folder aside",
                arguments=("out", "fresh"),
            ) from None
        old = None
    changed = _identity_differences(old, spec) if old is not None else ["(unreadable)"]
    if changed and not fresh:
        raise InputError(
            f"out = {str(folder.path)!r}: holds a run of a different spec (changed: "
            f"{'; '.join(changed[:3])}{'; ...' if len(changed) > 3 else ''}); only run.name, "
            "run.systems, run.batch_size, integration.wall_seconds_max, [cluster] and a raised "
            "integration.end_time / end_orbits may change in a run folder; rerun with fresh=True to move "
            "the old run aside, or choose another out",
            arguments=("out", "fresh"),
        )
    if old is not None and not fresh:
        end_time_change(old, spec, f"run folder {str(folder.path)!r}")
    if fresh:
        if folder.locked_by_other():
            raise InputError(
                f"fresh=True: {str(folder.path)!r} is in use by a running scatter-pop run", arguments=("fresh",)
            )
        aside = folder.path.with_name(f"{folder.path.name}.replaced-{_dt.datetime.now(_dt.UTC):%Y%m%dT%H%M%SZ}")
        if dry_run:
            log(f"fresh start: would move {folder.path} to {aside}")
        else:
            os.replace(folder.path, aside)
            log(f"fresh start: moved the old run folder to {aside}")
    return folder


def open_ensemble(path, *, partial: bool = False) -> xr.Dataset:
    """Open the ensemble of a run folder (or an ``ensemble.nc`` file) as an in-memory Dataset.

    Parameters
    ----------
    path : str or Path
        A run folder or a netCDF file written by :func:`scatter_pop.run_ensemble`.
    partial : bool
        For an unfinished run, return the systems finished so far (gathered from the parts,
        nothing written) instead of raising InputError.
    """
    p = Path(path)
    if p.is_file():
        ds = load(p)
        validate_dataset(ds)
        return ds
    folder = RunFolder(p)
    spec = folder.stored_spec()
    if folder.ensemble_is_current(spec):
        return load(folder.ensemble_path)
    parts, _ = read_parts(folder, spec)
    done = sum(int((part.indices < spec.run.systems).sum()) for part in parts)
    if not partial or not parts:
        raise InputError(
            f"{str(p)!r}: run incomplete ({done}/{spec.run.systems} systems); rerun "
            "`scatter-pop run` on its spec to finish it, or read what is finished with partial=True",
            arguments=("partial",),
        )
    return folder.gather(parts, spec, write=False)


def read_parts(folder: RunFolder, spec: EnsembleSpec) -> tuple[list[Part], list[str]]:
    """Parts that load and match ``spec``, without moving or deleting anything (read-only callers);
    and one line per part that does not."""
    good, bad = [], []
    for path, _, _, part, problem in scan(folder.parts_dir, spec.lineage_digest(), spec.planets.count):
        if part is None:
            bad.append(f"{path.name}: {problem}")
        else:
            good.append(part)
    try:
        kept, _ = drop_contained(good)
    except ValueError as exc:
        raise InputError(f"{folder.parts_dir}: {exc}") from None
    return kept, bad
