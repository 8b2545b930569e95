"""Faults on the bench during the demo run: what reaches the caller, the output, and the journal.

Each fault is injected by :class:`FaultyResource` around a fresh simulated calibrator (or by a
reading source that raises), at several points of the run. Whatever the fault, the caller gets a
verirun error naming the step (or the interrupt / the bug itself), the output reads off on the
device itself, and the journal keeps every observation confirmed before the fault and ends
with a stop document saying why. When standby itself cannot be sent, the caller is told the
output state is unknown.

Plan of the demo (0-based index): 0-4 dcv-6, 5-7 dcv-30, 8-10 dca-30m, 11-13 acv-30 (AC, with a
frequency command), 14-16 ohm-x1, 17-19 ohm-x1k.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import pytest

from verirun.errors import BenchError, RunAborted, SafetyError

#: Points the faults are injected at: first point, mid-range, first of a new range, first AC
#: point, the last point.
POINTS = (0, 2, 5, 11, 19)
HEADERS = {
    "dc-voltage": "VOLT",
    "dc-current": "CURR",
    "ac-voltage": "VOLT",
    "ac-current": "CURR",
    "resistance": "RES",
}
OUT_OF_RANGE = '-222,"Data out of range"'
OFF = ("0", "OFF")
ERROR_QUERY = "SYST:ERR?"


def is_level(command: str) -> bool:
    """True for a command that sets a level (``VOLT 6.0``, ``CURR 0.01``, ``RES 12.0``)."""
    return command.split(" ", 1)[0] in ("VOLT", "CURR", "RES") and not command.endswith("?")


def step_name(point) -> str:
    """How a step is named in messages: ``step 3 of 20 (dcv-6 at 3.6 V DC)``."""
    return f"step {point.index + 1} of {point.total} ({point.range.id} at {point.stimulus_text()})"


class FaultyReadings:
    """A reading source that raises ``error`` when asked for the point at plan index ``index``."""

    interactive = False

    def __init__(self, inner, *, index: int, error: BaseException):
        self.inner = inner
        self.index = index
        self.error = error

    def take(self, point):
        if point.index == self.index:
            raise self.error
        return self.inner.take(point)


def level_command(point) -> str:
    """The level command the driver sends for ``point`` (values in Python's shortest repr)."""
    return f"{HEADERS[point.function]} {point.nominal!r}"


def nth_after_output_on(k: int, command: str, nth: int = 1):
    """A matcher for the ``nth`` ``command`` sent after the (k+1)-th ``OUTP ON``."""
    state = {"on": 0, "seen": 0}

    def match(sent: str) -> bool:
        if sent == "OUTP ON":
            state["on"] += 1
            return False
        if sent == command and state["on"] == k + 1:
            state["seen"] += 1
            return state["seen"] == nth
        return False

    return match


def assert_fired(result) -> None:
    assert result.resource.injected, "the fault was never injected"


def assert_observations_before(result, demo_plan, k: int) -> None:
    keys = [d["point"] for d in result.observations]
    assert keys == [p.key for p in demo_plan[:k]], keys


def assert_stop(result, status: str, *words: str) -> None:
    stop = result.stop
    assert stop is not None, [d["kind"] for d in result.documents]
    assert result.documents[-1] is stop, "the stop document is not the last"
    assert stop["status"] == status, stop
    for word in words:
        assert word in (stop["reason"] or ""), stop["reason"]


# --- the fault matrix: each fault at each moment it can strike -----------------------------


@dataclass(frozen=True)
class Fault:
    """One row of the fault matrix: a fault, the points it strikes at, and what must follow.

    The fault is ``setup(k)``, installing it on the :class:`FaultyResource` for point ``k``, or
    ``raises()``, an error the reading source raises when asked for point ``k``'s reading.
    """

    name: str
    moments: tuple[int, ...]
    error: type  # what reaches the caller: that type (or, with ``subclass``, a kind of it)
    setup: Callable[[int], Callable] | None = None
    raises: Callable[[], BaseException] | None = None
    subclass: bool = False
    first_of_range: bool = False  # the moments are first points of a range (checked)
    names_step: bool = True  # the error's text names the step
    command: Callable[[object], str] | None = None  # the command the error names, for a point
    answer: str | None = None  # the instrument's answer the error gives
    says: tuple[str, ...] = ()  # words of the error's message
    output: tuple[str, ...] = OFF  # what the device itself reports afterwards
    on_again: bool = True  # the output may be switched on at the point of the fault
    kept: int = 0  # readings kept at the point itself (1: taken before the fault)
    stop: str = "failed"
    stop_names_step: bool = False
    stop_says: tuple[str, ...] = ()


#: The fault matrix, one row a fault. Plan indexes: see the module's docstring.
FAULTS = [
    # a command times out once
    Fault(
        "timeout-on-source",
        POINTS,
        BenchError,
        setup=lambda k: lambda res: res.on(is_level, "timeout", nth=k + 1),
        command=level_command,
        says=("no answer",),
        stop_names_step=True,
        stop_says=("no answer",),
    ),
    Fault(
        "timeout-on-output-on",
        POINTS,
        BenchError,
        setup=lambda k: lambda res: res.on("OUTP ON", "timeout", nth=k + 1),
        command=lambda point: "OUTP ON",
        stop_names_step=True,
    ),
    # the instrument reports an error after a setting
    Fault(
        "queued-error-after-setting",
        POINTS,
        BenchError,
        setup=lambda k: lambda res: res.on(is_level, "queue", nth=k + 1, answer=OUT_OF_RANGE),
        command=level_command,
        answer=OUT_OF_RANGE,
        says=("-222", "Data out of range"),
        on_again=False,
        stop_names_step=True,
        stop_says=("Data out of range",),
    ),
    # the connection is lost
    Fault(
        "connection-lost-once",
        POINTS,
        BenchError,
        setup=lambda k: lambda res: res.on(is_level, "lost", nth=k + 1),
        command=level_command,
        says=("connection to the calibrator was lost",),
        stop_says=("connection to the calibrator was lost",),
    ),
    # the link dies for good just after output-on at point k: standby cannot be sent
    Fault(
        "standby-impossible-timeout",
        POINTS,
        SafetyError,
        setup=lambda k: (
            lambda res: res.on("OUTP ON", "timeout", nth=k + 1, lasting=True, deliver=True)
        ),
        subclass=True,
        says=("output state unknown", "by hand"),
        output=("1", "ON"),
        stop_says=("output state unknown",),
    ),
    Fault(
        "standby-impossible-lost",
        (0, 11, 19),
        SafetyError,
        setup=lambda k: (
            lambda res: res.on("OUTP ON", "lost", nth=k + 1, lasting=True, deliver=True)
        ),
        subclass=True,
        says=("output state unknown", "by hand"),
        output=("1", "ON"),
        stop_says=("output state unknown",),
    ),
    # a one-shot timeout on the standby that follows the reading at point k
    Fault(
        "standby-after-reading-fails",
        POINTS,
        SafetyError,
        setup=lambda k: lambda res: res.on(nth_after_output_on(k, "OUTP OFF"), "timeout"),
        subclass=True,
        command=lambda point: "OUTP OFF",
        kept=1,
        stop_says=("output state unknown",),
    ),
    # a one-shot timeout on the standby sent when point k starts a new range: after point
    # k-1's output-on, the step's own standby, then the range change's standby
    Fault(
        "standby-at-range-change-fails",
        (5, 8, 14),
        BenchError,
        setup=lambda k: (
            lambda res: res.on(nth_after_output_on(k - 1, "OUTP OFF", nth=2), "timeout")
        ),
        subclass=True,
        first_of_range=True,
        command=lambda point: "OUTP OFF",
        stop_says=("no answer",),
    ),
    # the reading source raises: Ctrl-C while a reading is awaited, or a bug of its own
    Fault(
        "interrupt-at-reading",
        POINTS,
        KeyboardInterrupt,
        raises=KeyboardInterrupt,
        names_step=False,
        stop="aborted",
        stop_names_step=True,
        stop_says=("interrupted",),
    ),
    Fault(
        "bug-in-reading-source",
        POINTS,
        RuntimeError,
        raises=lambda: RuntimeError("reading source broke"),
        names_step=False,
        stop_names_step=True,
        stop_says=("internal error", "RuntimeError", "reading source broke"),
    ),
]
CASES = [(fault, k) for fault in FAULTS for k in fault.moments]


class TestFaultMatrix:
    """Every fault of :data:`FAULTS` at each of its moments: what reaches the caller, the
    output as the device itself reports it, and the journal (one run a case)."""

    @pytest.fixture(
        scope="class", params=CASES, ids=[f"{fault.name}-point{k}" for fault, k in CASES]
    )
    @classmethod
    def faulted(cls, request, fault_run, demo_plan):
        fault, k = request.param
        if fault.first_of_range:
            assert demo_plan[k].first_of_range
        if fault.setup is not None:
            return fault, k, None, fault_run(fault.setup(k))
        raised = fault.raises()
        return fault, k, raised, fault_run(readings=_raising(k, raised))

    def test_error_reaches_the_caller(self, faulted, demo_plan):
        """The caller gets the row's error: the fault's own if the reading source raised it
        (not disguised as a user error), else a verirun error naming the step, the command
        and the instrument's answer where the row gives them."""
        fault, k, raised, result = faulted
        error, point = result.error, demo_plan[k]
        if fault.setup is not None:
            assert_fired(result)
        if raised is not None:
            assert error is raised, repr(error)
        if fault.subclass:
            assert isinstance(error, fault.error), repr(error)
        else:
            assert type(error) is fault.error, repr(error)
        if fault.names_step:
            assert step_name(point) in str(error)
        if fault.command is not None:
            assert error.command == fault.command(point)
            assert repr(fault.command(point)) in str(error)
        if fault.answer is not None:
            assert error.answer == fault.answer and repr(fault.answer) in str(error)
        for word in fault.says:
            assert word in getattr(error, "message", str(error)), str(error)

    def test_output_state_on_the_device(self, faulted):
        """The device itself reports its output off (on, where standby could not be sent: the
        caller's error is no false alarm); after a rejected setting, the output was never
        switched on at that point."""
        fault, k, _, result = faulted
        if fault.setup is not None:
            assert_fired(result)
        assert result.bench.output_reads() in fault.output
        if not fault.on_again:
            sent = result.resource.sent
            fault_at = result.resource.injected[0][0]
            assert "OUTP ON" not in sent[fault_at:]
            assert sent.count("OUTP ON") == k

    def test_journal_keeps_every_observation_before_the_fault(self, faulted, demo_plan):
        """The journal holds every observation confirmed before the fault struck."""
        fault, k, _, result = faulted
        assert_observations_before(result, demo_plan, k + fault.kept)

    def test_journal_ends_with_a_stop_saying_why(self, faulted, demo_plan):
        """The journal ends with a stop document of the row's status saying why (naming the
        step, where the row says so)."""
        fault, k, _, result = faulted
        words = fault.stop_says + ((step_name(demo_plan[k]),) if fault.stop_names_step else ())
        assert_stop(result, fault.stop, *words)


class TestStaleErrorBeforeRun:
    def test_error_left_by_a_previous_session_does_not_stop_the_run(self, fault_run):
        """An error already in the instrument's queue when the run starts is cleared and journaled,
        not blamed on the run's first command."""
        result = fault_run(lambda res: res.on("*IDN?", "queue", answer=OUT_OF_RANGE))
        assert_fired(result)
        assert result.error is None, repr(result.error)
        assert len(result.observations) == 20
        notes = [d["text"] for d in result.documents if d["kind"] == "note"]
        assert any("Data out of range" in text for text in notes), notes


# --- the instrument is not the one the bench file names --------------------------------------


class TestWrongIdentity:
    OTHER = "Other Instruments,XC-9,12345,2.0"

    @pytest.fixture(scope="class")
    @classmethod
    def faulted(cls, fault_run):
        return fault_run(lambda res: res.on("*IDN?", "answer", answer=cls.OTHER))

    def test_error_names_step_command_and_answer(self, faulted):
        """A wrong identity stops the run before any point with a BenchError naming the identify
        step, '*IDN?' and the answer."""
        assert_fired(faulted)
        error = faulted.error
        assert type(error) is BenchError, repr(error)
        assert "identify the calibrator" in str(error)
        assert error.command == "*IDN?" and error.answer == self.OTHER
        assert repr(self.OTHER) in str(error)

    def test_nothing_is_sourced_and_output_reads_off(self, faulted):
        """After a wrong identity no level or output-on command is sent and the device reports its
        output off."""
        assert_fired(faulted)
        sent = faulted.resource.sent
        assert not any(is_level(c) or c == "OUTP ON" for c in sent), sent
        assert faulted.bench.output_reads() in OFF

    def test_journal_says_why_the_run_stopped(self, faulted):
        """The journal of a run refused at identification ends with a stop document giving the
        identity found."""
        assert_stop(faulted, "failed", self.OTHER)


class TestIdentifyTimesOut:
    def test_error_names_the_identify_step(self, fault_run):
        """A timeout on '*IDN?' gives a BenchError naming the identify step and the command."""
        result = fault_run(lambda res: res.on("*IDN?", "timeout"))
        assert_fired(result)
        assert type(result.error) is BenchError, repr(result.error)
        assert "identify the calibrator" in str(result.error)
        assert result.error.command == "*IDN?"


# --- the reading source stops the run ------------------------------------------------------


def _raising(k: int, error: BaseException):
    return lambda scripted: FaultyReadings(scripted, index=k, error=error)


class TestOperatorAbort:
    def test_abort_typed_at_point_k_is_run_aborted(self, fault_run, demo_plan):
        """'abort' from the reading source stops with RunAborted naming the step, output off, stop
        journaled."""
        from verirun.readings import Entry

        class Aborting:
            interactive = False

            def __init__(self, inner):
                self.inner = inner

            def take(self, point):
                if point.index == 2:
                    return Entry(kind="abort", typed="abort")
                return self.inner.take(point)

        result = fault_run(readings=Aborting)
        assert isinstance(result.error, RunAborted), repr(result.error)
        assert step_name(demo_plan[2]) in str(result.error)
        assert result.bench.output_reads() in OFF
        assert_observations_before(result, demo_plan, 2)
        assert_stop(result, "aborted", step_name(demo_plan[2]))


# --- what is left on disk --------------------------------------------------------------------


class TestRecordAfterFault:
    @pytest.mark.parametrize(
        "fault, status",
        [("timeout-on-source", "failed"), ("queued-error", "failed"), ("interrupt", "aborted")],
    )
    def test_record_written_when_a_run_stops(self, fault, status, fault_run):
        """A run stopped by a fault still has its journal closed into record.json, with the stop's
        status."""
        import json

        if fault == "timeout-on-source":
            result = fault_run(lambda res: res.on(is_level, "timeout", nth=3))
        elif fault == "queued-error":
            result = fault_run(lambda res: res.on(is_level, "queue", nth=3, answer=OUT_OF_RANGE))
        else:
            result = fault_run(readings=_raising(2, KeyboardInterrupt()))
        assert result.error is not None
        record = json.loads((result.run_dir / "record.json").read_text(encoding="utf-8"))
        assert record["run"]["status"] == status
        measured = [row["key"] for row in record["points"] if row["verdict"] in ("pass", "fail")]
        assert len(measured) == 2


# --- the wrapper itself ----------------------------------------------------------------------


class TestFaultyResource:
    def test_passes_exchanges_through_until_the_fault(self, bench):
        """Commands before the chosen one reach the device; the chosen one times out."""
        import pyvisa

        res = bench.resource.on("OUTP ON", "timeout", nth=2)
        res.write("OUTP ON")
        assert bench.output_reads() == "ON"
        res.write("OUTP OFF")
        with pytest.raises(pyvisa.errors.VisaIOError) as info:
            res.write("OUTP ON")
        assert info.value.error_code == pyvisa.constants.StatusCode.error_timeout
        assert bench.output_reads() == "OFF"

    def test_queued_answer_replaces_the_next_error_query_once(self, bench):
        """A queued error answers the next error-queue query once; the one after is the device's
        own."""
        res = bench.resource.on("VOLT 1.0", "queue", answer=OUT_OF_RANGE)
        res.write("VOLT 1.0")
        assert res.query(ERROR_QUERY) == OUT_OF_RANGE
        assert res.query(ERROR_QUERY).startswith("0,")

    def test_lasting_fault_breaks_every_later_command(self, bench):
        """After a lasting lost connection, every command raises OSError."""
        res = bench.resource.after(1, "lost", lasting=True)
        res.write("OUTP OFF")
        for command in ("OUTP ON", "OUTP?", ERROR_QUERY):
            with pytest.raises(OSError):
                res.query(command) if command.endswith("?") else res.write(command)
