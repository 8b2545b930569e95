"""One run from files to certificate: open the bench, run the engine, close the record, render.

This is the glue the CLI calls for ``run`` and ``demo``; it holds no arithmetic and prints
nothing itself (the console does).
"""

from __future__ import annotations

import contextlib
import re
import signal
import uuid as uuid_mod
from dataclasses import dataclass
from importlib.resources import as_file, files
from pathlib import Path

from verirun import preflight
from verirun.bench.config import Bench
from verirun.bench.profile import load_profile
from verirun.procedure.plan import plan
from verirun.certificate.render import write_certificate
from verirun.clock import SystemClock
from verirun.engine import Engine, Outcome, RunContext
from verirun.errors import BenchError
from verirun.procedure.load import Procedure
from verirun.record import JOURNAL_NAME, RECORD_NAME, Journal, read_journal, write_record
from verirun.runrecord import build_record


@dataclass
class Finished:
    """What a finished (or stopped) run left behind."""

    outcome: Outcome | None
    run_dir: Path
    record_path: Path | None
    certificate: Path | None
    record: dict | None


def run_folder_name(serial: str, uid: str, started) -> str:
    """The run's folder name: item serial, date and the start of its uid, made file-safe."""
    slug = re.sub(r"[^A-Za-z0-9_-]+", "-", serial).strip("-")[:40] or "item"
    return f"{started:%Y%m%d-%H%M%S}-{slug}-{uid[:8]}"


@contextlib.contextmanager
def _sigterm_as_interrupt():
    """Turn SIGTERM into KeyboardInterrupt for the run, so every guard puts the output safe."""
    def handler(signum, frame):
        raise KeyboardInterrupt("terminated (SIGTERM)")

    try:
        previous = signal.signal(signal.SIGTERM, handler)
    except ValueError:  # not in the main thread
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def open_calibrator(bench: Bench, *, simulate: bool, workdir: Path):
    """Open the bench's calibrator, or the simulated one (a different VISA backend, same driver)."""
    from verirun.bench.calibrator import Calibrator

    cal = bench.file.calibrator
    if simulate:
        from verirun.bench.sim import SIM_RESOURCE, sim_library

        library, resource = sim_library(workdir), SIM_RESOURCE
    else:
        library, resource = cal.visa_library, cal.resource
    return Calibrator.open(library, resource, cal.profile, timeout_ms=int(bench.timeout_s * 1000))


def execute(*, procedure: Procedure, bench: Bench, context: RunContext, readings, console,
            runs_dir: Path, reports_dir: Path, simulate: bool, clock=None, uid: str | None = None,
            calibrator=None) -> Finished:
    """Run ``procedure`` on ``bench`` end to end and render its certificate.

    The journal is written in a new folder under ``runs_dir``; when the run ends (however it
    ends) the journal is closed into ``record.json`` there, and a complete run's certificate is
    rendered into ``reports_dir``. Exceptions propagate after the record is written.
    """
    clock = clock or SystemClock()
    uid = uid or uuid_mod.uuid4().hex
    profile = calibrator.profile if calibrator is not None else load_profile(bench.file.calibrator.profile)
    preflight.check(plan(procedure, bench), bench, profile, today=clock.now().date())
    run_dir = Path(runs_dir) / run_folder_name(context.item.get("serial", "item"), uid, clock.now())
    run_dir.mkdir(parents=True, exist_ok=False)
    own_calibrator = calibrator is None
    journal = Journal(run_dir / JOURNAL_NAME)
    outcome = None
    try:
        with _sigterm_as_interrupt():
            if own_calibrator:
                calibrator = open_calibrator(bench, simulate=simulate, workdir=run_dir)
            try:
                engine = Engine(procedure=procedure, bench=bench, calibrator=calibrator,
                                readings=readings, console=console, journal=journal, clock=clock)
                outcome = engine.run(context, uid=uid)
            finally:
                if own_calibrator:
                    calibrator.close()
    finally:
        journal.close()
    record = close_run(run_dir)
    certificate = write_certificate(record, reports_dir) if record else None
    return Finished(outcome=outcome, run_dir=run_dir, record_path=run_dir / RECORD_NAME,
                    certificate=certificate, record=record)


def close_run(run_dir: Path) -> dict | None:
    """Build and write the run record of the journal in ``run_dir`` (``None`` if it is empty)."""
    read = read_journal(run_dir / JOURNAL_NAME)
    if not read.documents:
        return None
    record = build_record(read.documents, str(run_dir / JOURNAL_NAME))
    write_record(record, run_dir / RECORD_NAME)
    return record


@contextlib.contextmanager
def demo_files():
    """Paths of the demo's procedure, bench, lab profile and virtual meter (packaged)."""
    root = files("verirun.demo")
    with as_file(root / "qm40-analog-multimeter.yaml") as procedure, \
            as_file(root / "bench-sim.yaml") as bench, as_file(root / "lab.yaml") as lab, \
            as_file(root / "virtual-meter.yaml") as meter:
        yield {"procedure": procedure, "bench": bench, "lab": lab, "meter": meter}


__all__ = ["execute", "close_run", "demo_files", "open_calibrator", "Finished", "BenchError"]
