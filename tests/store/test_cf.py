"""CF compliance of a produced ``ensemble.nc``: every ``units`` parsed by udunits-2 (cf-units) and meaning
what the code computes, and the flag and fill-value rules of the CF conventions.

Sources: CF Metadata Conventions 1.10 (Eaton et al. 2022): §1.3/2.6.1 ``Conventions``, §2.5.1 fill
values (``_FillValue`` of the variable's type; values equal to it are missing), §3.1 units (udunits-2
strings), §3.5 flags (``flag_values`` of the variable's type, unique, one blank-separated word of
``flag_meanings`` each, words of letters, digits, ``_ - . + @``).  Unit values: the Julian year of
365.25 d of 86 400 s (IAU; also udunits' ``Julian_year``), 1 au = 149 597 870 700 m (IAU 2012
Resolution B2), the nominal solar mass from astropy's IAU 2015 constants (Prsa et al. 2016, AJ 152, 41).
"""

from __future__ import annotations

import re
import subprocess
from dataclasses import replace
from importlib.metadata import version
from pathlib import Path

import cf_units
import netCDF4
import numpy as np
import pytest
from records import planet, system

from scatter_pop.engine.outcome import EndReason, Fate
from scatter_pop.spec.reader import load_spec, parse_spec
from scatter_pop.store.run_folder import RunFolder
from scatter_pop.store.schema import records_to_dataset

ROOT = Path(__file__).resolve().parents[2]
TINY = ROOT / "tests" / "data" / "tiny.toml"
WORD = re.compile(r"^[A-Za-z0-9_\-.+@]+$")  # CF 1.10 §3.5


def _handmade_file(tmp_path) -> Path:
    """A gathered ensemble.nc holding a failed system, a merger and an ejection (real gather path)."""
    spec = parse_spec(TINY.read_text(encoding="utf-8"), str(TINY))
    records = [
        system(0, [planet(1.0, 2.0, 0.3, tidal=True), planet(1.0, 5.0, 0.6, fate=Fate.EJECTED)]),
        system(1, [planet(2.0, 3.0, 0.1), replace(planet(1.0, 3.0, 0.1, fate=Fate.MERGED), merged_into=0)]),
        system(2, [planet(1.0, 2.0, 0.5), planet(1.0, 3.0, 0.5)], reason=EndReason.FAILED),
        system(3, [planet(1.0, 2.0, 0.2), planet(1.0, 9.0, 0.4)], reason=EndReason.END_TIME),
    ]
    folder = RunFolder(tmp_path / "handmade")
    folder.path.mkdir()
    folder.spec_path.write_text(spec.text, encoding="utf-8")
    part = folder.write_part(records_to_dataset(records, spec.planets.count), spec)
    folder.gather([part], spec)
    return folder.ensemble_path


@pytest.fixture(scope="module")
def produced(tmp_path_factory):
    """Two files: a real run of tests/data/tiny.toml and a hand-made one with a failed system."""
    from scatter_pop.ensemble.driver import run_ensemble

    base = tmp_path_factory.mktemp("cf")
    run_ensemble(load_spec(TINY), out=base / "tiny", workers=1, log=lambda *_: None)
    return [base / "tiny" / "ensemble.nc", _handmade_file(base)]


def _unit(text: str) -> cf_units.Unit:
    unit = cf_units.Unit(text)  # raises ValueError for a string udunits-2 cannot parse
    assert not unit.is_unknown() and not unit.is_no_unit(), text
    return unit


def test_every_units_attribute_parses_and_means_what_the_code_computes(produced):
    from astropy import constants

    for path in produced:
        with netCDF4.Dataset(path) as nc:
            assert nc.Conventions == "CF-1.10"  # CF 2.6.1
            for name, var in nc.variables.items():
                if "flag_values" in var.ncattrs():
                    continue  # CF 3.5: a flag variable is dimensionless codes (checked below)
                assert "units" in var.ncattrs(), name  # CF 3.1
                unit = _unit(var.units)
                if name.startswith("t_"):
                    # the Julian year, 365.25 d x 86 400 s (IAU); udunits' "yr" would be the tropical year
                    assert unit.convert(1.0, "s") == 365.25 * 86400.0, (name, var.units)
                elif var.units == "au":
                    assert unit.convert(1.0, "m") == 149_597_870_700.0  # IAU 2012 B2
                elif name.startswith("mass_"):
                    assert unit.convert(1.0, "kg") == pytest.approx(constants.M_sun.value, rel=1e-9)
                    assert "IAU 2015" in var.comment
                elif var.units == "s":
                    assert unit.convert(1.0, "s") == 1.0
                else:
                    assert unit.is_dimensionless() or var.units == "rad", (name, var.units)
            # numeric global attributes with a dimension carry their units beside them
            for key in nc.ncattrs():
                value = nc.getncattr(key)
                if isinstance(value, np.floating | float):
                    _unit(nc.getncattr(f"{key}_units"))
            assert _unit(nc.star_mass_units).convert(nc.star_mass, "kg") == pytest.approx(
                constants.M_sun.value, rel=1e-9
            )


def test_flags_and_fill_values_follow_cf(produced):
    seen_failed = False
    for path in produced:
        with netCDF4.Dataset(path) as nc:
            nc.set_auto_mask(False)
            for name, var in nc.variables.items():
                fill = var.getncattr("_FillValue") if "_FillValue" in var.ncattrs() else None
                if fill is not None:  # CF 2.5.1: of the variable's own type
                    assert np.asarray(fill).dtype == var.dtype, name
                if var.dtype == np.int8 and name not in nc.dimensions:
                    assert fill is not None, f"{name}: int8 without _FillValue"
                if "flag_values" not in var.ncattrs():
                    continue
                values = np.asarray(var.flag_values)
                words = var.flag_meanings.split(" ")
                assert values.dtype == var.dtype, name  # CF 3.5
                assert len(set(values.tolist())) == values.size == len(words), name
                assert all(WORD.fullmatch(w) for w in words), words
                data = np.asarray(var[:])
                stray = (
                    set(np.unique(data).tolist()) - set(values.tolist()) - ({int(fill)} if fill is not None else set())
                )
                assert not stray, f"{name}: values {sorted(stray)} are neither flags nor the fill value"
            reason = np.asarray(nc["end_reason"][:])
            failed = reason == int(EndReason.FAILED)
            if failed.any():  # a failed system's fates are missing (the fill), not a flag
                seen_failed = True
                assert (np.asarray(nc["fate"][:])[failed] == nc["fate"]._FillValue).all()
                assert (np.asarray(nc["n_survivors"][:])[failed] == nc["n_survivors"]._FillValue).all()
    assert seen_failed


def test_history_and_provenance(produced):
    commit = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "HEAD"], capture_output=True, text=True)
    for path in produced:
        with netCDF4.Dataset(path) as nc:
            assert nc.history.split(" ")[0].endswith("+00:00") and "run_ensemble" in nc.history
            assert nc.scatter_pop_version == version("scatter_pop")  # from the package metadata
            if commit.returncode == 0:  # run from a checkout: the commit is recorded
                assert nc.scatter_pop_commit.split("-")[0] == commit.stdout.strip()
