"""Crash-safe file writes: a file is either the complete new version or absent/the old one.

The pattern: write ``<name>.tmp.<pid>`` beside the target, fsync it, ``os.replace`` it onto the
target (atomic on POSIX), fsync the directory so the rename itself survives a crash.  A writer
killed half-way leaves only the temporary file, which the next run deletes.
"""

from __future__ import annotations

import os
from pathlib import Path

import xarray as xr

__all__ = ["atomic_write_netcdf", "atomic_write_text"]


def _fsync_dir(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _atomic(path: Path, write) -> None:
    tmp = path.with_name(f"{path.name}.tmp.{os.getpid()}")
    try:
        write(tmp)
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    _fsync_dir(path.parent)


def atomic_write_netcdf(ds: xr.Dataset, path: Path, encoding: dict | None = None) -> None:
    """Write ``ds`` (in memory) to ``path`` (netCDF4 engine) so that the file is whole or absent.

    Written with dask's synchronous scheduler: with a distributed Client active, xarray would
    otherwise take a *distributed* lock (a scheduler round trip) for every variable written,
    measured at 0.2 s a part file instead of 0.03 s.
    """
    import dask

    from scatter_pop.store.schema import netcdf_encoding

    fills = netcdf_encoding(ds)
    encoding = {name: {**fills.get(name, {}), **(encoding or {}).get(name, {})} for name in {*fills, *(encoding or {})}}

    def write(tmp):
        with dask.config.set(scheduler="synchronous"):
            ds.to_netcdf(tmp, engine="netcdf4", format="NETCDF4", encoding=encoding)

    _atomic(Path(path), write)


def atomic_write_text(text: str, path: Path) -> None:
    """Write ``text`` (UTF-8) to ``path`` so that the file is whole or absent."""
    _atomic(Path(path), lambda tmp: Path(tmp).write_text(text, encoding="utf-8"))
