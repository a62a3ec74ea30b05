"""``scatter-pop run`` and ``scatter-pop status``: output, exit status, flag errors, dry run.

Conventions checked (common practice for Unix command-line tools, and the project's rule): a usage
error is one line on stderr with exit status 2 and no traceback, and nothing on disk changes;
progress output is plain lines (no carriage returns or terminal escapes) so a batch log reads the
same as a terminal.
"""

from __future__ import annotations

import re

import pytest
from ensemble_helpers import run_cli, write_spec

from scatter_pop.cli.main import main
from scatter_pop.store.run_folder import open_ensemble

PROGRESS = re.compile(
    r"^\[scatter-pop\] (\d+)/(\d+) systems \(\d+\.\d %\) \| ejected \d+ merged \d+ star \d+ \| "
    r"capped \d+ failed \d+ \| \d+:\d\d:\d\d elapsed, ETA (\d+:\d\d:\d\d|\?)$"
)


@pytest.mark.slow
def test_run_then_status_as_real_processes(tmp_path):
    spec = write_spec(tmp_path / "tiny.toml", systems=4)
    proc = run_cli("run", spec, "--workers", "2", "--progress-every", "0.01")
    assert proc.returncode == 0, proc.stderr
    out = tmp_path / "tiny_out"  # default: beside the spec
    lines = proc.stdout.splitlines()
    assert lines[0].startswith("dashboard: ")
    assert "\r" not in proc.stdout and "\x1b" not in proc.stdout
    progress = [PROGRESS.match(line) for line in lines if line.startswith("[scatter-pop]")]
    assert progress and all(progress) and progress[-1].group(1, 2) == ("4", "4")
    assert lines[-1].startswith(f"done: 4 systems in {out / 'ensemble.nc'} (end reasons: ")
    assert (out / "spec.toml").read_bytes() == spec.read_bytes()
    ds = open_ensemble(out)
    assert ds.sizes["system"] == 4

    status = run_cli("status", out)
    assert status.returncode == 0, status.stderr
    text = status.stdout
    assert "systems      4/4 done (100.0 %), 0 to go" in text
    assert "state        finished" in text and "capped       0" in text and "failed       0" in text
    cpu = float(ds["wall_seconds"].sum())
    assert re.search(r"CPU time     \d+:\d\d:\d\d integrating \(mean [0-9.e+-]+ s per system\)", text)
    assert f"(mean {cpu / 4:.3g} s per system)" in text


def test_dry_run_changes_nothing(tmp_path, capsys):
    spec = write_spec(tmp_path / "tiny.toml", systems=7)
    assert main(["run", str(spec), "--dry-run", "--batch-size", "3"]) == 0
    out = capsys.readouterr().out
    assert "0/7 systems on disk; computing 7 new systems; batch size 3" in out
    assert "nothing was computed (--dry-run)" in out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["tiny.toml"]


@pytest.mark.parametrize(
    "flags, named",
    [
        (["--workers", "0"], "--workers"),
        (["--batch-size", "-1"], "--batch-size"),
        (["--progress-every", "0"], "--progress-every"),
        (["--scheduler", "tcp://127.0.0.1:1", "--workers", "2"], "--scheduler"),
        (["--cluster", "no_such_cluster.toml"], "--cluster"),
    ],
)
def test_bad_flags_are_one_line_with_status_2(tmp_path, capsys, flags, named):
    spec = write_spec(tmp_path / "tiny.toml")
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), *flags]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("scatter-pop run: error: ") and named in err[0]
    assert not (tmp_path / "out").exists()


def test_missing_spec_and_non_run_folders(tmp_path, capsys):
    assert main(["run", str(tmp_path / "absent.toml")]) == 2
    assert "absent.toml" in capsys.readouterr().err
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "notes.txt").write_text("keep me")
    spec = write_spec(tmp_path / "tiny.toml")
    assert main(["run", str(spec), "--out", str(tmp_path / "mine")]) == 2
    assert "not a scatter-pop run folder" in capsys.readouterr().err
    assert (tmp_path / "mine" / "notes.txt").read_text() == "keep me"
    assert main(["status", str(tmp_path / "mine")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not a scatter-pop run folder" in err[0]


@pytest.mark.slow
def test_run_attached_to_a_running_scheduler(tmp_path):
    from scatter_pop.ensemble.cluster import ClusterConfig, connect

    spec = write_spec(tmp_path / "tiny.toml", systems=3)
    with connect(ClusterConfig(dashboard_port=0), workers=1) as client:
        address = client.scheduler.address
        proc = run_cli("run", spec, "--out", tmp_path / "run", "--scheduler", address)
        assert proc.returncode == 0, proc.stderr
        # the batches went through that scheduler: it has seen tasks of the prefix "integrate"
        prefixes = client.run_on_scheduler(lambda dask_scheduler: sorted(dask_scheduler.task_prefixes))
    assert "integrate" in prefixes
    assert "done: 3 systems" in proc.stdout
    assert open_ensemble(tmp_path / "run").sizes["system"] == 3
