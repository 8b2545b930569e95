"""One run from files to certificate: open the bench, run the engine, close the record, render.

This is the glue the CLI calls for ``run`` and ``demo``; it holds no arithmetic and prints
nothing itself (the console does).
"""

from __future__ import annotations

import contextlib
import dataclasses
import shutil
import signal
import time
import uuid as uuid_mod
from dataclasses import dataclass
from importlib.resources import as_file, files
from pathlib import Path

from verirun import preflight, storage
from verirun.bench.config import Bench, load_bench_text
from verirun.bench.profile import load_profile
from verirun.certificate.render import write_certificate
from verirun.clock import SystemClock
from verirun.engine import Engine, Outcome, RunContext
from verirun.errors import ProcedureError, RecordError, VerirunError
from verirun.interrupts import deferred_signals, forget_kill_requests, kill_request, run_handlers
from verirun.locks import calibrator_lock, run_lock
from verirun.procedure.load import Procedure, load_procedure, load_procedure_text
from verirun.procedure.plan import plan
from verirun.record.build import Made, as_found_part, build_record, close_record
from verirun.record.documents import (
    AsFound,
    BenchAsRun,
    ProcedureAsRun,
    Record,
    Renewal,
    Start,
    as_journaled,
    compose,
    record_document,
)
from verirun.record.journal import (
    JOURNAL_NAME,
    RECORD_NAME,
    Journal,
    confirmed_steps,
    latest_environment,
    latest_time,
    load_record_document,
    never_started,
    never_started_text,
    read_journal,
    run_folder_name,
)
from verirun.register.closing import after_close


@dataclass
class Finished:
    """What a finished (or stopped) run left behind."""

    outcome: Outcome | None
    run_dir: Path
    record_path: Path | None
    certificate: Path | None
    record: Record | None


#: How old a folder that never started must be before a new run removes it: a process that is
#: only now making its own takes that folder's lock within milliseconds.
_STALE_S = 60.0


def _remove_never_started(runs_dir: Path, now: float) -> None:
    """Remove the folders under ``runs_dir`` that never started (see :func:`never_started`),
    older than a minute and whose lock no process holds."""
    try:
        folders = [p for p in Path(runs_dir).iterdir() if never_started(p)]
    except OSError:
        return
    for folder in folders:
        try:
            if now - folder.stat().st_mtime < _STALE_S:
                continue
            with run_lock(folder):
                if never_started(folder):
                    shutil.rmtree(folder)
        except (VerirunError, OSError):  # in use, or not ours to remove: it stays as it is
            continue


def _sigterm_as_interrupt():
    """The run's signal handlers (:func:`verirun.interrupts.run_handlers`): SIGTERM, SIGHUP (the
    terminal went away) and SIGQUIT become KeyboardInterrupt, as Ctrl-C is, so that every guard
    puts the output in standby before the process ends."""

    def handler(signum, frame):
        raise kill_request(signum)  # noted too: a raise lost in a callback still stops the run

    forget_kill_requests()
    return run_handlers(
        {
            number: handler
            for number in (getattr(signal, name, None) for name in ("SIGTERM", "SIGHUP", "SIGQUIT"))
            if number is not None
        }
    )


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

    library, resource = _calibrator_address(bench, simulate=simulate, workdir=workdir)
    return Calibrator.open(library, resource, profile, timeout_ms=int(bench.timeout_s * 1000))


def _calibrator_address(bench: Bench, *, simulate: bool, workdir: Path) -> tuple[str, str]:
    """The VISA library and resource of the run's calibrator."""
    cal = bench.file.calibrator
    if simulate:
        from verirun.bench.sim import SIM_RESOURCE, sim_library

        folder = workdir / "simulated-calibrator"
        for path in (folder / "calibrator.yaml", folder):  # written below: never through a link
            if path.is_symlink():
                path.unlink()
        return sim_library(folder), SIM_RESOURCE
    return cal.visa_library, cal.resource


def execute(
    *,
    procedure: Procedure,
    bench: Bench,
    context: RunContext,
    readings,
    console,
    runs_dir: Path,
    reports_dir: Path,
    simulate: bool,
    clock=None,
    uid: str | None = None,
    calibrator=None,
) -> Finished:
    """Run ``procedure`` on ``bench`` end to end and render its certificate.

    The journal is written in a new folder under ``runs_dir``; when the run ends (however it
    ends) the journal is closed into ``record.json`` there, and a complete run's certificate is
    rendered into ``reports_dir``. Exceptions propagate after the record is written. A run that
    stops before its start document is journaled leaves no folder behind.
    """
    clock = clock or SystemClock()
    uid = uid or uuid_mod.uuid4().hex
    if context.reports is None:
        context = dataclasses.replace(context, reports=str(Path(reports_dir).resolve()))
    profile = (
        calibrator.profile
        if calibrator is not None
        else load_profile(bench.file.calibrator.profile)
    )
    points = plan(procedure, bench)
    check_readings(readings, points)
    preflight.check(points, bench, profile, today=clock.now().date())
    storage.make_folder(runs_dir)
    # Folders left by runs killed before they started are removed: nothing was measured there.
    _remove_never_started(Path(runs_dir), time.time())
    run_dir = Path(runs_dir) / run_folder_name(context.item.get("serial", "item"), uid, clock.now())
    storage.make_folder(run_dir, exist_ok=False)
    try:
        with run_lock(run_dir):
            return _drive(
                run_dir=run_dir,
                procedure=procedure,
                bench=bench,
                context=context,
                readings=readings,
                console=console,
                reports_dir=reports_dir,
                simulate=simulate,
                clock=clock,
                uid=uid,
                calibrator=calibrator,
                profile=profile,
                points=points,
            )
    except BaseException as exc:
        if not _has_start(run_dir):
            # Nothing was journaled: the folder holds no run, and no resume could continue it.
            shutil.rmtree(run_dir, ignore_errors=True)
            exc.run_dir = None  # type: ignore[attr-defined]
        raise


def _has_start(run_dir: Path) -> bool:
    try:
        read = read_journal(run_dir / JOURNAL_NAME)
    except RecordError:
        return (run_dir / JOURNAL_NAME).exists() and (run_dir / JOURNAL_NAME).stat().st_size > 0
    return read.start is not None


def _drive(
    *,
    run_dir: Path,
    procedure,
    bench,
    context,
    readings,
    console,
    reports_dir,
    simulate,
    clock,
    uid,
    calibrator,
    profile,
    points,
    resume: Start | None = None,
    done: frozenset[int] = frozenset(),
    not_before: str | None = None,
    renewed: Renewal | None = None,
) -> Finished:
    """Open the bench, run the engine on ``run_dir``'s journal, and close the run however it ends.

    Whatever ends the run, the journal is closed into the run record; the certificate is
    rendered only for a complete run. An exception is re-raised with ``run_dir`` attached, so
    the caller can say where the resumable run lies. The caller holds the run folder's lock.
    """
    own_calibrator = calibrator is None
    made: Made = (procedure, bench, points)  # closing uses the plan the run ran
    journal = Journal(run_dir / JOURNAL_NAME)
    outcome = None
    # The signal handlers stay until the record is written (see _finish), and closing is a
    # critical section: a kill request while the run closes acts once the record is on disk.
    with _sigterm_as_interrupt():
        try:
            with contextlib.ExitStack() as held:
                if own_calibrator:
                    if (
                        not simulate
                    ):  # one verirun per instrument (a simulated one is the run's own)
                        held.enter_context(calibrator_lock(bench.file.calibrator.resource))
                    calibrator = open_calibrator(
                        bench, simulate=simulate, workdir=run_dir, profile=profile
                    )
                    held.callback(calibrator.close)
                engine = Engine(
                    procedure=procedure,
                    bench=bench,
                    calibrator=calibrator,
                    readings=readings,
                    console=console,
                    journal=journal,
                    clock=clock,
                )
                outcome = engine.run(
                    context,
                    uid=uid,
                    resume=resume,
                    done=done,
                    points=points,
                    not_before=not_before,
                    renewed=renewed,
                )
                del engine  # what it kept of each step is in the journal: closing reads that
        except BaseException as exc:
            exc.run_dir = run_dir  # type: ignore[attr-defined]
            with deferred_signals():  # a signal now is dropped: the run is ending already
                journal.close()
                try:
                    after_close(run_dir, close_record(run_dir, made), warn=console.warn)
                except (
                    Exception
                ):  # the journal is the truth; a record that cannot be built now can be later
                    pass
            raise
        journal.close()
        return _finish(run_dir, reports_dir, outcome=outcome, console=console, made=made)


def _finish(
    run_dir: Path, reports_dir: Path, *, outcome=None, console=None, made: Made | None = None
) -> Finished:
    """Close the journal into the record, number and store it in the lab register (if one is
    named), and render a complete run's certificate (once it may be issued).

    Closing holds the signal handlers and is a critical section: a signal arriving while the
    record is written acts once it is on disk (a resume then renders a missing certificate)."""
    try:
        with _sigterm_as_interrupt():
            with deferred_signals():
                record = close_record(run_dir, made)
            record, issuable = after_close(
                run_dir, record, warn=console.warn if console is not None else None
            )
            complete = record is not None and record.run.status == "complete" and issuable
            certificate = write_certificate(record, reports_dir) if complete else None
    except BaseException as exc:
        exc.run_dir = run_dir  # type: ignore[attr-defined]
        raise
    return Finished(
        outcome=outcome,
        run_dir=run_dir,
        record_path=run_dir / RECORD_NAME,
        certificate=certificate,
        record=record,
    )


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
        """The run in words:
        ``"Continuing run ... (uid ...): ... 6 of 20 readings kept, a dry run"``."""
        how = (
            "a dry run on the simulated calibrator"
            if self.simulated
            else "a run on the real calibrator"
        )
        return (
            f"Continuing run {self.run_dir} (uid {self.uid}) of item {self.serial}, procedure"
            f" {self.procedure}: {self.kept} of {self.points} points have a confirmed entry and are"
            f" kept, {self.points - self.kept} to go; {how}"
        )


def resumable(run_dir: Path) -> Resumable:
    """What the stopped run in ``run_dir`` holds (read from its journal; nothing is changed).

    Raises
    ------
    RecordError
        If the folder holds no journal that starts a run.
    """
    run_dir = Path(run_dir)
    if never_started(run_dir):
        raise RecordError(never_started_text(run_dir))
    read = read_journal(run_dir / JOURNAL_NAME)
    start = read.start
    if start is None:
        raise RecordError(f"{run_dir}: the journal has no start document; nothing to resume")
    try:
        points = len(plan(load_procedure_text(start.procedure.text, start.procedure.source)))
    except VerirunError:
        points = 0
    return Resumable(
        run_dir=run_dir,
        uid=start.uid,
        serial=start.item.serial,
        procedure=f"{start.procedure.id} revision {start.procedure.revision}",
        kept=len(confirmed_steps(read.models)),
        points=points,
        simulated=start.bench.simulated,
        reports=Path(start.reports) if start.reports else None,
        environment=latest_environment(read.models),
    )


def resume(
    *,
    run_dir: Path,
    procedure_path: Path | None,
    bench_path: Path | None,
    readings,
    console,
    reports_dir: Path | None = None,
    serial: str | None = None,
    clock=None,
    calibrator=None,
    environment: dict | None = None,
) -> Finished:
    """Continue a stopped or crashed run at its first step without a confirmed entry.

    The procedure and bench files (by default the ones the run started from, else the copies
    its journal holds) must be the same as when the run started, by SHA-256; the item serial,
    when given, must match; the calibrator must report the same identity. A run whose every
    step has a confirmed entry is closed without the bench (nothing is measured again), and a
    closed run whose record or certificate is missing or stale has them written again.

    Raises
    ------
    RecordError
        If the run cannot be resumed: unreadable journal, already closed, or a file changed.
    BusyError
        If another process holds the run folder.
    """
    clock = clock or SystemClock()
    run_dir = Path(run_dir)
    if not (run_dir / JOURNAL_NAME).is_file():
        raise RecordError(f"{run_dir}: no run journal here; nothing to resume")
    with run_lock(run_dir):
        return _resume_locked(
            run_dir=run_dir,
            procedure_path=procedure_path,
            bench_path=bench_path,
            readings=readings,
            console=console,
            reports_dir=reports_dir,
            serial=serial,
            clock=clock,
            calibrator=calibrator,
            environment=environment,
        )


def _resume_locked(
    *,
    run_dir,
    procedure_path,
    bench_path,
    readings,
    console,
    reports_dir,
    serial,
    clock,
    calibrator,
    environment,
) -> Finished:
    from verirun.record.verify import reach_problems

    journal_path = run_dir / JOURNAL_NAME
    read = read_journal(journal_path)
    docs, start = read.documents, read.start
    if start is None:
        raise RecordError(f"{run_dir}: the journal has no start document; nothing to resume")
    try:
        record = build_record(docs, str(journal_path))
    except RecordError as exc:
        raise RecordError(
            f"the journal does not verify, so the run cannot be resumed:\n{exc}"
        ) from None
    cut = reach_problems(run_dir, docs)
    if cut:
        raise RecordError(
            "the run cannot be resumed: its journal no longer reaches what was recorded"
            " from it:\n" + "\n".join(cut)
        )
    procedure = _same_file(
        procedure_path, start.procedure, "procedure", load_procedure, load_procedure_text
    )
    bench, renewed = _resume_bench(bench_path, start.bench)
    if serial is not None and serial != start.item.serial:
        raise RecordError(f"{run_dir}: this run is for item {start.item.serial!r}, not {serial!r}")
    points = plan(procedure, bench)
    if reports_dir is None:  # where the run started putting its certificate
        reports_dir = Path(start.reports or "reports")
    if record.run.status in ("complete", "incomplete"):
        return _finish_closed(run_dir, reports_dir, record, console)
    done = frozenset(row.index for row in record.points if row.verdict != "not-measured")
    pending = [p for p in points if p.index not in done]
    if read.torn_line is not None:
        console.warn(
            f"the last line of the journal was cut off by the interruption and is dropped"
            f" ({len(read.torn_line)} characters); every whole line before it is kept"
        )
    if not pending:
        return _close_without_bench(run_dir, reports_dir, clock=clock, console=console)
    simulate = start.bench.simulated
    profile = (
        calibrator.profile
        if calibrator is not None
        else load_profile(bench.file.calibrator.profile)
    )
    check_readings(readings, pending, points)
    preflight.check(pending, bench, profile, today=clock.now().date())
    context = RunContext(  # who and what, as the run started (a resume journals no start)
        lab=as_journaled(start.lab),
        customer=as_journaled(start.customer),
        item=as_journaled(start.item),
        operator=start.operator,
        simulated=simulate,
        environment=environment if environment is not None else as_journaled(start.environment),
        reports=start.reports,
    )
    return _drive(
        run_dir=run_dir,
        procedure=procedure,
        bench=bench,
        context=context,
        readings=readings,
        console=console,
        reports_dir=reports_dir,
        simulate=simulate,
        clock=clock,
        uid=start.uid,
        calibrator=calibrator,
        profile=profile,
        points=points,
        resume=start,
        done=done,
        not_before=latest_time(read.models),
        renewed=renewed,
    )


def _close_without_bench(run_dir: Path, reports_dir: Path, *, clock, console) -> Finished:
    """Close a run whose every step has a confirmed entry but whose journal has no complete
    stop (it was killed after its last reading): a resume with nothing to measure, and the stop."""
    from verirun.clock import iso

    journal = Journal(run_dir / JOURNAL_NAME)
    try:
        now = max(iso(clock.now()), latest_time(read_journal(run_dir / JOURNAL_NAME).models) or "")
        journal.append(
            compose(
                "resume",
                time=now,
                identity=None,
                pending=0,
                recovered_torn_line=journal.recovered is not None,
                recovered_text=journal.recovered,
            )
        )
        journal.append(compose("stop", time=now, status="complete", reason=None, counts={}))
    except BaseException as exc:
        exc.run_dir = run_dir  # type: ignore[attr-defined]
        raise
    finally:
        journal.close()
    console.say("every step already had a confirmed entry: the run is closed without the bench")
    return _finish(run_dir, reports_dir, console=console)


def _finish_closed(run_dir: Path, reports_dir: Path, record: Record, console) -> Finished:
    """A closed run: write its record and certificate again if either is missing or stale."""
    from verirun.certificate.render import certificate_path

    # Compared as the file holds it: a key in the file that the journal does not give (a stray
    # null, say) makes the record stale, though the two models would compare equal.
    try:
        stored = load_record_document(run_dir / RECORD_NAME)
    except RecordError:
        stored = None
    complete = record.run.status == "complete"
    written = record_document(record)
    if stored == written and not (complete and not certificate_path(record, reports_dir).exists()):
        raise RecordError(
            f"{run_dir}: the run is closed ({record.run.status}) and its record is"
            " written; nothing to resume (use 'verirun certify' for its certificate)"
        )
    if stored != written:
        console.say(
            "the run was closed but its record is missing or not the one its journal closes"
            " into: written again from the journal"
        )
    return _finish(run_dir, reports_dir, console=console)


#: What a bench file may change between the start of a run and its resumption: the standard's
#: calibration (a new certificate and due date), nothing that enters a result.
_RENEWABLE = ("calibration_due", "certificate", "traceability")


def _resume_bench(path: Path | None, stored: BenchAsRun) -> tuple[Bench, Renewal | None]:
    """The bench to resume on: the run's own, or ``path`` when it is the same file, or the same
    but for the standard's renewed calibration (then also what was renewed, for the journal)."""
    from verirun.register.standards import load_bench as load_with_standard

    if path is None:
        return load_bench_text(stored.text, stored.source), None
    # A calibrator named by asset takes its standard from the register, as when the run started;
    # the hash compared is then of the bench text with the standard written in, as journaled.
    loaded = load_with_standard(path)
    if loaded.sha256 == stored.sha256:
        return loaded, None
    before = load_bench_text(stored.text, stored.source)
    if _without_renewal(before) != _without_renewal(loaded):
        _same_file(
            path, stored, "bench file", load_with_standard, load_bench_text
        )  # raises, saying why
    cal = loaded.file.calibrator
    return loaded, Renewal(
        certificate=cal.certificate,
        calibration_due=cal.calibration_due.isoformat(),
        traceability=cal.traceability,
        bench_sha256=loaded.sha256,
        bench_source=loaded.source,
        bench_text=loaded.text,
    )


def _without_renewal(bench: Bench) -> dict:
    data = bench.file.model_dump()
    data["calibrator"] = {k: v for k, v in data["calibrator"].items() if k not in _RENEWABLE}
    return data


def _same_file(
    path: Path | None, stored: ProcedureAsRun | BenchAsRun, kind: str, load_path, load_text
):
    """Load ``path`` and check it is the one the run started with; with no ``path``, the copy
    the journal holds (the file it came from may have been revised since)."""
    if path is None:
        return load_text(stored.text, stored.source)
    loaded = load_path(path)
    if loaded.sha256 != stored.sha256:
        raise RecordError(
            f"{path}: this {kind} is not the one the run started with (its SHA-256 is"
            f" {loaded.sha256[:12]}..., the run's is {stored.sha256[:12]}...); resume needs"
            f" the same {kind}"
        )
    return loaded


def as_found_of(
    run: Path,
    *,
    serial: str,
    procedure: Procedure,
    adjustment: str,
    customer: dict | None = None,
    others: list[Path] = (),
    simulated: bool | None = None,
) -> AsFound:
    """The as-found results an as-left run carries, from the verified earlier run ``run``.

    Raises
    ------
    RecordError
        If the earlier run does not verify, is not complete, or is of another item or procedure.
    """
    from verirun.record.verify import verified_record

    record = verified_record(run)
    if record.run.status != "complete":
        raise RecordError(f"{run}: the as-found run is {record.run.status}, not complete")
    if record.item.serial != serial:
        raise RecordError(
            f"{run}: the as-found run is of item {record.item.serial!r}, not {serial!r}"
        )
    if record.procedure.id != procedure.id:
        raise RecordError(
            f"{run}: the as-found run followed procedure {record.procedure.id}, not {procedure.id}"
        )
    if not adjustment.strip():
        raise RecordError("say what was adjusted (--adjustment); it is printed on the certificate")
    if customer is not None:
        from verirun.adjustment import check_as_found

        check_as_found(
            record, run=Path(run), customer=customer, others=list(others), simulated=simulated
        )
    return as_found_part(record, adjustment=adjustment.strip())


@contextlib.contextmanager
def demo_files():
    """Paths of the demo's procedure, bench, lab profile and virtual meter (packaged)."""
    root = files("verirun.demo")
    with (
        as_file(root / "qm40-analog-multimeter.yaml") as procedure,
        as_file(root / "bench-sim.yaml") as bench,
        as_file(root / "lab.yaml") as lab,
        as_file(root / "virtual-meter.yaml") as meter,
    ):
        yield {"procedure": procedure, "bench": bench, "lab": lab, "meter": meter}
