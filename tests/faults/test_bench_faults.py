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

import pytest

from verirun.errors import BenchError, RunAborted, SafetyError, VerirunError

#: Points the faults are injected at: first point, mid-range, first of a new range, first AC
#: point, the last point.
POINTS = [0, 2, 5, 11, 19]
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


# --- a command times out once --------------------------------------------------------------


class TestTimeoutOnSource:
    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        return k, fault_run(lambda res: res.on(is_level, "timeout", nth=k + 1))

    def test_error_names_step_and_command(self, faulted, demo_plan):
        """A timeout on the level command at point k stops the run with a BenchError naming the step and the command."""
        k, result = faulted
        assert_fired(result)
        point = demo_plan[k]
        assert result.resource.injected[0][1] == level_command(point)
        error = result.error
        assert type(error) is BenchError, repr(error)
        assert step_name(point) in str(error)
        assert error.command == level_command(point)
        assert repr(level_command(point)) in str(error)
        assert "no answer" in str(error)

    def test_output_reads_off_on_the_device(self, faulted):
        """After a timeout on the level command, the device itself reports its output off."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() in OFF

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop naming the step."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", step_name(demo_plan[k]), "no answer")


class TestTimeoutOnOutputOn:
    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        return k, fault_run(lambda res: res.on("OUTP ON", "timeout", nth=k + 1))

    def test_error_names_step_and_command(self, faulted, demo_plan):
        """A timeout on output-on at point k gives a BenchError naming the step and 'OUTP ON'."""
        k, result = faulted
        assert_fired(result)
        error = result.error
        assert type(error) is BenchError, repr(error)
        assert step_name(demo_plan[k]) in str(error)
        assert error.command == "OUTP ON" and "'OUTP ON'" in str(error)

    def test_output_reads_off_on_the_device(self, faulted):
        """After a timeout on output-on, the device itself reports its output off."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() in OFF

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop naming the step."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", step_name(demo_plan[k]))


# --- the instrument reports an error after a setting ----------------------------------------


class TestQueuedErrorAfterSetting:
    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        return k, fault_run(lambda res: res.on(is_level, "queue", nth=k + 1, answer=OUT_OF_RANGE))

    def test_error_names_step_command_and_answer(self, faulted, demo_plan):
        """An error queued after the level command at point k is reported with the step, the command and the answer."""
        k, result = faulted
        assert_fired(result)
        point = demo_plan[k]
        error = result.error
        assert type(error) is BenchError, repr(error)
        text = str(error)
        assert step_name(point) in text
        assert error.command == level_command(point) and repr(level_command(point)) in text
        assert error.answer == OUT_OF_RANGE and repr(OUT_OF_RANGE) in text
        assert "-222" in error.message and "Data out of range" in error.message

    def test_output_reads_off_on_the_device(self, faulted):
        """After the instrument rejects a setting, the device itself reports its output off."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() in OFF

    def test_output_was_never_switched_on_at_that_point(self, faulted):
        """After a rejected setting at point k the driver never sends output-on for that point."""
        k, result = faulted
        sent = result.resource.sent
        fault_at = result.resource.injected[0][0]
        assert "OUTP ON" not in sent[fault_at:]
        assert sent.count("OUTP ON") == k

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop with the instrument's error."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", step_name(demo_plan[k]), "Data out of range")


class TestStaleErrorBeforeRun:
    def test_error_left_by_a_previous_session_does_not_stop_the_run(self, fault_run):
        """An error already in the instrument's queue when the run starts is cleared and journaled, not blamed on the run's first command."""
        result = fault_run(lambda res: res.on("*IDN?", "queue", answer=OUT_OF_RANGE))
        assert_fired(result)
        assert result.error is None, repr(result.error)
        assert len(result.observations) == 20
        notes = [d["text"] for d in result.documents if d["kind"] == "note"]
        assert any("Data out of range" in text for text in notes), notes


# --- the connection is lost ------------------------------------------------------------------


class TestConnectionLostOnce:
    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        return k, fault_run(lambda res: res.on(is_level, "lost", nth=k + 1))

    def test_error_names_step_and_command(self, faulted, demo_plan):
        """A connection lost on the level command at point k gives a BenchError naming the step and the command."""
        k, result = faulted
        assert_fired(result)
        point = demo_plan[k]
        error = result.error
        assert type(error) is BenchError, repr(error)
        assert step_name(point) in str(error)
        assert "connection to the calibrator was lost" in str(error)
        assert error.command == level_command(point)

    def test_output_reads_off_on_the_device(self, faulted):
        """When the link comes back for standby, the device itself reports its output off."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() in OFF

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop naming the lost connection."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", "connection to the calibrator was lost")


class TestStandbyImpossible:
    """The link dies for good just after output-on at point k: standby cannot be sent."""

    @pytest.fixture(
        scope="class",
        params=[("timeout", k) for k in POINTS] + [("lost", k) for k in (0, 11, 19)],
        ids=lambda p: f"{p[0]}-point{p[1]}",
    )
    @classmethod
    def faulted(cls, request, fault_run):
        action, k = request.param
        return k, fault_run(
            lambda res: res.on("OUTP ON", action, nth=k + 1, lasting=True, deliver=True)
        )

    def test_safety_error_says_output_state_unknown(self, faulted):
        """When standby cannot be sent, the caller gets a SafetyError telling the operator the output state is unknown."""
        _, result = faulted
        assert_fired(result)
        error = result.error
        assert isinstance(error, SafetyError), repr(error)
        assert "output state unknown" in str(error)
        assert "by hand" in str(error)

    def test_device_output_really_is_on(self, faulted):
        """The SafetyError is no false alarm: the device itself still reports its output on."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() not in OFF

    def test_safety_error_names_the_step(self, faulted, demo_plan):
        """The SafetyError that reaches the caller names the step at which the output was left on."""
        k, result = faulted
        assert step_name(demo_plan[k]) in str(result.error)

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop saying the output state is unknown."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", "output state unknown")


class TestStandbyAfterReadingFails:
    """A one-shot timeout on the standby that follows the reading at point k."""

    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        return k, fault_run(lambda res: res.on(nth_after_output_on(k, "OUTP OFF"), "timeout"))

    def test_safety_error_names_step_and_standby(self, faulted, demo_plan):
        """A standby that times out after the reading gives a SafetyError naming the step and 'OUTP OFF'."""
        k, result = faulted
        assert_fired(result)
        error = result.error
        assert isinstance(error, SafetyError), repr(error)
        assert step_name(demo_plan[k]) in str(error)
        assert error.command == "OUTP OFF"

    def test_output_reads_off_on_the_device(self, faulted):
        """The run's own guard sends standby again, and the device itself reports its output off."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() in OFF

    def test_reading_taken_before_the_failed_standby_is_journaled(self, faulted, demo_plan):
        """The reading taken at point k, before its standby failed, is in the journal."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k + 1)

    def test_journal_ends_with_a_stop(self, faulted):
        """The journal ends with a failed stop saying the output state was unknown."""
        _, result = faulted
        assert_stop(result, "failed", "output state unknown")


class TestStandbyAtRangeChangeFails:
    """A one-shot timeout on the standby sent when point k starts a new range."""

    @pytest.fixture(scope="class", params=[5, 8, 14], ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run, demo_plan):
        k = request.param
        assert demo_plan[k].first_of_range
        # After point k-1's output-on: the step's own standby, then the range change's standby.
        return k, fault_run(
            lambda res: res.on(nth_after_output_on(k - 1, "OUTP OFF", nth=2), "timeout")
        )

    def test_error_names_the_step(self, faulted, demo_plan):
        """A timeout on the range-change standby of point k gives an error naming step k and 'OUTP OFF'."""
        k, result = faulted
        assert_fired(result)
        assert isinstance(result.error, BenchError), repr(result.error)
        assert step_name(demo_plan[k]) in str(result.error)
        assert result.error.command == "OUTP OFF"

    def test_output_reads_off_on_the_device(self, faulted):
        """After the range-change standby failed once, the device itself reports its output off."""
        _, result = faulted
        assert_fired(result)
        assert result.bench.output_reads() in OFF

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", "no answer")


# --- the instrument is not the one the bench file names --------------------------------------


class TestWrongIdentity:
    OTHER = "Other Instruments,XC-9,12345,2.0"

    @pytest.fixture(scope="class")
    @classmethod
    def faulted(cls, fault_run):
        return fault_run(lambda res: res.on("*IDN?", "answer", answer=cls.OTHER))

    def test_error_names_step_command_and_answer(self, faulted):
        """A wrong identity stops the run before any point with a BenchError naming the identify step, '*IDN?' and the answer."""
        assert_fired(faulted)
        error = faulted.error
        assert type(error) is BenchError, repr(error)
        assert "identify the calibrator" in str(error)
        assert error.command == "*IDN?" and error.answer == self.OTHER
        assert repr(self.OTHER) in str(error)

    def test_nothing_is_sourced_and_output_reads_off(self, faulted):
        """After a wrong identity no level or output-on command is sent and the device reports its output off."""
        assert_fired(faulted)
        sent = faulted.resource.sent
        assert not any(is_level(c) or c == "OUTP ON" for c in sent), sent
        assert faulted.bench.output_reads() in OFF

    def test_journal_says_why_the_run_stopped(self, faulted):
        """The journal of a run refused at identification ends with a stop document giving the identity found."""
        assert_stop(faulted, "failed", self.OTHER)


class TestIdentifyTimesOut:
    def test_error_names_the_identify_step(self, fault_run):
        """A timeout on '*IDN?' gives a BenchError naming the identify step and the command."""
        result = fault_run(lambda res: res.on("*IDN?", "timeout"))
        assert_fired(result)
        assert type(result.error) is BenchError, repr(result.error)
        assert "identify the calibrator" in str(result.error)
        assert result.error.command == "*IDN?"


# --- the reading source raises ----------------------------------------------------------------


def _raising(k: int, error: BaseException):
    return lambda scripted: FaultyReadings(scripted, index=k, error=error)


class TestInterruptAtReading:
    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        return k, fault_run(readings=_raising(k, KeyboardInterrupt()))

    def test_interrupt_reaches_the_caller(self, faulted):
        """Ctrl-C while the reading of point k is awaited reaches the caller as KeyboardInterrupt."""
        _, result = faulted
        assert type(result.error) is KeyboardInterrupt, repr(result.error)

    def test_output_reads_off_on_the_device(self, faulted):
        """After Ctrl-C at a reading, the device itself reports its output off."""
        _, result = faulted
        assert result.bench.output_reads() in OFF

    def test_journal_keeps_observations_and_an_aborted_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and ends with an aborted stop."""
        k, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "aborted")

    def test_stop_says_it_was_interrupted(self, faulted):
        """The stop document of a run stopped by Ctrl-C says it was interrupted."""
        _, result = faulted
        assert_stop(result, "aborted", "interrupted")

    def test_stop_names_the_step(self, faulted, demo_plan):
        """The stop document of an interrupted run names the step it was interrupted at."""
        k, result = faulted
        assert_stop(result, "aborted", step_name(demo_plan[k]))


class TestBugInReadingSource:
    @pytest.fixture(scope="class", params=POINTS, ids=lambda k: f"point{k}")
    @classmethod
    def faulted(cls, request, fault_run):
        k = request.param
        error = RuntimeError("reading source broke")
        return k, error, fault_run(readings=_raising(k, error))

    def test_bug_reaches_the_caller_unchanged(self, faulted):
        """A bug in the reading source reaches the caller as itself, not disguised as a user error."""
        _, error, result = faulted
        assert result.error is error
        assert not isinstance(result.error, VerirunError)

    def test_output_reads_off_on_the_device(self, faulted):
        """After a bug in the reading source, the device itself reports its output off."""
        _, _, result = faulted
        assert result.bench.output_reads() in OFF

    def test_journal_keeps_observations_and_stop(self, faulted, demo_plan):
        """The journal holds every observation before point k and a failed stop naming the internal error."""
        k, _, result = faulted
        assert_observations_before(result, demo_plan, k)
        assert_stop(result, "failed", "internal error", "RuntimeError", "reading source broke")

    def test_stop_names_the_step(self, faulted, demo_plan):
        """The stop document of a run stopped by a bug names the step it happened at."""
        k, _, result = faulted
        assert_stop(result, "failed", step_name(demo_plan[k]))


class TestOperatorAbort:
    def test_abort_typed_at_point_k_is_run_aborted(self, fault_run, demo_plan):
        """'abort' from the reading source stops with RunAborted naming the step, output off, stop journaled."""
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
        """A run stopped by a fault still has its journal closed into record.json, with the stop's status."""
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
        """A queued error answers the next error-queue query once; the one after is the device's own."""
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
