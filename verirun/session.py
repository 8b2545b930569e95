"""One run from files to certificate: open the bench, run the engine, close the record, render.

This is the glue the CLI calls for ``run`` and ``demo``; it holds no arithmetic and prints
nothing itself (the console does).
"""

from __future__ import annotations

import contextlib
import dataclasses
import re
import signal
import uuid as uuid_mod
from dataclasses import dataclass
from importlib.resources import as_file, files
from pathlib import Path

from verirun import preflight
from verirun.bench.config import Bench, load_bench, load_bench_text
from verirun.bench.profile import load_profile
from verirun.procedure.plan import plan
from verirun.certificate.render import write_certificate
from verirun.clock import SystemClock
from verirun.engine import Engine, Outcome, RunContext
from verirun.errors import ProcedureError, RecordError, VerirunError
from verirun.procedure.load import Procedure, load_procedure, load_procedure_text
from verirun.record import JOURNAL_NAME, RECORD_NAME, Journal, read_journal, verify_chain, write_record
from verirun.register.closing import after_close
from verirun.runrecord import Known, build_record


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
    """Turn SIGTERM, SIGHUP (the terminal went away) and SIGQUIT into KeyboardInterrupt for the
    run, so that every guard puts the output in standby before the process ends."""
    def handler(signum, frame):
        raise KeyboardInterrupt(f"terminated ({signal.Signals(signum).name})")

    previous = {}
    try:
        for name in ("SIGTERM", "SIGHUP", "SIGQUIT"):
            number = getattr(signal, name, None)
            if number is not None:
                previous[number] = signal.signal(number, handler)
    except ValueError:  # not in the main thread: signals cannot be handled here
        pass
    try:
        yield
    finally:
        for number, old in previous.items():
            signal.signal(number, old)


def check_readings(readings, points, every=None) -> None:
    """Check a file of readings whole against the plan before anything is sent.

    Raises
    ------
    ProcedureError
        Listing every problem of the file, each as ``file:line: ...``.
    """
    check = getattr(readings, "check", None)
    if check is None:  # a person at the console: nothing to check beforehand
        return
    found = check(points, every)
    if found:
        raise ProcedureError(found)


def open_calibrator(bench: Bench, *, simulate: bool, workdir: Path, profile):
    """Open the bench's calibrator, or the simulated one (a different VISA backend, same driver),
    with the loaded driver ``profile`` of the bench file."""
    from verirun.bench.calibrator import Calibrator

    cal = bench.file.calibrator
    if simulate:
        from verirun.bench.sim import SIM_RESOURCE, sim_library

        library, resource = sim_library(workdir / "simulated-calibrator"), SIM_RESOURCE
    else:
        library, resource = cal.visa_library, cal.resource
    return Calibrator.open(library, resource, profile, timeout_ms=int(bench.timeout_s * 1000))


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
    if context.reports is None:
        context = dataclasses.replace(context, reports=str(Path(reports_dir).resolve()))
    profile = calibrator.profile if calibrator is not None else load_profile(bench.file.calibrator.profile)
    points = plan(procedure, bench)
    check_readings(readings, points)
    preflight.check(points, bench, profile, today=clock.now().date())
    run_dir = Path(runs_dir) / run_folder_name(context.item.get("serial", "item"), uid, clock.now())
    run_dir.mkdir(parents=True, exist_ok=False)
    return _drive(run_dir=run_dir, procedure=procedure, bench=bench, context=context, readings=readings,
                  console=console, reports_dir=reports_dir, simulate=simulate, clock=clock, uid=uid,
                  calibrator=calibrator, profile=profile, points=points)


def _drive(*, run_dir: Path, procedure, bench, context, readings, console, reports_dir, simulate,
           clock, uid, calibrator, profile, points, resume: dict | None = None,
           done: frozenset[str] = frozenset()) -> Finished:
    """Open the bench, run the engine on ``run_dir``'s journal, and close the run however it ends.

    Whatever ends the run, the journal is closed into the run record; the certificate is
    rendered only for a complete run. An exception is re-raised with ``run_dir`` attached, so
    the caller can say where the resumable run lies.
    """
    own_calibrator = calibrator is None
    journal = Journal(run_dir / JOURNAL_NAME)
    outcome = None
    # What the run worked out already, for the record to use instead of working it out again.
    known = Known(procedure=procedure, bench=bench, points=points, results={})
    try:
        with _sigterm_as_interrupt():
            if own_calibrator:
                calibrator = open_calibrator(bench, simulate=simulate, workdir=run_dir, profile=profile)
            try:
                engine = Engine(procedure=procedure, bench=bench, calibrator=calibrator,
                                readings=readings, console=console, journal=journal, clock=clock,
                                results=known.results)
                outcome = engine.run(context, uid=uid, resume=resume, done=done, points=points)
            finally:
                if own_calibrator:
                    calibrator.close()
    except BaseException as exc:
        journal.close()
        try:
            after_close(run_dir, close_run(run_dir, known=known), known=known, warn=console.warn)
        except Exception:  # the journal is the truth; a record that cannot be built now can be later
            pass
        exc.run_dir = run_dir  # type: ignore[attr-defined]
        raise
    journal.close()
    record, issuable = after_close(run_dir, close_run(run_dir, known=known), known=known, warn=console.warn)
    complete = record is not None and record["run"]["status"] == "complete" and issuable
    certificate = write_certificate(record, reports_dir) if complete else None
    return Finished(outcome=outcome, run_dir=run_dir, record_path=run_dir / RECORD_NAME,
                    certificate=certificate, record=record)


@dataclass(frozen=True, kw_only=True)
class Resumable:
    """What a stopped run holds, told to the operator before it is resumed."""

    run_dir: Path
    uid: str
    serial: str | None
    procedure: str
    kept: int
    points: int
    simulated: bool
    reports: Path | None
    environment: dict

    def text(self) -> str:
        """The run in words: ``"Continuing run ... (uid ...): ... 6 of 20 readings kept, a dry run"``."""
        how = "a dry run on the simulated calibrator" if self.simulated else "a run on the real calibrator"
        return (f"Continuing run {self.run_dir} (uid {self.uid}) of item {self.serial}, procedure"
                f" {self.procedure}: {self.kept} of {self.points} points have a confirmed entry and are kept,"
                f" {self.points - self.kept} to go; {how}")


def resumable(run_dir: Path) -> Resumable:
    """What the stopped run in ``run_dir`` holds (read from its journal; nothing is changed).

    Raises
    ------
    RecordError
        If the folder holds no journal that starts a run.
    """
    run_dir = Path(run_dir)
    docs = read_journal(run_dir / JOURNAL_NAME).documents
    if not docs or docs[0].get("kind") != "start":
        raise RecordError(f"{run_dir}: the journal has no start document; nothing to resume")
    start = docs[0]
    try:
        points = len(plan(load_procedure_text(start["procedure"]["text"], start["procedure"]["source"])))
    except VerirunError:
        points = 0
    environment = start.get("environment", {})
    for doc in docs:
        if doc["kind"] == "resume" and doc.get("environment"):
            environment = doc["environment"]
    return Resumable(run_dir=run_dir, uid=start["uid"], serial=start["item"].get("serial"),
                     procedure=f"{start['procedure']['id']} revision {start['procedure']['revision']}",
                     kept=len(confirmed_points(docs)), points=points,
                     simulated=bool(start["bench"].get("simulated")),
                     reports=Path(start["reports"]) if start.get("reports") else None, environment=environment)


def resume(*, run_dir: Path, procedure_path: Path | None, bench_path: Path | None, readings, console,
           reports_dir: Path | None = None, serial: str | None = None, clock=None, calibrator=None,
           environment: dict | None = None) -> Finished:
    """Continue a stopped or crashed run at its first point without a confirmed entry.

    The procedure and bench files (by default the ones the run started from, else the copies
    its journal holds) must be the same as when the run started, by SHA-256; the item serial,
    when given, must match; the calibrator must report the same identity.

    Raises
    ------
    RecordError
        If the run cannot be resumed: unreadable journal, already complete, or a file changed.
    """
    clock = clock or SystemClock()
    run_dir = Path(run_dir)
    read = read_journal(run_dir / JOURNAL_NAME)
    docs = read.documents
    if not docs or docs[0].get("kind") != "start":
        raise RecordError(f"{run_dir}: the journal has no start document; nothing to resume")
    problems = verify_chain(docs, str(run_dir / JOURNAL_NAME))
    if problems:
        raise RecordError("the journal does not verify, so the run cannot be resumed:\n" + "\n".join(problems))
    start = docs[0]
    procedure = _same_file(procedure_path, start["procedure"], "procedure", load_procedure, load_procedure_text)
    bench = _same_file(bench_path, start["bench"], "bench file", load_bench, load_bench_text)
    if serial is not None and serial != start["item"].get("serial"):
        raise RecordError(f"{run_dir}: this run is for item {start['item'].get('serial')!r}, not {serial!r}")
    done = confirmed_points(docs)
    points = plan(procedure, bench)
    pending = [p for p in points if p.key not in done]
    if not pending:
        raise RecordError(f"{run_dir}: every point of this run already has a confirmed entry; nothing to resume"
                          " (use 'verirun certify' for its certificate)")
    simulate = bool(start["bench"].get("simulated"))
    profile = calibrator.profile if calibrator is not None else load_profile(bench.file.calibrator.profile)
    check_readings(readings, pending, points)
    preflight.check(pending, bench, profile, today=clock.now().date())
    if reports_dir is None:  # where the run started putting its certificate
        reports_dir = Path(start.get("reports") or "reports")
    context = RunContext(lab=start["lab"], customer=start["customer"], item=start["item"],
                         operator=start["operator"], simulated=simulate,
                         environment=environment if environment is not None else start.get("environment", {}),
                         reports=start.get("reports"))
    if read.torn_line is not None:
        console.warn(f"the last line of the journal was cut off by the interruption and is dropped"
                     f" ({len(read.torn_line)} characters); every whole line before it is kept")
    return _drive(run_dir=run_dir, procedure=procedure, bench=bench, context=context, readings=readings,
                  console=console, reports_dir=reports_dir, simulate=simulate, clock=clock,
                  uid=start["uid"], calibrator=calibrator, profile=profile, points=points,
                  resume=start, done=done)


def confirmed_points(docs: list[dict]) -> frozenset[str]:
    """Keys of the points with a confirmed entry: observed or skipped, and not withdrawn since."""
    done: set[str] = set()
    for doc in docs:
        if doc["kind"] in ("observation", "skip"):
            done.add(doc["point"])
        elif doc["kind"] == "withdrawal":
            done.discard(doc["point"])
    return frozenset(done)


def _same_file(path: Path | None, stored: dict, kind: str, load_path, load_text):
    """Load ``path`` and check it is the one the run started with; with no ``path``, the copy
    the journal holds (the file it came from may have been revised since)."""
    if path is None:
        return load_text(stored["text"], stored["source"])
    loaded = load_path(path)
    if loaded.sha256 != stored["sha256"]:
        raise RecordError(f"{path}: this {kind} is not the one the run started with (its SHA-256 is"
                          f" {loaded.sha256[:12]}..., the run's is {stored['sha256'][:12]}...); resume needs"
                          f" the same {kind}")
    return loaded


def close_run(run_dir: Path, *, known: Known | None = None) -> dict | None:
    """Build and write the run record of the journal in ``run_dir`` (``None`` if it is empty).

    ``known`` is what the run that wrote the journal worked out (see :class:`Known`)."""
    read = read_journal(run_dir / JOURNAL_NAME)
    if not read.documents:
        return None
    record = build_record(read.documents, str(run_dir / JOURNAL_NAME), known=known)
    write_record(record, run_dir / RECORD_NAME)
    return record


def as_found_of(run: Path, *, serial: str, procedure: Procedure, adjustment: str) -> dict:
    """The as-found results an as-left run carries, from the verified earlier run ``run``.

    Raises
    ------
    RecordError
        If the earlier run does not verify, is not complete, or is of another item or procedure.
    """
    from verirun.certificate.render import certificate_number
    from verirun.integrity import verified_record

    record = verified_record(run)
    if record["run"]["status"] != "complete":
        raise RecordError(f"{run}: the as-found run is {record['run']['status']}, not complete")
    if record["item"].get("serial") != serial:
        raise RecordError(f"{run}: the as-found run is of item {record['item'].get('serial')!r}, not {serial!r}")
    if record["procedure"]["id"] != procedure.id:
        raise RecordError(f"{run}: the as-found run followed procedure {record['procedure']['id']},"
                          f" not {procedure.id}")
    if not adjustment.strip():
        raise RecordError("say what was adjusted (--adjustment); it is printed on the certificate")
    return {"run": record["run"]["uid"], "certificate": certificate_number(record),
            "date": record["run"]["started"][:10], "adjustment": adjustment.strip(),
            "points": record["points"], "summary": record["summary"]}


@contextlib.contextmanager
def demo_files():
    """Paths of the demo's procedure, bench, lab profile and virtual meter (packaged)."""
    root = files("verirun.demo")
    with as_file(root / "qm40-analog-multimeter.yaml") as procedure, \
            as_file(root / "bench-sim.yaml") as bench, as_file(root / "lab.yaml") as lab, \
            as_file(root / "virtual-meter.yaml") as meter:
        yield {"procedure": procedure, "bench": bench, "lab": lab, "meter": meter}

