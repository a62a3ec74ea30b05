"""The run folder: atomic parts, damaged-part detection, spec identity, gathering, the netCDF file.

No integration here: records are made from the spec's own initial conditions so that what is
checked is storage (round trips, CF attributes, refusals), not physics.  The physics of the
stored records is checked with real integrations in test_ensemble.py / test_resume.py.

Sources of the checks
---------------------
* CF Conventions 1.10 (Eaton et al. 2022), sections 2.6.1 (``Conventions``), 3.1 (``units``),
  3.2 (``long_name``) and 3.5 (flags: ``flag_values`` of the variable's type, ``flag_meanings``
  blank-separated words, one per value).
* ACDD 1.3 (Earth Science Information Partners 2015): ``date_created`` as ISO 8601.
* POSIX rename(2) atomicity: a reader sees the old file or the new one, never a mixture
  (common practice for crash-safe writes).
* ``ncdump -h`` from Unidata's netCDF-C (Debian package ``netcdf-bin``) as an independent reader.
"""

from __future__ import annotations

import datetime as dt
import math
import subprocess

import netCDF4
import numpy as np
import pytest
import xarray as xr
from ensemble_helpers import TINY_TEXT, ensure_program

from scatter_pop.engine.initial_conditions import draw_system
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, SystemRecord
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.run_folder import (
    RunFolder,
    atomic_write_netcdf,
    open_ensemble,
    prepare_folder,
    read_parts,
    versions,
)
from scatter_pop.store.schema import PHYSICS_VARIABLES, VARIABLES, records_to_dataset

SPEC = parse_spec(TINY_TEXT)


def record(index: int, reason=EndReason.END_TIME) -> SystemRecord:
    """A record whose initial state is the spec's own draw and whose finals are a copy of it."""
    ic = draw_system(SPEC, index)
    planets = tuple(
        PlanetRecord(
            m,
            a,
            e,
            i,
            r,
            m,
            a,
            e,
            i,
            a * (1 - e),
            r,
            fate=Fate.EJECTED if j == index % 2 else Fate.SURVIVED,
            t_fate=float(index) if j == index % 2 else math.nan,
        )
        for j, (m, a, e, i, r) in enumerate(zip(ic.mass, ic.a, ic.e, ic.inc, ic.radius))
    )
    return SystemRecord(index, ic.seed, planets, 10.0 * index, reason, steps=index, wall_seconds=0.5)


def part_data(first: int, last: int, **kw) -> xr.Dataset:
    return records_to_dataset([record(i, **kw) for i in range(first, last + 1)], SPEC.planets.count)


def folder_with_parts(tmp_path, ranges=((0, 2), (3, 3))) -> RunFolder:
    folder = prepare_folder(SPEC, tmp_path / "run")
    folder.path.mkdir(parents=True)
    folder.spec_path.write_text(SPEC.text)
    for a, b in ranges:
        folder.write_part(part_data(a, b), SPEC)
    return folder


def assert_physics_equal(a: xr.Dataset, b: xr.Dataset) -> None:
    for name in PHYSICS_VARIABLES:
        np.testing.assert_array_equal(a[name].values, b[name].values, err_msg=name)  # NaN == NaN here


# --------------------------------------------------------------------------- parts
def test_part_round_trip_is_bit_exact(tmp_path):
    folder = folder_with_parts(tmp_path, ranges=((0, 3),))
    parts, bad = read_parts(folder, SPEC)
    assert bad == [] and [p.path.name for p in parts] == ["part_00000000_00000003.nc"]
    assert_physics_equal(parts[0].data, part_data(0, 3))
    for v in VARIABLES:
        assert parts[0].data[v.name].dtype == np.dtype(v.dtype), v.name


def test_atomic_write_leaves_whole_file_or_nothing(tmp_path):
    target = tmp_path / "part.nc"
    bad = part_data(0, 1).assign(oops=("system", np.array([object(), object()])))  # not writable
    with pytest.raises((TypeError, ValueError)):
        atomic_write_netcdf(bad, target)
    assert not target.exists() and list(tmp_path.iterdir()) == []  # no tmp left either
    atomic_write_netcdf(part_data(0, 1), target)
    assert [p.name for p in tmp_path.iterdir()] == ["part.nc"]


def test_truncated_part_is_reported_moved_aside_and_its_systems_missing(tmp_path):
    folder = folder_with_parts(tmp_path)
    victim = folder.parts_dir / "part_00000000_00000002.nc"
    size = victim.stat().st_size
    with open(victim, "r+b") as fh:
        fh.truncate(size // 2)
    (folder.parts_dir / "part_00000004_00000004.nc.tmp.12345").write_bytes(b"half a file")
    assert [p.name for p in folder.remove_stale_tmp()] == ["part_00000004_00000004.nc.tmp.12345"]
    parts, reports = folder.scan_parts(SPEC)
    assert [p.first for p in parts] == [3]
    assert len(reports) == 1 and "part_00000000_00000002.nc" in reports[0] and "0-2" in reports[0]
    assert [p.name.split(".nc")[0] for p in folder.damaged_dir.iterdir()] == ["part_00000000_00000002"]


def test_part_of_another_spec_is_not_mixed_in(tmp_path):
    folder = folder_with_parts(tmp_path, ranges=((0, 0),))
    other = parse_spec(TINY_TEXT.replace("seed = 12345", "seed = 999"))
    parts, bad = read_parts(folder, other)
    assert parts == [] and "another spec" in bad[0]


# --------------------------------------------------------------------------- folder identity
def test_changed_spec_refused_naming_the_key_and_fresh_moves_the_old_run_aside(tmp_path):
    folder = folder_with_parts(tmp_path)
    before = sorted(p.name for p in folder.parts_dir.iterdir())
    changed = parse_spec(TINY_TEXT.replace('integrator = "ias15"', 'integrator = "ias15"\nepsilon = 1e-8'))
    with pytest.raises(InputError) as err:
        prepare_folder(changed, folder.path)
    assert "integration.epsilon" in str(err.value) and "fresh=True" in str(err.value)
    assert "\n" not in str(err.value)
    assert sorted(p.name for p in folder.parts_dir.iterdir()) == before
    # the end time: raised it is accepted (the run is carried further), lowered refused
    assert prepare_folder(parse_spec(TINY_TEXT.replace("end_time = 300.0", "end_time = 2000.0")), folder.path)
    with pytest.raises(InputError, match="can only be raised"):
        prepare_folder(parse_spec(TINY_TEXT.replace("end_time = 300.0", "end_time = 200.0")), folder.path)
    assert sorted(p.name for p in folder.parts_dir.iterdir()) == before
    log = []
    prepare_folder(changed, folder.path, fresh=True, log=log.append)
    assert not folder.path.exists()
    aside = [p for p in tmp_path.iterdir() if p.name.startswith("run.replaced-")]
    assert len(aside) == 1 and sorted(p.name for p in (aside[0] / "parts").iterdir()) == before
    assert str(aside[0]) in log[0]


def test_what_may_change_without_a_new_identity(tmp_path):
    """Run name, number of systems, batch size and the wall-clock cap change no system's result."""
    folder = folder_with_parts(tmp_path)
    grown = parse_spec(
        TINY_TEXT.replace("systems = 4", "systems = 40").replace('name = "tiny"', 'name = "x"')
        + "wall_seconds_max = 5.0\n"
    )
    assert prepare_folder(grown, folder.path).path == folder.path


def test_non_run_folder_refused(tmp_path):
    (tmp_path / "notes.txt").write_text("mine")
    with pytest.raises(InputError, match="not a scatter-pop run folder"):
        prepare_folder(SPEC, tmp_path, fresh=True)
    assert (tmp_path / "notes.txt").read_text() == "mine"


def test_second_run_on_the_same_folder_is_refused(tmp_path):
    folder = RunFolder(tmp_path / "run")
    with folder.lock():
        assert folder.locked_by_other()
        with pytest.raises(InputError, match="another scatter-pop run"):
            with RunFolder(folder.path).lock():
                pass
    assert not folder.locked_by_other()


# --------------------------------------------------------------------------- the gathered file
@pytest.fixture
def gathered(tmp_path):
    folder = folder_with_parts(tmp_path)
    parts, _ = folder.scan_parts(SPEC)
    folder.gather(parts, SPEC)
    return folder


def test_ensemble_opens_with_plain_xarray_with_cf_attributes(gathered):
    # the codes as stored, without xarray's CF masking
    raw = xr.open_dataset(gathered.ensemble_path, mask_and_scale=False)
    assert_physics_equal(raw, part_data(0, 3))
    raw.close()
    ds = xr.open_dataset(gathered.ensemble_path)  # default engine and decoding, no scatter_pop code
    # CF 2.5.1: the int8 fill -1 (here merged_into: did not merge) reads as missing
    assert np.isnan(ds["merged_into"].values).all() and ds["merged_into"].encoding["_FillValue"] == -1
    assert ds.attrs["Conventions"].startswith("CF-")  # CF 2.6.1
    for v in VARIABLES:
        attrs = ds[v.name].attrs
        assert attrs["long_name"] == v.long_name  # CF 3.2
        if v.flags is not None:  # CF 3.5; a flag variable carries no units
            assert "units" not in attrs
            codes = v.flags[0] if isinstance(v.flags, tuple) else [int(c) for c in v.flags]
            words = v.flags[1].split() if isinstance(v.flags, tuple) else [c.word for c in v.flags]
            assert attrs["flag_values"].tolist() == list(codes)
            assert attrs["flag_meanings"].split() == words
        else:
            assert attrs["units"] == v.units  # CF 3.1
    assert ds.attrs["spec_toml"] == SPEC.text and int(ds.attrs["run_seed"]) == SPEC.run.seed
    assert ds.attrs["star_mass"] == SPEC.star.mass and int(ds.attrs["systems"]) == 4
    for key, value in versions().items():
        assert ds.attrs[key] == value
    created = dt.datetime.fromisoformat(ds.attrs["date_created"])  # ACDD 1.3
    assert abs((dt.datetime.now(dt.UTC) - created).total_seconds()) < 600
    assert ds["fate"].encoding["zlib"] and ds["e_final"].encoding["zlib"]
    ds.close()


def test_ensemble_seen_by_netcdf_c_ncdump(gathered):
    ncdump = ensure_program("ncdump", "netcdf-bin")
    header = subprocess.run(
        [ncdump, "-h", str(gathered.ensemble_path)], capture_output=True, text=True, check=True
    ).stdout
    assert 'e_final:units = "1"' in header and 'a_final:units = "au"' in header
    assert 't_fate:units = "365.25 day"' in header and 'mass_initial:units = "1.988409871e+30 kg"' in header
    assert "fate:_FillValue = -1b" in header and ":history = " in header
    assert 'fate:flag_meanings = "survived ejected merged hit_star tidally_disrupted unbound_at_end"' in header
    assert "end_reason:flag_values = 0b, 1b, 2b, 3b, 4b, 5b" in header
    assert ":spec_toml = " in header and ":rebound_version = " in header


def test_ensemble_seen_by_the_netcdf4_library(gathered):
    with netCDF4.Dataset(gathered.ensemble_path) as nc:
        assert nc.variables["end_reason"].flag_meanings.split()[-2:] == ["stopped_by_wall_clock_cap", "failed"]
        assert nc.variables["q_final"].units == "au"
        assert nc.variables["e_final"].filters()["zlib"]


def test_open_ensemble_whole_partial_and_incomplete(gathered, tmp_path):
    assert_physics_equal(open_ensemble(gathered.path), part_data(0, 3))
    assert_physics_equal(open_ensemble(gathered.ensemble_path), part_data(0, 3))
    grown = parse_spec(TINY_TEXT.replace("systems = 4", "systems = 6"))
    gathered.spec_path.write_text(grown.text)
    with pytest.raises(InputError, match=r"incomplete \(4/6 systems\)"):
        open_ensemble(gathered.path)
    assert open_ensemble(gathered.path, partial=True).sizes["system"] == 4
    with pytest.raises(InputError, match="not a scatter-pop run folder"):
        open_ensemble(tmp_path / "nowhere")


def test_replacing_rows_keeps_the_other_systems(tmp_path):
    folder = folder_with_parts(tmp_path, ranges=((0, 3),))
    part = read_parts(folder, SPEC)[0][0]
    new = records_to_dataset([record(2, reason=EndReason.ONE_PLANET)], SPEC.planets.count)
    replaced = folder.replace_systems(part, new, SPEC)
    again = read_parts(folder, SPEC)[0][0].data
    assert again["end_reason"].values.tolist() == [0, 0, int(EndReason.ONE_PLANET), 0]
    assert_physics_equal(again.sel(system=[0, 1, 3]), part_data(0, 3).sel(system=[0, 1, 3]))
    assert replaced.path == part.path  # same file, rewritten atomically
    assert [p.name for p in folder.parts_dir.iterdir()] == [part.path.name]


def test_docs_document_every_variable_with_its_units():
    """docs/output-schema.md lists each schema variable with schema.py's units."""
    from pathlib import Path

    section = (Path(__file__).resolve().parents[2] / "docs" / "output-schema.md").read_text(encoding="utf-8")
    documented = {}
    for row in section.splitlines():
        cells = [c.strip() for c in row.strip().strip("|").split("|")]
        if len(cells) == 4 and cells[0].startswith("`"):
            for name in cells[0].replace("`", "").split(","):
                documented[name.strip()] = cells[2]
    expected = {v.name: v.units if v.flags is None else "(flags)" for v in VARIABLES}
    assert expected == {v.name: documented.get(v.name) for v in VARIABLES}


def test_consolidation_merges_parts_and_an_interrupted_one_is_tidied(tmp_path):
    folder = folder_with_parts(tmp_path, ranges=((0, 0), (1, 2), (3, 3)))
    parts, _ = read_parts(folder, SPEC)
    merged = folder.consolidate(parts, SPEC)
    assert [p.name for p in folder.parts_dir.iterdir()] == ["part_00000000_00000003.nc"]
    assert merged.consolidated and merged.data.attrs["consolidated"] == 1
    assert_physics_equal(read_parts(folder, SPEC)[0][0].data, part_data(0, 3))
    # a crash between writing the merged part and deleting its pieces leaves a piece behind:
    # readers ignore it, the next run deletes it
    folder.write_part(part_data(1, 2), SPEC)
    kept, bad = read_parts(folder, SPEC)
    assert [(p.first, p.last) for p in kept] == [(0, 3)] and bad == []
    assert len(list(folder.parts_dir.iterdir())) == 2
    kept, reports = folder.scan_parts(SPEC)
    assert [(p.first, p.last) for p in kept] == [(0, 3)] and reports == []
    assert [p.name for p in folder.parts_dir.iterdir()] == ["part_00000000_00000003.nc"]


def test_overlapping_parts_are_refused(tmp_path):
    folder = folder_with_parts(tmp_path, ranges=((0, 2), (2, 3)))
    with pytest.raises(InputError, match="overlaps"):
        folder.scan_parts(SPEC)
