"""Shared fixtures: the demo files, a folder of its own per test, a way to build a run."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DATA = Path(__file__).resolve().parent / "data"
DEMO = ROOT / "verirun" / "demo"


@pytest.fixture
def demo_procedure_path() -> Path:
    return DEMO / "qm40-analog-multimeter.yaml"


@pytest.fixture
def demo_bench_path() -> Path:
    return DEMO / "bench-sim.yaml"


@pytest.fixture
def demo_lab_path() -> Path:
    return DEMO / "lab.yaml"


@pytest.fixture
def data_dir() -> Path:
    return DATA


@pytest.fixture(autouse=True)
def _work_in_tmp(tmp_path, monkeypatch):
    """Every test runs in its own folder, so a default `runs/` or `reports/` never lands in the
    repo, and keeps its machine-wide locks there, so tests never meet another session's locks."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / ".runtime").mkdir()
    monkeypatch.setenv("XDG_RUNTIME_DIR", str(tmp_path / ".runtime"))


@pytest.fixture
def at_the_bench():
    """See :func:`at_the_bench.calibrator_at_the_bench`."""
    from at_the_bench import calibrator_at_the_bench

    with calibrator_at_the_bench():
        yield


@pytest.fixture
def make_run(tmp_path):
    """Build a run in the test's folder (``runs/``, ``reports/``): :func:`runkit.build_run`
    with the same keywords, the test scenario of ``tests/data/steps`` unless they say other."""
    from runkit import build_run

    def make(**given):
        given.setdefault("runs_dir", tmp_path / "runs")
        given.setdefault("reports_dir", tmp_path / "reports")
        return build_run(**given)

    return make
