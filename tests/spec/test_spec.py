"""The ensemble spec: parsing, unit conversion and the one-line errors.

Unit conversions are checked against the IAU 2015 nominal values (Resolution B3)
through astropy.constants, a reference library independent of our constants.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from scatter_pop.cli.main import main
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import Distribution, load_spec, parse_spec

DATA = Path(__file__).resolve().parents[1] / "data"

GOOD = """
[run]
name = "t"
seed = 7
systems = 10

[star]
mass = 1.2
radius = 1.1

[planets]
count = 3
mass = {distribution = "log-uniform", low = 0.5, high = 5.0}
a_inner = 4.0
spacing = {distribution = "uniform", low = 3.0, high = 5.0}
e_sigma = 0.02
inc_sigma = 1.0
density = 1.33

[integration]
integrator = "ias15"
end_orbits = 1e4

[outcomes]
disruption_eta = 2.7
circularisation_q = 0.05
"""


def edit(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


def test_good_spec_converts_units_once():
    from astropy import constants as ac
    from astropy import units as u

    spec = parse_spec(GOOD)
    # IAU 2015 B3 nominal values via astropy (reference library)
    mj_msun = (ac.GM_jup / ac.GM_sun).decompose().value
    assert spec.planets.masses[0].low == pytest.approx(0.5 * mj_msun, rel=1e-12)
    assert spec.planets.masses[2].high == pytest.approx(5.0 * mj_msun, rel=1e-12)
    assert spec.star.radius == pytest.approx((1.1 * ac.R_sun).to_value(u.au), rel=1e-12)
    assert spec.planets.inc_sigma == pytest.approx(math.radians(1.0))
    # 1.33 g/cm^3 in M_sun/AU^3 (G M_sun from IAU 2015, G from CODATA 2018 via astropy)
    rho = (1.33 * u.g / u.cm**3 * ac.G / ac.GM_sun).to_value(u.au**-3)
    assert spec.planets.density == pytest.approx(rho, rel=1e-9)
    assert spec.integration.end_time is None and spec.integration.end_orbits == 1e4
    assert spec.integration.end_time_years(2.0) == 2e4


def test_tiny_spec_loads_and_check_command_prints_it(capsys):
    assert main(["check", str(DATA / "tiny.toml")]) == 0
    out = capsys.readouterr().out
    assert "valid" in out and "4 systems" in out


def test_digest_ignores_what_does_not_change_a_system():
    a = parse_spec(GOOD)
    b = parse_spec(edit(edit(GOOD, "systems = 10", "systems = 500"), 'name = "t"', 'name = "other"'))
    c = parse_spec(edit(GOOD, "seed = 7", "seed = 8"))
    d = parse_spec(edit(GOOD, "e_sigma = 0.02", "e_sigma = 0.03"))
    assert a.digest() == b.digest()
    assert a.digest() != c.digest() and a.digest() != d.digest()


@pytest.mark.parametrize(
    "kind,extra",
    [("uniform", ""), ("log-uniform", ""), ("power-law", ", index = -1.3"), ("power-law", ", index = -1.0")],
)
def test_distributions_match_their_laws(kind, extra):
    """Draws follow the stated law: KS against scipy.stats (reference library)."""
    from scipy import stats

    spec = parse_spec(
        edit(
            GOOD,
            'mass = {distribution = "log-uniform", low = 0.5, high = 5.0}',
            f'mass = {{distribution = "{kind}", low = 0.5, high = 5.0{extra}}}',
        )
    )
    d = spec.planets.masses[0]
    rng = np.random.default_rng(1)
    x = np.array([d.draw(rng) for _ in range(4000)])
    assert x.min() >= d.low and x.max() <= d.high
    if kind == "uniform":
        ref = stats.uniform(d.low, d.high - d.low)
    elif kind == "log-uniform" or extra == ", index = -1.0":
        ref = stats.loguniform(d.low, d.high)
    else:  # dN/dm ~ m^-1.3 truncated: CDF (m^g - lo^g)/(hi^g - lo^g), g = -0.3
        g = -0.3
        ref = type("P", (), {"cdf": staticmethod(lambda m: (m**g - d.low**g) / (d.high**g - d.low**g))})
    assert stats.kstest(x, ref.cdf).pvalue > 0.01


def test_fixed_distribution_is_a_number():
    assert Distribution("fixed", 2.0, 2.0).draw(np.random.default_rng(0)) == 2.0


# At least 20 malformed specs, each answered by one line naming the key, exit status 2.
BAD = [
    ("unknown key", ("e_sigma = 0.02", "e_sigma = 0.02\necc = 0.1"), "planets.ecc"),
    ("unknown section", ("[outcomes]", "[output]"), "[output]"),
    ("mass <= 0", ('mass = {distribution = "log-uniform", low = 0.5, high = 5.0}', "mass = -1.0"), "planets.mass"),
    ("mass low 0", ("low = 0.5, high = 5.0}", "low = 0.0, high = 5.0}"), "planets.mass.low"),
    ("high < low", ("low = 0.5, high = 5.0}", "low = 5.0, high = 0.5}"), "planets.mass.high"),
    ("unknown distribution", ('"log-uniform"', '"gaussian"'), "planets.mass.distribution"),
    ("power law without index", ('"log-uniform"', '"power-law"'), "planets.mass.index"),
    ("count < 2", ("count = 3", "count = 1"), "planets.count"),
    ("count not integer", ("count = 3", "count = 2.5"), "planets.count"),
    ("count string", ("count = 3", 'count = "three"'), "planets.count"),
    (
        "spacing <= 0",
        ('spacing = {distribution = "uniform", low = 3.0, high = 5.0}', "spacing = 0.0"),
        "planets.spacing",
    ),
    (
        "spacing log-uniform",
        ('spacing = {distribution = "uniform"', 'spacing = {distribution = "log-uniform"'),
        "planets.spacing.distribution",
    ),
    ("e_sigma >= 1", ("e_sigma = 0.02", "e_sigma = 1.0"), "planets.e_sigma"),
    ("e_sigma < 0", ("e_sigma = 0.02", "e_sigma = -0.1"), "planets.e_sigma"),
    ("inc_sigma < 0", ("inc_sigma = 1.0", "inc_sigma = -1.0"), "planets.inc_sigma"),
    ("end time <= 0", ("end_orbits = 1e4", "end_orbits = 0.0"), "integration.end_orbits"),
    ("end time and orbits", ("end_orbits = 1e4", "end_orbits = 1e4\nend_time = 1e5"), "integration.end_time"),
    ("no end time", ("end_orbits = 1e4", ""), "integration.end_time"),
    ("bad integrator", ('integrator = "ias15"', 'integrator = "rk4"'), "integration.integrator"),
    ("star mass <= 0", ("mass = 1.2", "mass = 0.0"), "star.mass"),
    ("seed negative", ("seed = 7", "seed = -1"), "run.seed"),
    ("seed float", ("seed = 7", "seed = 7.5"), "run.seed"),
    ("systems 0", ("systems = 10", "systems = 0"), "run.systems"),
    ("missing seed", ("seed = 7\n", ""), "run.seed"),
    ("density and radius", ("density = 1.33", "density = 1.33\nradius = 1.0"), "planets.density"),
    ("eta <= 0", ("disruption_eta = 2.7", "disruption_eta = 0.0"), "outcomes.disruption_eta"),
    ("negative q threshold", ("circularisation_q = 0.05", "circularisation_q = -0.05"), "outcomes.circularisation_q"),
    (
        "a list wrong length",
        ('a_inner = 4.0\nspacing = {distribution = "uniform", low = 3.0, high = 5.0}', "a = [4.0, 6.0]"),
        "planets.a",
    ),
    (
        "a list not increasing",
        ('a_inner = 4.0\nspacing = {distribution = "uniform", low = 3.0, high = 5.0}', "a = [4.0, 6.0, 5.0]"),
        "planets.a",
    ),
    (
        "masses list wrong length",
        ('mass = {distribution = "log-uniform", low = 0.5, high = 5.0}', "masses = [1.0, 2.0]"),
        "planets.masses",
    ),
    ("bool as number", ("e_sigma = 0.02", "e_sigma = true"), "planets.e_sigma"),
    (
        "stop flag not bool",
        ('integrator = "ias15"', 'integrator = "ias15"\nstop_when_settled = 1'),
        "integration.stop_when_settled",
    ),
    ("not toml", ("[run]", "[run"), "not valid TOML"),
    ("missing section", ("[star]\nmass = 1.2\nradius = 1.1\n", ""), "[star]"),
]


@pytest.mark.parametrize("label,change,key", BAD, ids=[b[0] for b in BAD])
def test_malformed_spec_one_line_exit_2(tmp_path, capsys, label, change, key):
    path = tmp_path / "bad.toml"
    path.write_text(edit(GOOD, *change))
    with pytest.raises(InputError):
        load_spec(path)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1, err  # exactly one line
    assert key in err, err  # names the key
    assert "Traceback" not in err


def test_missing_file_is_one_line(tmp_path, capsys):
    assert main(["check", str(tmp_path / "none.toml")]) == 2
    err = capsys.readouterr().err
    assert "does not exist" in err and err.count("\n") == 1


def test_console_script_exit_status_and_no_traceback(tmp_path):
    """The installed command behaves the same as main() (real process)."""
    path = tmp_path / "bad.toml"
    path.write_text(edit(GOOD, "count = 3", "count = 11"))
    proc = subprocess.run([sys.executable, "-m", "scatter_pop", "check", str(path)], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0 and "planets.count = 11" in proc.stderr
    assert "from 2 to 10" in proc.stderr


def test_docs_spec_page_lists_every_key():
    """docs/spec.md is the reference of the spec: every key the reader takes has a row there, and every
    row names a key the reader takes (common practice: reference docs generated from, or checked
    against, the code)."""
    from scatter_pop.spec.reader import KEYS

    page = (Path(__file__).resolve().parents[2] / "docs" / "spec.md").read_text(encoding="utf-8")
    rows = set(re.findall(r"^\| `(\w+)\.(\w+)` \|", page, flags=re.M))
    taken = {(section, key) for section, keys in KEYS.items() for key in keys}
    assert taken - rows == set(), "keys missing from docs/spec.md"
    assert rows - taken == set(), "docs/spec.md rows that the reader does not take"


def test_unknown_key_names_the_closest_allowed_key():
    text = (DATA / "tiny.toml").read_text().replace("[star]\n", "[star]\nradious = 2.0\n")
    with pytest.raises(
        InputError,
        match=r"^star\.radious = 2\.0: unknown key \(did you mean 'radius'\?\); allowed keys in \[star\]: mass, radius$",
    ):
        parse_spec(text)
