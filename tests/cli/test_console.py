"""The console as a user meets it: ``--version``, closed pipes, quiet/verbose, the progress display.

A closed pipe (``| head -1``) must end the command quietly: Python's own advice for SIGPIPE (the
``signal`` module documentation, "Note on SIGPIPE") is to point standard output at devnull and exit.
"""

from __future__ import annotations

import os
import subprocess
import sys
from importlib.metadata import version
from pathlib import Path

import pytest
from records import planet, system

from scatter_pop import cli
from scatter_pop.spec.reader import parse_spec
from scatter_pop.store.run_folder import RunFolder
from scatter_pop.store.schema import records_to_dataset

ROOT = Path(__file__).resolve().parents[2]
TINY = ROOT / "tests" / "data" / "tiny.toml"
COMMAND = [sys.executable, "-m", "scatter_pop"]


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory):
    spec = parse_spec(TINY.read_text(encoding="utf-8"), str(TINY))
    folder = RunFolder(tmp_path_factory.mktemp("console") / "run")
    folder.path.mkdir()
    folder.spec_path.write_text(spec.text, encoding="utf-8")
    records = [system(i, [planet(1.0, 2.0, 0.3), planet(1.0, 4.0, 0.2)]) for i in range(4)]
    folder.gather([folder.write_part(records_to_dataset(records, 2), spec)], spec)
    return folder.path


def _closed_pipe(argv):
    """Run with a standard output whose reader has already gone away."""
    proc = subprocess.Popen(
        [*COMMAND, *argv], stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=os.environ.copy(), cwd=ROOT
    )
    proc.stdout.close()  # the reader is gone before the command writes anything
    err = proc.stderr.read().decode()
    return proc.wait(timeout=120), err


def test_version_names_the_package_version():
    done = subprocess.run([*COMMAND, "--version"], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0 and done.stdout.startswith(f"scatter_pop {version('scatter_pop')}")


@pytest.mark.parametrize(
    "argv",
    [["--version"], ["status", "{run}"], ["check", str(TINY), "--json"], ["check", str(TINY)]],
    ids=["version", "status", "check --json", "check"],
)
def test_a_closed_pipe_ends_quietly(run_folder, argv):
    code, err = _closed_pipe([a.format(run=run_folder) for a in argv])
    assert code == 0 and "Traceback" not in err and "BrokenPipe" not in err and err == "", err


def test_head_of_a_shell_pipeline(run_folder):
    for command in (f"status {run_folder}", f"check {TINY} --json"):
        line = " ".join([*COMMAND, command])
        done = subprocess.run(
            ["bash", "-c", f"set -o pipefail; {line} | head -1"], capture_output=True, text=True, cwd=ROOT
        )
        assert done.returncode == 0 and done.stderr == "" and len(done.stdout.splitlines()) == 1, done


def test_status_of_a_stopped_run_has_no_eta(tmp_path, capsys):
    text = TINY.read_text(encoding="utf-8").replace("systems = 4", "systems = 8")
    spec = parse_spec(text, "tiny.toml")
    folder = RunFolder(tmp_path / "stopped")
    folder.path.mkdir()
    folder.spec_path.write_text(text, encoding="utf-8")
    folder.write_part(records_to_dataset([system(i, [planet(), planet(a=9.0)]) for i in range(4)], 2), spec)
    assert cli.main(["status", str(folder.path)]) == 0
    eta = [ln for ln in capsys.readouterr().out.splitlines() if ln.startswith("ETA")]
    assert eta == ["ETA          none: no run is going on (rerun `scatter-pop run` on the spec to continue)"]


def test_quiet_prints_results_only(tmp_path, capsys):
    spec = tmp_path / "tiny.toml"
    spec.write_text(TINY.read_text(encoding="utf-8"))
    assert cli.main(["run", str(spec), "--dry-run", "-q"]) == 0
    quiet = capsys.readouterr().out
    assert cli.main(["run", str(spec), "--dry-run"]) == 0
    assert "nothing was computed" in quiet and quiet == capsys.readouterr().out  # a dry run is all results
    assert cli.main(["-q", "check", str(spec)]) == 0 and "valid" in capsys.readouterr().out


def test_progress_is_a_bar_on_a_terminal_and_lines_in_a_log(monkeypatch, capsys):
    from scatter_pop.ensemble import progress
    from scatter_pop.ensemble.progress import Progress, Tally

    lines = []
    plain = Progress(10, Tally(), interval=0.0, emit=lines.append)
    plain.tally.systems = 4
    plain.update()
    assert lines and lines[-1].startswith("[scatter-pop] 4/10 systems (40.0 %)") and "ETA" in lines[-1]
    monkeypatch.setattr(progress, "BAR", True)
    bar = Progress(10, Tally(), interval=0.0, emit=lines.append)
    bar.tally.systems = 7
    bar.update(force=True)
    err = capsys.readouterr().err
    assert "7/10" in err and "system" in err and len(lines) == 1  # drawn by tqdm on stderr, no plain line
