"""The run loop: plan -> bench -> readings -> journal, with the output guarded at every step.

The engine orchestrates and computes nothing of its own: windows come with the plan, verdicts
from :func:`verirun.evaluation.evaluate`, safety decisions from :mod:`verirun.bench.safety`.
Every entry the operator confirms is journaled (fsynced) before anything else happens.
"""

from __future__ import annotations

import uuid as uuid_mod
from dataclasses import dataclass, field
from typing import Any

from verirun import __version__
from verirun.bench.config import Bench
from verirun.bench.safety import HazardLimits, is_hazardous, output_guard
from verirun.clock import SystemClock, iso
from verirun.errors import BenchError, RunAborted, StorageError, VerirunError
from verirun.evaluation import verdict
from verirun.interrupts import deferred_signals, stop_if_asked
from verirun.metrology.summary import VERDICTS
from verirun.procedure.load import Procedure
from verirun.procedure.plan import TestPoint, plan
from verirun.readings import Entry, OperatorSilent, ReadingSource
from verirun.record.documents import (
    JOURNAL_FORMAT,
    Applied,
    AsFound,
    BenchAsRun,
    CalibratorAsRun,
    ProcedureAsRun,
    Renewal,
    Software,
    Start,
    compose,
)
from verirun.record.journal import Journal


@dataclass(frozen=True, kw_only=True)
class RunContext:
    """Who and what a run is for; written into the start document as given."""

    lab: dict
    customer: dict
    item: dict
    operator: str
    simulated: bool
    environment: dict = field(default_factory=dict)
    #: For an as-left pass after an adjustment: the as-found run's results (see as_found_of).
    as_found: AsFound | None = None
    #: The folder the run's certificate goes to (written in the start document, so that a
    #: resumed run's certificate goes there too).
    reports: str | None = None


@dataclass
class Outcome:
    """How a run ended."""

    uid: str
    status: str  # complete, aborted, failed
    reason: str | None
    counts: dict[str, int]


def start_document(
    *, uid: str, time: str, procedure: Procedure, bench: Bench, identity: str, context: RunContext
) -> dict[str, Any]:
    """The first document of a run's journal: everything needed to replay and certify it."""
    cal = bench.file.calibrator
    return compose(
        "start",
        time=time,
        uid=uid,
        journal_format=JOURNAL_FORMAT,
        software=Software(name="verirun", version=__version__),
        procedure=ProcedureAsRun(
            id=procedure.id,
            title=procedure.file.procedure.title,
            revision=procedure.revision,
            sha256=procedure.sha256,
            source=procedure.source,
            text=procedure.text,
        ),
        bench=BenchAsRun(
            id=bench.file.bench.id,
            location=bench.file.bench.location,
            sha256=bench.sha256,
            source=bench.source,
            text=bench.text,
            simulated=context.simulated,
            calibrator=CalibratorAsRun(
                description=cal.description,
                asset=cal.asset,
                identity=identity,
                resource=cal.resource,
                certificate=cal.certificate,
                calibration_due=cal.calibration_due.isoformat(),
                traceability=cal.traceability,
            ),
        ),
        lab=context.lab,
        customer=context.customer,
        item=context.item,
        operator=context.operator,
        environment=context.environment,
        **({"as_found": context.as_found} if context.as_found is not None else {}),
        **({"reports": context.reports} if context.reports else {}),
    )


class Engine:
    """Executes the plan of a procedure on a bench.

    Parameters
    ----------
    procedure, bench
        What to verify and with what.
    calibrator
        An open calibrator driver.
    readings
        Where the readings come from.
    console
        What the operator sees (``Console`` or ``QuietConsole``).
    journal
        The journal of this run.
    clock
        Source of time and of settling waits.
    """

    def __init__(
        self,
        *,
        procedure: Procedure,
        bench: Bench,
        calibrator,
        readings: ReadingSource,
        console,
        journal: Journal,
        clock=None,
    ):
        self.procedure = procedure
        self.bench = bench
        self.calibrator = calibrator
        self.readings = readings
        self.console = console
        self.journal = journal
        self.clock = clock or SystemClock()
        self.limits = HazardLimits(
            dc_volts=bench.hazardous_dc,
            ac_rms_volts=bench.hazardous_ac_rms,
            ac_peak_volts=bench.hazardous_ac_peak,
        )
        #: The run so far: readings by the verdict of each of the four statements, and skips.
        self.counts = dict.fromkeys((*VERDICTS, "skipped"), 0)
        #: The points given an entry in this session, with it, newest last (for undo).
        self._taken: list[tuple[TestPoint, Entry]] = []
        #: Each reading's verdict in this session, by its point's index (for undo).
        self.verdicts: dict[int, str] = {}
        self.journal_format = JOURNAL_FORMAT
        #: The latest time journaled: no document is dated before it (see _now).
        self._latest: str | None = None
        self._behind = False

    def run(
        self,
        context: RunContext,
        *,
        uid: str | None = None,
        resume: Start | None = None,
        done: frozenset[int] = frozenset(),
        points: list[TestPoint] | None = None,
        not_before: str | None = None,
        renewed: Renewal | None = None,
    ) -> Outcome:
        """Run every point of the plan not in ``done``; return how the run ended.

        The calibrator is identified first and checked against the bench file (and, when
        resuming, against the identity the run started with); the output is in standby before
        the first point, between points, and whatever ends the run.

        Parameters
        ----------
        context
            Who and what the run is for.
        uid
            The run's identity (new if not given).
        resume
            The start document of the journal being resumed; a ``resume`` document is written
            instead of a new start.
        done
            Indexes (0-based steps) of the points that already have a confirmed entry.
        points
            The plan of the procedure on this bench, when the caller has made it already.
        not_before
            The time of the journal's last document (when resuming): none is dated earlier.
        renewed
            When resuming with a bench file whose standard has a new calibration: what changed,
            journaled in the resume document.
        """
        uid = uid or uuid_mod.uuid4().hex
        self._latest = not_before
        #: How points are labelled in this journal (a resumed run keeps the format it began in).
        self.journal_format = (resume.journal_format or 1) if resume is not None else JOURNAL_FORMAT
        points = [
            p
            for p in (points if points is not None else plan(self.procedure, self.bench))
            if p.index not in done
        ]
        cal = self.calibrator
        status, reason = "failed", "the run did not finish"
        self._where: "str | TestPoint" = "identify the calibrator"
        try:
            with output_guard(cal):
                identity, problem = self._identify()
                if resume is None:
                    # Written even when the identity is refused, so the journal says why it stopped.
                    self.journal.append(
                        start_document(
                            uid=uid,
                            time=self._now(),
                            procedure=self.procedure,
                            bench=self.bench,
                            identity=identity,
                            context=context,
                        )
                    )
                if problem is not None:
                    raise problem
                if resume is not None:
                    self._check_same_calibrator(identity, resume)
                    self.journal.append(
                        compose(
                            "resume",
                            time=self._now(),
                            identity=identity,
                            pending=len(points),
                            environment=context.environment,
                            recovered_torn_line=self.journal.recovered is not None,
                            recovered_text=self.journal.recovered,
                            **({"standard_renewed": renewed} if renewed else {}),
                        )
                    )
                self._clear_stale_errors()
                self.console.cautions()
                for number, point in enumerate(points):
                    self._where = point  # named in words only if the run stops here
                    self._point(point, connect=point.first_of_range or number == 0)
            status, reason = "complete", None
            return Outcome(uid=uid, status=status, reason=reason, counts=dict(self.counts))
        except RunAborted as exc:
            status, reason = "aborted", str(exc)
            raise
        except KeyboardInterrupt as exc:
            status = "aborted"
            reason = f"{str(exc) or 'interrupted (Ctrl-C)'} at {self._where_text()}"
            raise
        except VerirunError as exc:
            reason = str(exc)
            raise
        except Exception as exc:  # a bug: still close the journal with what happened
            reason = f"internal error at {self._where_text()}: {type(exc).__name__}: {exc}"
            raise
        finally:
            if self.journal_started:
                try:
                    with deferred_signals():
                        self.journal.append(
                            compose(
                                "stop",
                                time=self._now(),
                                status=status,
                                reason=reason,
                                counts=dict(self.counts),
                            )
                        )
                except StorageError:
                    # The disk that refused the run refuses its stop too; without one the run is
                    # resumable, and the error that stopped it is what the operator must see.
                    if status == "complete":
                        raise

    def _now(self) -> str:
        """The time for the next document, never before the latest one journaled: a clock set
        back (by hand, or a time server's correction) is journaled once per jump, and the
        documents keep the later time, so a record's dates never run backwards."""
        text = iso(self.clock.now())
        latest = self._latest
        if latest is not None and text < latest:
            if not self._behind:  # journaled once, until the clock has caught up again
                self._behind = True
                self.journal.append(
                    compose(
                        "note",
                        time=latest,
                        point=None,
                        clock_went_back=text,
                        text=f"the computer's clock went back, to {text}, after {latest} had"
                        " been journaled; the times that follow are kept from going"
                        " backwards",
                    )
                )
            return latest
        self._latest, self._behind = text, False
        return text

    def _check_standard_in_date(self, point: TestPoint) -> None:
        """Refuse to switch the output on with a standard whose calibration fell due since the
        run began (a run across midnight): the run stops resumable, the output in standby."""
        due = self.bench.file.calibrator.calibration_due
        today = self._now()[:10]
        if today > due.isoformat():
            raise BenchError(
                f"the standard {self.bench.file.calibrator.asset} fell due for calibration on"
                f" {due.isoformat()} and today is {today}; the run cannot go on with an overdue"
                " standard. Name a standard in date in the bench file (calibration-due), then"
                " resume the run with --bench",
                step=self._step_name(point),
            )

    def _label(self, point: TestPoint) -> str:
        return point.key_in(self.journal_format)

    def _where_text(self) -> str:
        where = self._where
        return where if isinstance(where, str) else self._step_name(where)

    @property
    def journal_started(self) -> bool:
        return self.journal.written > 0

    def _identify(self) -> tuple[str | None, BenchError | None]:
        """The calibrator's identity, and the problem with it (``None`` when it is the right
        one)."""
        command = self.calibrator.profile.commands.identify
        try:
            identity = self.calibrator.identify()
        except BenchError as exc:
            return None, exc.at_step("identify the calibrator")
        expected = self.bench.file.calibrator.identity
        if not identity.startswith(expected):
            return identity, BenchError(
                "the instrument is not the calibrator the bench file names:"
                f" expected an identity starting {expected!r}",
                command=command,
                answer=identity,
                step="identify the calibrator",
            )
        return identity, None

    def _check_same_calibrator(self, identity: str, resume: Start) -> None:
        started_with = resume.bench.calibrator.identity
        if identity != started_with:
            raise BenchError(
                "the calibrator is not the one this run started with, so the run cannot be"
                f" resumed on it (started with {started_with!r})",
                command=self.calibrator.profile.commands.identify,
                answer=identity,
                step="identify the calibrator",
            )

    def _clear_stale_errors(self) -> None:
        """Empty the error queue of what an earlier session left, so it is not blamed on this run;
        what was there is journaled."""
        self._where = "clear the calibrator's error queue"
        try:
            stale = self.calibrator.errors()
        except BenchError as exc:
            raise exc.at_step(self._where) from None
        if stale:
            text = "; ".join(f"{code} {message}".strip() for code, message in stale)
            self.journal.append(
                compose(
                    "note",
                    time=self._now(),
                    point=None,
                    text=f"errors left in the calibrator's queue before the run, cleared: {text}",
                )
            )

    def _step_name(self, point: TestPoint) -> str:
        return (
            f"step {point.index + 1} of {point.total} ({point.range.id} at {point.stimulus_text()})"
        )

    def _point(self, point: TestPoint, *, connect: bool) -> None:
        try:
            if connect:
                self.calibrator.standby()
                self.console.connect(point)
            while True:
                self._check_standard_in_date(point)
                # Asked before every switch-on at a hazardous level, a repeat included: the
                # output was in standby and hands may have been at the terminals.
                if self._check_hazard(point) == "skip":
                    entry = Entry(
                        kind="skip", typed="skip", text="hazardous output declined by the operator"
                    )
                    self._journal_entry(point, entry)
                    break
                with output_guard(self.calibrator):
                    self.calibrator.source(point.function, point.nominal, point.frequency)
                    stop_if_asked()  # a kill request whose raise was lost stops the run here
                    self.calibrator.output_on()
                    self.clock.sleep(self.bench.settle_s)
                    self.console.step(point)
                    # Silence is an answer, not an exception through the guard: the standby
                    # then runs as after any answer, and a signal meanwhile still stops the run.
                    try:
                        entry = self._take(point)
                    except OperatorSilent:
                        entry = None
                    # Journaled before anything else happens, standby included: if the output
                    # cannot be made safe the reading is still kept. One critical section: a
                    # signal cannot journal the note on a replaced reading without the entry.
                    with deferred_signals():
                        for typed in entry.replaced if entry is not None else ():
                            self.journal.append(
                                compose(
                                    "note",
                                    time=self._now(),
                                    point=self._label(point),
                                    text=f"reading {typed!r} asked about as far from the nominal"
                                    f" and not kept; the operator typed {entry.typed!r}",
                                )
                            )
                        if entry is not None and entry.kind in ("reading", "skip", "abort"):
                            self._journal_entry(point, entry)
                if entry is None:
                    self._after_silence(point)  # the guard has put the output in standby
                    continue
                if entry.kind == "repeat":
                    self.console.say("  applying the stimulus again")
                    continue
                if entry.kind == "undo":
                    if self._undo(point):
                        self.calibrator.standby()
                        self.console.connect(point)  # back to this step's range
                    continue
                break
        except BenchError as exc:
            # A fault while an earlier step was measured again (undo) is named by that step.
            raise (exc if exc.step else exc.at_step(self._step_name(point))) from None
        if entry.kind == "abort":
            raise RunAborted(
                f"aborted by the operator at {self._step_name(point)}; the run can be resumed"
            )
        self._taken.append((point, entry))
        if entry.kind == "skip":
            self.counts["skipped"] += 1
            self.console.say(f"  skipped: {entry.text}")
            return
        # The run counts verdicts; what the console shows of a reading it evaluates itself.
        judged = verdict(point, entry.value)
        self.verdicts[point.index] = judged
        self.counts[judged] += 1
        self.console.result(point, entry)

    def _undo(self, point: TestPoint) -> bool:
        """Withdraw the last entry taken in this session (journaled) and measure its step again;
        return whether the leads must go back to ``point``'s range afterwards."""
        if not self._taken:
            self.console.say("  nothing to undo: no reading has been taken yet in this session")
            return False
        last, entry = self._taken.pop()
        self.journal.append(
            compose(
                "withdrawal",
                time=self._now(),
                point=self._label(last),
                index=last.index,
                typed=entry.typed,
                reason="withdrawn by the operator (undo)",
            )
        )
        self.counts[self.verdicts.pop(last.index, "skipped")] -= 1
        self.console.say(f"  the entry of {self._step_name(last)} is withdrawn; measure it again")
        other_range = last.range is not point.range
        self.calibrator.standby()
        self._point(last, connect=other_range)
        return other_range

    def _journal_entry(self, point: TestPoint, entry: Entry) -> None:
        if entry.kind == "reading":
            self.journal.append(self._observation(point, entry))
        elif entry.kind == "skip":
            self.journal.append(
                compose(
                    "skip",
                    time=self._now(),
                    point=self._label(point),
                    index=point.index,
                    reason=entry.text,
                    typed=entry.typed,
                )
            )
        else:
            self.journal.append(
                compose(
                    "note",
                    time=self._now(),
                    point=self._label(point),
                    text="operator aborted the run" + (f": {entry.text}" if entry.text else ""),
                )
            )

    def _after_silence(self, point: TestPoint) -> None:
        """The operator said nothing for the bench's limit and the output went to standby: say
        so, journal it, and apply the stimulus again only when the operator asks."""
        limit = f"{self.bench.idle_standby_s:g} s"
        self.journal.append(
            compose(
                "note",
                time=iso(self.clock.now()),
                point=point.key,
                text=f"output put in standby: no input from the operator for {limit}",
            )
        )
        self.console.say("")
        self.console.warn(
            f"nothing was typed for {limit}, so the output was put in standby (read back off)"
            f" at {self._step_name(point)}"
        )
        answer = self.console.ask(
            f"Press Enter to apply {point.stimulus_text()} again, or type abort to stop: "
        )
        if answer.strip().lower() == "abort":
            raise RunAborted(
                f"aborted by the operator at {self._step_name(point)} after the output went"
                " to standby; the run can be resumed"
            )
        self.journal.append(
            compose(
                "note",
                time=iso(self.clock.now()),
                point=point.key,
                text="stimulus applied again at the operator's request after the standby",
            )
        )

    def _take(self, point: TestPoint) -> Entry:
        """The next entry that is not a note; notes are journaled as they come.

        An interactive source is given the bench's silence limit; past it, it raises
        :class:`OperatorSilent`."""
        while True:
            if self.readings.interactive:
                entry = self.readings.take(point, within=self.bench.idle_standby_s)
            else:
                entry = self.readings.take(point)
            if entry.kind != "note":
                return entry
            self.journal.append(
                compose(
                    "note",
                    time=self._now(),
                    point=self._label(point),
                    text=entry.text,
                    by="operator",
                )
            )
            self.console.say("  note recorded")

    def _observation(self, point: TestPoint, entry: Entry) -> dict:
        return compose(
            "observation",
            time=self._now(),
            point=self._label(point),
            index=point.index,
            range=point.range.id,
            function=point.function,
            applied=Applied(value=point.nominal, frequency=point.frequency),
            typed=entry.typed,
            reading=entry.value,
        )

    def _check_hazard(self, point: TestPoint) -> str | None:
        """Ask (or check the bench's permission) before a hazardous switch-on; ``"skip"`` when
        the operator chose to skip the point instead."""
        if not is_hazardous(point.function, point.nominal, self.limits):
            return None
        text = (
            f"{self._step_name(point)} applies {point.stimulus_text()}, at or above the"
            f" hazardous-live threshold of this bench. Keep clear of the terminals."
        )
        if self.readings.interactive and self.console.interactive:
            self.console.danger(text)
            answer = self.console.confirm_hazard("Switch the output on at a hazardous voltage?")
            if answer == "skip":
                return "skip"
            if answer != "yes":
                raise RunAborted(
                    f"hazardous output not confirmed at {self._step_name(point)};"
                    " the run can be resumed"
                )
            how = "confirmed by the operator"
        elif self.bench.file.safety.scripted_hazardous == "allow":
            self.console.danger(text + " Permitted for a scripted run by the bench file.")
            how = "permitted for a scripted run by the bench file (scripted-hazardous: allow)"
        else:
            raise RunAborted(
                f"{self._step_name(point)} would apply {point.stimulus_text()}, a hazardous"
                " voltage, in a scripted run; the bench file does not permit it"
                " (safety: scripted-hazardous: allow)"
            )
        self.journal.append(
            compose(
                "note",
                time=self._now(),
                point=self._label(point),
                text=f"hazardous output {point.stimulus_text()} {how}",
                hazardous=True,
            )
        )
