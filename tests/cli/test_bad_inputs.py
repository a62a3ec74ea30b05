"""Every bad input a user can give is answered by one line naming what is wrong, exit status 2.

Table-driven: malformed specs (each through both ``check`` and ``run``: ``check`` refuses what ``run``
refuses), catalogues, target files and flags.  Each case asserts exit 2, exactly one line on stderr
that names the key, column or flag, no traceback, nothing on stdout, an existing run folder
byte-identical afterwards and no new folder made.  The rule itself is the project's convention
(DEVELOPERS.md, "User errors"); no published source applies (common practice of command-line tools:
exit status 2 for usage errors, as argparse and the POSIX utilities do).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from records import planet, system

from scatter_pop import cli
from scatter_pop.engine.outcome import Fate
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.run_folder import RunFolder
from scatter_pop.store.schema import records_to_dataset

ROOT = Path(__file__).resolve().parents[2]
TINY = (ROOT / "tests" / "data" / "tiny.toml").read_text(encoding="utf-8")
CATALOGUE = ROOT / "tests" / "data" / "observed_rv_giants.csv"
TARGET = """[target]
name = "invented b"
e = 0.5
e_err = 0.05
a = 3.0
a_err = 1.0
msini = 1.0
msini_err = 0.3
"""
GOOD_CSV = "id,e,a_au\n1,0.2,1.0\n2,0.3,2.0\n3,0.5,3.0\n"
FAST = ["--permutations", "20", "--error-draws", "0", "--bootstrap", "0", "--references", "none"]


def _records(n):
    return [system(i, [planet(1.0, 2.0 + 0.1 * i, 0.3), planet(1.0, -5.0, 1.2, fate=Fate.EJECTED)]) for i in range(n)]


def _run_folder(path: Path, spec_text: str, finished: bool) -> Path:
    spec = parse_spec(spec_text, "tiny.toml")
    folder = RunFolder(path)
    folder.path.mkdir(parents=True)
    folder.spec_path.write_text(spec.text, encoding="utf-8")
    part = folder.write_part(records_to_dataset(_records(4), spec.planets.count), spec)
    if finished:
        folder.gather([part], spec)
    return folder.path


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    base = tmp_path_factory.mktemp("bad")
    run = _run_folder(base / "run", TINY, finished=True)
    stopped = _run_folder(base / "stopped", TINY.replace("systems = 4", "systems = 6"), finished=False)
    (base / "afile.txt").write_text("not a folder\n")
    (base / "afolder").mkdir()
    (base / "good_target.toml").write_text(TARGET)
    (base / "good.csv").write_text(GOOD_CSV)
    return {"base": base, "run": run, "stopped": stopped}


def _snapshot(folder: Path) -> dict:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def _case(world, tmp_path, capsys, argv, files, word):
    for name, content in files.items():
        path = tmp_path / name
        path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    places = {
        "run": str(world["run"]),
        "stopped": str(world["stopped"]),
        "base": str(world["base"]),
        "tmp": str(tmp_path),
        "new": str(tmp_path / "new_out"),
        "cat": str(CATALOGUE),
    }
    argv = [a.format(**places) for a in argv]
    runs_before = {k: _snapshot(world[k]) for k in ("run", "stopped")}
    capsys.readouterr()
    code = cli.main(argv)
    out, err = capsys.readouterr()
    lines = err.strip().splitlines()
    assert code == 2, (argv, err)
    assert len(lines) == 1 and lines[0].startswith("scatter-pop"), err
    assert word in lines[0], (word, lines[0])
    assert "Traceback" not in err and out == ""
    assert {k: _snapshot(world[k]) for k in ("run", "stopped")} == runs_before  # byte-identical
    assert not (tmp_path / "new_out").exists()  # no folder made


def _spec(old, new):
    assert old in TINY, old
    return TINY.replace(old, new)


# ------------------------------------------------------------------ specs: (spec text, word in the message)
SPECS = [
    # the cases the issue lists
    ("spacing too wide", _spec("spacing = 2.5", "spacing = 40.0"), "planets.spacing"),
    (
        "beyond the ejection distance",
        _spec("spacing = 2.5", "spacing = 20.0") + "ejection_distance = 30.0\n",
        "integration.ejection_distance",
    ),
    ("star larger than the orbit", _spec("radius = 1.0", "radius = 1000.0"), "star.radius"),
    ("huge systems", _spec("systems = 4", "systems = 1e400"), "run.systems"),
    ("huge end_time", _spec("end_time = 1000.0", "end_time = 1e300"), "integration.end_time"),
    ("huge star mass", _spec("mass = 1.0\nradius", "mass = 1e400\nradius"), "star.mass"),
    ("huge seed", _spec("seed = 12345", "seed = 123456789012345678901234567890"), "run.seed"),
    # others
    ("unknown section", TINY + "\n[stars]\nmass = 1.0\n", "[stars]"),
    ("unknown key", _spec("systems = 4", "systems = 4\nsytems = 5"), "sytems"),
    ("missing seed", _spec("seed = 12345\n", ""), "run.seed"),
    ("negative seed", _spec("seed = 12345", "seed = -1"), "run.seed"),
    ("no systems", _spec("systems = 4", "systems = 0"), "run.systems"),
    ("string systems", _spec("systems = 4", 'systems = "four"'), "run.systems"),
    ("zero star mass", _spec("mass = 1.0\nradius", "mass = 0.0\nradius"), "star.mass"),
    ("one planet", _spec("count = 2", "count = 1"), "planets.count"),
    ("mass and masses", _spec("mass = 1.0\na_inner", "mass = 1.0\nmasses = [1.0, 1.0]\na_inner"), "planets.mass"),
    ("e_sigma 1.5", _spec("e_sigma = 0.01", "e_sigma = 1.5"), "planets.e_sigma"),
    ("inc_sigma 100", _spec("inc_sigma = 0.5", "inc_sigma = 100.0"), "planets.inc_sigma"),
    (
        "log-uniform spacing",
        _spec("spacing = 2.5", 'spacing = {distribution = "log-uniform", low = 2, high = 3}'),
        "planets.spacing.distribution",
    ),
    ("decreasing a", _spec("a_inner = 3.0\nspacing = 2.5", "a = [5.0, 3.0]"), "planets.a"),
    ("unknown integrator", _spec('integrator = "ias15"', 'integrator = "rk4"'), "integration.integrator"),
    (
        "end_time and end_orbits",
        _spec("end_time = 1000.0", "end_time = 1000.0\nend_orbits = 100.0"),
        "integration.end_time",
    ),
    ("negative end_time", _spec("end_time = 1000.0", "end_time = -5.0"), "integration.end_time"),
    ("not TOML", TINY.replace("[star]", "[star"), "not valid TOML"),
    ("unknown cluster kind", TINY + '\n[cluster]\nkind = "condor"\n', "cluster.kind"),
    (
        "walltime the run would refuse",
        _spec("end_time = 1000.0", "end_time = 1000.0\nwall_seconds_max = 3600.0")
        + '\n[cluster]\nkind = "slurm"\nwalltime = "00:10:00"\n',
        "cluster.walltime",
    ),
]
SPEC_CASES = [
    pytest.param(["check", "{tmp}/s.toml"], {"s.toml": text}, word, id=f"check: {name}") for name, text, word in SPECS
] + [
    pytest.param(["run", "{tmp}/s.toml", "--out", "{new}"], {"s.toml": text}, word, id=f"run: {name}")
    for name, text, word in SPECS
]
SPEC_FILE_CASES = [
    pytest.param(
        ["check", "{tmp}/s.toml"], {"s.toml": ("# caf\xe9\n" + TINY).encode("latin-1")}, "not UTF-8", id="latin-1 spec"
    ),
    pytest.param(["check", "{tmp}/none.toml"], {}, "does not exist", id="missing spec"),
    pytest.param(["check", "{base}/afolder"], {}, "is a folder", id="spec is a folder"),
    # a run folder of another spec is refused, the folder untouched (--fresh offered)
    pytest.param(
        ["run", "{tmp}/s.toml", "--out", "{run}"],
        {"s.toml": _spec("seed = 12345", "seed = 7")},
        "--fresh",
        id="other spec in --out",
    ),
]

# ------------------------------------------------------------------ catalogues (compare DIR --observed CAT)
CATALOGUES = [
    ("two e columns", "id,e,e\n1,0.2,0.3\n2,0.4,0.5\n", "'e' appears twice"),
    ("unbalanced quote", 'id,e\n1,0.2\n"2,0.3\n3,0.4\n4,0.5\n', "line 3"),
    ("quote spanning lines", 'id,e\n1,0.2\n"2,0.3\n3,0.4"\n4,0.5\n', "line 3"),
    ("no e column", "id,ecc\n1,0.2\n", "'e'"),
    ("e above 1", "id,e\n1,1.2\n", "'e'"),
    ("e not a number", "id,e\n1,high\n", "'e'"),
    ("e infinite", "id,e\n1,1e400\n", "'e'"),
    ("more cells than columns", "id,e\n1,0.2,7\n", "cells"),
    ("empty file", "", "empty"),
    ("latin-1", "id,e,star\n1,0.2,caf\xe9\n".encode("latin-1"), "not UTF-8"),
]
CATALOGUE_CASES = [
    pytest.param(["compare", "{run}", "--observed", "{tmp}/c.csv", *FAST], {"c.csv": text}, word, id=name)
    for name, text, word in CATALOGUES
] + [
    pytest.param(["compare", "{run}", "--observed", "{tmp}/none.csv"], {}, "does not exist", id="missing catalogue"),
    pytest.param(["compare", "{run}", "--observed", "{base}/afolder"], {}, "is a folder", id="catalogue is a folder"),
]

# ------------------------------------------------------------------ target files (judge DIR --target FILE)
TARGETS = [
    ("e 1.2", TARGET.replace("e = 0.5", "e = 1.2"), "target.e = 1.2"),
    ("e huge", TARGET.replace("e = 0.5", "e = 1e400"), "target.e"),
    ("missing msini", TARGET.replace("msini = 1.0\n", ""), "target.msini"),
    ("unknown key", TARGET + "ecc = 0.3\n", "target.ecc"),
    ("unknown section", TARGET + "[planet]\ne = 0.3\n", "[planet"),
    ("not TOML", TARGET.replace("[target]", "[target"), "not valid TOML"),
    ("a_err 0", TARGET.replace("a_err = 1.0", "a_err = 0.0"), "target.a_err"),
    ("star mass 0", TARGET + "star_mass = 0.0\n", "target.star_mass"),
    ("true_mass yes", TARGET + 'true_mass = "yes"\n', "target.true_mass"),
    ("window factor 1", TARGET + "[windows]\na_factor = 1.0\n", "windows.a_factor"),
    ("survey k_min < 0", TARGET + "[survey]\nk_min = -1.0\nbaseline = 10.0\n", "survey.k_min"),
    ("latin-1", ("# caf\xe9\n" + TARGET).encode("latin-1"), "not UTF-8"),
]
TARGET_CASES = [
    pytest.param(["judge", "{run}", "--target", "{tmp}/t.toml"], {"t.toml": text}, word, id=name)
    for name, text, word in TARGETS
] + [
    pytest.param(["judge", "{run}", "--target", "{tmp}/none.toml"], {}, "--target", id="missing target file"),
    pytest.param(
        ["judge", "{run}", "--target", "{base}/good_target.toml", "--e", "1.5"], {}, "--e = '1.5'", id="override e"
    ),
    pytest.param(["judge", "{run}", "--e", "0.5", "--e-err", "0.1"], {}, "--a", id="no target file, values missing"),
    pytest.param(
        ["figures", "{run}", "--target", "{tmp}/t.toml", "--out", "{new}"],
        {"t.toml": TARGETS[0][1]},
        "target.e",
        id="figures target",
    ),
]

# ------------------------------------------------------------------ flags
GOOD_T = ["--target", "{base}/good_target.toml"]
FLAGS = [
    # the cases the issue lists
    (["compare", "{run}", "--observed", "{cat}", "--out", "{base}/afolder", *FAST], "--out"),
    (["judge", "{run}", *GOOD_T, "--out", "{base}/afile.txt"], "--out"),
    (["figures", "{run}", "--out", "{base}/afile.txt"], "--out"),
    (["compare", "{run}", "--observed", "{cat}", "--rv-survey", "-3,10"], "K_MIN"),
    (["compare", "{run}", "--observed", "{cat}", "--permutations", "1e400"], "--permutations"),
    (["compare", "{run}", "--observed", "{cat}", "--seed", "9" * 40], "--seed"),
    (["run", "{tmp}/s.toml", "--workers", "1" + "0" * 30, "--out", "{new}"], "--workers"),
    (["judge", "{stopped}", *GOOD_T], "--partial"),
    (["figures", "{stopped}", "--out", "{new}"], "--partial"),
    # others
    (["compare", "{run}", "--observed", "{cat}", "--rv-survey", "3"], "--rv-survey"),
    (["compare", "{run}", "--observed", "{cat}", "--energy-tolerance", "1e400"], "--energy-tolerance"),
    (["compare", "{run}", "--observed", "{cat}", "--tidal", "melt"], "--tidal"),
    (["compare", "{run}", "--observed", "{cat}", "--format", "html"], "--format"),
    (["compare", "{run}", "--observed", "{cat}", "--labels", "a,b"], "--labels"),
    (["compare", "{run}", "--observed", "{cat}", "--star-mass-range", "2,1"], "--star-mass-range"),
    (["compare", "{base}/afile.txt", "--observed", "{cat}", *FAST], "afile.txt"),
    (["compare", "{run}"], "--observed"),
    (["run", "{tmp}/s.toml", "--workers", "0", "--out", "{new}"], "--workers"),
    (["run", "{tmp}/s.toml", "--batch-size", "-1", "--out", "{new}"], "--batch-size"),
    (["run", "{tmp}/s.toml", "--progress-every", "0", "--out", "{new}"], "--progress-every"),
    (["run", "{tmp}/s.toml", "--scheduler", "tcp://x:1", "--workers", "2", "--out", "{new}"], "--scheduler"),
    (["run", "{tmp}/s.toml", "--cluster", "{tmp}/none.toml", "--out", "{new}"], "--cluster"),
    (["run", "{tmp}/s.toml", "--out", "{base}/afile.txt"], "--out"),
    (["run", "{tmp}/s.toml", "--out", "{base}/afile.txt/sub"], "--out"),
    (["judge", "{run}", *GOOD_T, "--ee", "3"], "--ee"),
    (["judge", "{run}", *GOOD_T, "--confidence", "2"], "--confidence"),
    (["judge", "{run}", *GOOD_T, "--resamples", "0"], "--resamples"),
    (["judge", "{run}", *GOOD_T, "--a-window", "0"], "--a-window"),
    (["judge", "{run}", *GOOD_T, "--interval", "bayes"], "--interval"),
    (["figures", "{run}", "--format", "gif", "--out", "{new}"], "--format"),
    (["figures", "{run}", "--width", "huge", "--out", "{new}"], "--width"),
    (["figures", "{run}", "--labels", "a,b", "--out", "{new}"], "--labels"),
    (["status", "{base}/afolder"], "DIR"),
    (["bench", "--systems", "1"], "--systems"),
    (["nosuchcommand"], "nosuchcommand"),
]
FLAG_CASES = [
    pytest.param(argv, {"s.toml": TINY}, word, id=" ".join(a for a in argv[:1] + argv[2:4]) + f" [{i}]")
    for i, (argv, word) in enumerate(FLAGS)
]
CLUSTER_FILE_CASES = [
    pytest.param(
        ["run", "{tmp}/s.toml", "--cluster", "{tmp}/c.toml", "--out", "{new}"],
        {"s.toml": TINY, "c.toml": '# caf\xe9\nkind = "local"\n'.encode("latin-1")},
        "not UTF-8",
        id="latin-1 cluster file",
    ),
]

ALL = SPEC_CASES + SPEC_FILE_CASES + CATALOGUE_CASES + TARGET_CASES + FLAG_CASES + CLUSTER_FILE_CASES


def test_the_table_is_large_enough():
    assert len(ALL) >= 60


@pytest.mark.parametrize("argv, files, word", ALL)
def test_bad_input_is_one_line_exit_2_and_nothing_changes(world, tmp_path, capsys, argv, files, word):
    _case(world, tmp_path, capsys, argv, files, word)


# ------------------------------------------------------------------ what is accepted
def test_byte_order_marks_are_accepted(tmp_path, capsys):
    # what spreadsheet and editor exports write (UTF-8 with a BOM)
    from scatter_pop.survey.catalogue import load_catalogue
    from scatter_pop.target.target_file import load_target_file

    spec = tmp_path / "s.toml"
    spec.write_bytes(b"\xef\xbb\xbf" + TINY.encode("utf-8"))
    assert cli.main(["check", str(spec)]) == 0 and "valid" in capsys.readouterr().out
    cat = tmp_path / "c.csv"
    cat.write_bytes(b"\xef\xbb\xbf" + GOOD_CSV.encode("utf-8"))
    assert load_catalogue(cat).e.tolist() == [0.2, 0.3, 0.5]
    target = tmp_path / "t.toml"
    target.write_bytes(b"\xef\xbb\xbf" + TARGET.encode("utf-8"))
    assert load_target_file(target).target.e == 0.5


def test_overrides_replace_the_file_values(world):
    from scatter_pop.target.target_file import load_target_file

    chosen = load_target_file(world["base"] / "good_target.toml", {"e": "0.7", "a_window": "3"})
    assert chosen.target.e == 0.7 and chosen.windows.a_sigmas == 3.0 and chosen.target.a == 3.0


def test_stopped_run_is_read_with_partial(world, tmp_path, capsys):
    code = cli.main(["judge", str(world["stopped"]), "--target", str(world["base"] / "good_target.toml"), "--partial"])
    out = capsys.readouterr()
    assert code == 0, out.err
    assert "of 4 systems" in out.out  # the 4 finished of 6


def test_library_errors_name_arguments_not_flags(world):
    # the same mistakes through the library: the message names the argument, never a flag
    from scatter_pop.errors import InputError
    from scatter_pop.store.run_folder import open_ensemble

    with pytest.raises(InputError) as err:
        open_ensemble(world["stopped"])
    assert "partial=True" in str(err.value) and "--" not in str(err.value)
