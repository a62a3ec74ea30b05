"""Part files: the records of consecutive systems in one netCDF file; reading, checking, stacking.

A part ``part_<first>_<last>.nc`` holds systems ``first..last`` (inclusive) in the schema of
:mod:`scatter_pop.store.schema`, plus the global attributes ``spec_digest`` (the lineage digest of the spec it belongs to: the identity
without the end time, :meth:`EnsembleSpec.lineage_digest`)
and, for a part made by merging smaller ones, ``consolidated = 1``.  Parts are written by
:class:`scatter_pop.store.run_folder.RunFolder`; this module only reads and combines them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from scatter_pop.store.schema import validate_dataset

__all__ = ["Part", "part_name", "PART_RE", "load", "scan", "stack", "drop_contained"]

PART_RE = re.compile(r"^part_(\d+)_(\d+)\.nc$")


def part_name(first: int, last: int) -> str:
    """File name of the part holding systems ``first``..``last`` (inclusive)."""
    return f"part_{first:08d}_{last:08d}.nc"


@dataclass
class Part:
    """One part file and its records, loaded."""

    path: Path
    first: int
    last: int
    data: xr.Dataset

    @property
    def indices(self) -> np.ndarray:
        return self.data["system"].values

    @property
    def consolidated(self) -> bool:
        return bool(self.data.attrs.get("consolidated", 0))


def load(path) -> xr.Dataset:
    """A netCDF file read completely into memory (netCDF4 engine), the file closed."""
    # codes as stored: int8 variables keep their dtype (their _FillValue -1 is a value the schema
    # defines), instead of being turned into floats with NaN by xarray's CF masking
    with xr.open_dataset(path, engine="netcdf4", mask_and_scale=False) as ds:
        ds = ds.load()
    for var in ds.variables.values():
        var.attrs.pop("_FillValue", None)
        var.encoding.pop("_FillValue", None)
    return ds


def _problem(data: xr.Dataset, first: int, last: int, digest: str, n_planets: int) -> str | None:
    try:
        validate_dataset(data)
    except ValueError as exc:
        return f"not a part file ({exc})"
    if data.attrs.get("spec_digest") != digest:
        return "written for another spec"
    if not np.array_equal(data["system"].values, np.arange(first, last + 1)):
        return f"holds systems other than {first}-{last}"
    if data.sizes.get("planet") != n_planets:
        return f"has {data.sizes.get('planet')} planets per system, the spec {n_planets}"
    return None


def scan(parts_dir: Path, digest: str, n_planets: int):
    """Yield ``(path, first, last, Part or None, problem or None)`` for each part file.

    Parameters
    ----------
    parts_dir : Path
        The run folder's ``parts`` folder (may be missing).
    digest : str
        Lineage of the spec the parts must belong to (:meth:`EnsembleSpec.lineage_digest`).
    n_planets : int
        Planets per system in that spec.
    """
    if not parts_dir.is_dir():
        return
    for path in sorted(parts_dir.iterdir()):
        m = PART_RE.match(path.name)
        if not m:
            continue
        first, last = int(m.group(1)), int(m.group(2))
        try:
            data = load(path)
        except (OSError, RuntimeError, ValueError, KeyError) as exc:
            first_line = (str(exc).splitlines() or [""])[0]
            yield path, first, last, None, f"unreadable ({type(exc).__name__}: {first_line})"
            continue
        problem = _problem(data, first, last, digest, n_planets)
        yield path, first, last, (Part(path, first, last, data) if problem is None else None), problem


def drop_contained(parts: list[Part]) -> tuple[list[Part], list[Part]]:
    """Split parts into those to keep and those whose systems a larger part already holds.

    A contained part is the leftover of a consolidation interrupted between writing the merged
    part and deleting its pieces.  Parts that overlap without containment raise ValueError.
    """
    kept, contained = [], []
    for part in sorted(parts, key=lambda p: (p.first, -p.last)):
        if kept and part.first <= kept[-1].last:
            if part.last <= kept[-1].last:
                contained.append(part)
                continue
            raise ValueError(f"{part.path.name} overlaps {kept[-1].path.name}")
        kept.append(part)
    return kept, contained


def stack(datasets: list[xr.Dataset]) -> xr.Dataset:
    """Concatenate schema datasets along ``system``, sorted by system index.

    Plain NumPy concatenation of each variable (much faster than ``xr.concat`` for thousands of
    small parts); variable attributes and the global attributes of the first dataset are kept.
    """
    first = datasets[0]
    system = np.concatenate([d["system"].values for d in datasets])
    order = np.argsort(system, kind="stable")
    data_vars = {
        name: (var.dims, np.concatenate([d[name].values for d in datasets])[order], dict(var.attrs))
        for name, var in first.data_vars.items()
    }
    coords = {
        "system": ("system", system[order], dict(first["system"].attrs)),
        "planet": ("planet", first["planet"].values, dict(first["planet"].attrs)),
    }
    return xr.Dataset(data_vars, coords=coords, attrs=dict(first.attrs))
