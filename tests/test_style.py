"""The tree stays as `make lint` wants it: ruff's checks pass and `ruff format` changes nothing
(configuration in pyproject.toml, [tool.ruff]).  Common practice: a formatter run in the test suite
keeps review diffs about content."""

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
RUFF = shutil.which("ruff", path=str(Path(sys.executable).parent)) or shutil.which("ruff")


@pytest.mark.skipif(RUFF is None, reason="ruff is in the test extra; not installed here")
@pytest.mark.parametrize("args", [["check", "."], ["format", "--check", "."]], ids=["check", "format"])
def test_ruff_is_clean(args):
    proc = subprocess.run([RUFF, *args], cwd=ROOT, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
