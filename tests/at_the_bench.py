"""A run at the bench in tests: the calibrator reached through the simulated device."""

from __future__ import annotations

import contextlib

import pytest


@contextlib.contextmanager
def calibrator_at_the_bench():
    """While open, a run at a real bench (no --simulate) reaches its calibrator through the
    simulated device: verirun treats it as a calibration, the test needs no hardware."""
    from verirun import conduct as session
    from verirun.bench.calibrator import Calibrator
    from verirun.bench.sim import SIM_RESOURCE, sim_library

    dry_run = session.open_calibrator

    def open_calibrator(bench, *, simulate, workdir, profile):
        if simulate:  # a dry run in the same test: as ever
            return dry_run(bench, simulate=True, workdir=workdir, profile=profile)
        return Calibrator.open(
            sim_library(workdir / "test-bench"),
            SIM_RESOURCE,
            profile,
            timeout_ms=int(bench.timeout_s * 1000),
        )

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(session, "open_calibrator", open_calibrator)
        yield
