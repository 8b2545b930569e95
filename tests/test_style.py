"""The code is formatted and linted as pyproject.toml configures ruff (line length 100, sorted
imports, pyflakes and pycodestyle): the suite fails on code that is not."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize(
    "command", [["format", "--check", "."], ["check", "."]], ids=["format", "lint"]
)
def test_ruff(command):
    found = subprocess.run(
        [sys.executable, "-m", "ruff", *command],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert found.returncode == 0, found.stdout + found.stderr
