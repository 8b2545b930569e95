"""Fixtures for certificate tests: stored runs made quickly by re-chaining one real journal."""

from __future__ import annotations

from pathlib import Path

import pytest
from runkit import simulated_run_args

from verirun.cli import main

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def demo_run_dir(tmp_path_factory) -> Path:
    """One complete run of the demo procedure with scripted readings."""
    tmp = tmp_path_factory.mktemp("demo-run")
    assert (
        main(
            simulated_run_args(
                tmp,
                ROOT / "procedures" / "qm40-analog-multimeter.yaml",
                ROOT / "verirun" / "demo" / "bench-sim.yaml",
                ROOT / "tests" / "data" / "qm40-readings.csv",
                serial="QM40-1",
            )
        )
        == 0
    )
    (run,) = (tmp / "runs").iterdir()
    return run
