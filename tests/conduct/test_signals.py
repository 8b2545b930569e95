"""Signals at the worst moments, with a worker thread alive: critical sections finish first.

A process with more than one thread may take a signal on any of them (``import pyvisa`` brings
a numerical library whose worker thread starts at import). These tests keep a worker thread
alive and send each signal to *it* with ``pthread_kill``, then wait until the signal has been
taken (Python's wakeup file descriptor says so), so the handler runs at a known moment of the
main thread: during standby, at the journal's fsync, while the record is written.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import signal
import socket
import subprocess
import sys
import textwrap
import threading
from pathlib import Path

import pytest
from runkit import build_run, read_until, sim_resources

from verirun.bench.calibrator import Calibrator
from verirun.bench.safety import output_guard
from verirun.clock import VirtualClock
from verirun.conduct import _sigterm_as_interrupt
from verirun.console import QuietConsole
from verirun.errors import SafetyError
from verirun.interrupts import deferred_signals
from verirun.record import build as build_mod
from verirun.record import journal as record_mod
from verirun.record.journal import Journal, read_journal, verify_chain
from verirun.record.verify import verified_record

EDGE = Path(__file__).resolve().parents[1] / "data" / "edge"
PROCEDURE, BENCH, READINGS = EDGE / "dcv-small.yaml", EDGE / "bench.yaml", EDGE / "readings.csv"
LAB = EDGE / "lab.yaml"
#: The standby and its read-back in the scpi-generic profile: off, the error check, the state query.
MAKE_SAFE = ["OUTP OFF", "SYST:ERR?", "OUTP?"]

pytestmark = pytest.mark.skipif(
    not hasattr(signal, "pthread_kill"), reason="needs POSIX threads and signals"
)


class Worker:
    """A thread that only waits, and a way to hand it a signal and wait until it was taken."""

    def __init__(self):
        self._stop = threading.Event()
        self.thread = threading.Thread(target=self._stop.wait, daemon=True)
        self.thread.start()
        self._read, self._write = socket.socketpair()
        self._read.settimeout(5)
        self._write.setblocking(False)
        self._previous_fd = signal.set_wakeup_fd(self._write.fileno(), warn_on_full_buffer=False)

    def send(self, signum: int = signal.SIGTERM) -> None:
        """Deliver ``signum`` to the worker thread; return once the process has taken it (its
        Python handler then runs at the main thread's next instruction boundary)."""
        signal.pthread_kill(self.thread.ident, signum)
        assert self._read.recv(1) == bytes([signum])

    def close(self):
        signal.set_wakeup_fd(self._previous_fd)
        self._stop.set()
        self.thread.join()
        self._read.close()
        self._write.close()


@pytest.fixture
def worker():
    helper = Worker()
    yield helper
    helper.close()


class Spy:
    """A VISA resource that passes everything to the device, keeps what was sent, and can be
    told to have signals delivered when given commands arrive."""

    def __init__(self, inner, worker: Worker | None = None):
        self.inner, self.worker = inner, worker
        self.sent: list[str] = []
        self.fire_at: dict[str, list[int]] = {}  # command -> signals to send as it arrives

    def _arrive(self, command):
        self.sent.append(command)
        for signum in self.fire_at.pop(command, []):
            self.worker.send(signum)

    def write(self, command):
        self._arrive(command)
        return self.inner.write(command)

    def query(self, command):
        self._arrive(command)
        return self.inner.query(command)

    def close(self):
        self.inner.close()


@pytest.fixture
def device(tmp_path):
    """A fresh simulated calibrator: the resource the driver uses, and a probe of its own."""

    opened = sim_resources(tmp_path, count=2, timeout=200)
    yield opened
    for resource in opened:
        resource.close()


def _signals(count: int) -> dict[str, list[int]]:
    """``count`` SIGTERMs spread over the standby's commands (one per command, then the rest
    on the last), so each is taken at a different moment of making the output safe."""
    plan: dict[str, list[int]] = {}
    for number in range(count):
        plan.setdefault(MAKE_SAFE[min(number, len(MAKE_SAFE) - 1)], []).append(signal.SIGTERM)
    return plan


class TestDeferredSignals:
    def test_a_signal_in_a_section_acts_when_it_ends(self, worker):
        """A signal taken inside the section runs no handler there; the interrupt comes after."""
        steps = []
        with _sigterm_as_interrupt():
            with pytest.raises(KeyboardInterrupt, match="SIGTERM"):
                with deferred_signals():
                    worker.send()
                    steps.append("after the signal")
                    steps.append("end of the section")
        assert steps == ["after the signal", "end of the section"]

    def test_nested_sections_act_only_at_the_outermost_end(self, worker):
        """An inner section ending does not act on a signal; the outer one's end does."""
        steps = []
        with _sigterm_as_interrupt():
            with pytest.raises(KeyboardInterrupt):
                with deferred_signals():
                    with deferred_signals():
                        worker.send()
                    steps.append("inner ended")
        assert steps == ["inner ended"]

    @pytest.mark.parametrize("count", [2, 3])
    def test_several_signals_give_one_interrupt(self, worker, count):
        """Two or three signals in one section raise one interrupt, after the section."""
        raised = 0
        with _sigterm_as_interrupt():
            try:
                with deferred_signals():
                    for _ in range(count):
                        worker.send()
                        sum(range(10))  # instructions between, so each is handled on its own
            except KeyboardInterrupt:
                raised += 1
        assert raised == 1

    def test_handlers_are_restored(self):
        """After a section, every signal has the handler it had before."""
        before = {number: signal.getsignal(number) for number in (signal.SIGINT, signal.SIGTERM)}
        with deferred_signals():
            assert signal.getsignal(signal.SIGTERM) is not before[signal.SIGTERM]
        assert {number: signal.getsignal(number) for number in before} == before

    def test_a_signal_during_an_exception_on_its_way_out_does_not_replace_it(self, worker):
        """A section that runs while an exception propagates drops the interrupt: the
        exception that is already ending the work keeps its message."""
        with _sigterm_as_interrupt():
            with pytest.raises(SafetyError, match="original"):
                try:
                    raise SafetyError("original")
                finally:
                    with deferred_signals():
                        worker.send()

    def test_a_signal_taken_the_moment_its_handler_is_set_is_noted(self, monkeypatch):
        """Outside a run's handlers, a signal dispatched right after the noting handler is set
        (before the section has recorded the handler it replaced) is noted and acted on at the
        end, with the handler it had before."""
        import verirun.interrupts as interrupts

        real = signal.signal

        def set_then_take(number, handler):
            previous = real(number, handler)
            if number == signal.SIGTERM and handler is interrupts._note:
                handler(number, None)  # as the interpreter would, at the next instruction
            return previous

        def own(signum, frame):
            raise KeyboardInterrupt("own handler: SIGTERM")

        before = real(signal.SIGTERM, own)
        try:
            monkeypatch.setattr(interrupts.signal, "signal", set_then_take)
            with pytest.raises(KeyboardInterrupt, match="own handler: SIGTERM"):
                with deferred_signals():
                    pass
        finally:
            monkeypatch.undo()
            real(signal.SIGTERM, before)

    def test_a_signal_taken_the_moment_a_run_handler_is_set_does_what_the_run_says(
        self, monkeypatch
    ):
        """A signal dispatched right after a run's handler is set acts as the run asked (its
        action is known before the handler is in place), not as the operating system's default
        (which would end the process with the output as it is)."""
        import verirun.interrupts as interrupts

        real = signal.signal

        def set_then_take(number, handler):
            previous = real(number, handler)
            if number == signal.SIGTERM and handler is interrupts._gate:
                handler(number, None)
            return previous

        monkeypatch.setattr(interrupts.signal, "signal", set_then_take)
        with pytest.raises(KeyboardInterrupt, match="SIGTERM"):
            with _sigterm_as_interrupt():
                pass
        monkeypatch.undo()
        assert signal.getsignal(signal.SIGTERM) is not interrupts._gate

    def test_inside_a_run_a_section_sets_no_handler(self, worker, monkeypatch):
        """With the run's handlers installed, a section only counts itself in and out: no
        handler is set or put back, and a signal within it still acts when it ends."""
        import verirun.interrupts as interrupts

        with _sigterm_as_interrupt():
            calls = []
            monkeypatch.setattr(
                interrupts.signal, "signal", lambda *args: calls.append(args) or signal.SIG_DFL
            )
            with pytest.raises(KeyboardInterrupt, match="SIGTERM"):
                with deferred_signals():
                    worker.send()
                    sum(range(10))
                    assert calls == []
            monkeypatch.undo()
        assert calls == []

    def test_the_handlers_a_run_replaced_are_back_after_it(self):
        """After a run's block (and a nested one, as a run closing inside its run), every
        signal has the handler it had before; Ctrl-C still raises KeyboardInterrupt."""
        import verirun.interrupts as interrupts

        before = {number: signal.getsignal(number) for number in interrupts.DEFERRED}
        with _sigterm_as_interrupt():
            with _sigterm_as_interrupt():
                assert signal.getsignal(signal.SIGTERM) is interrupts._gate
            assert signal.getsignal(signal.SIGTERM) is interrupts._gate
        assert {number: signal.getsignal(number) for number in before} == before
        with pytest.raises(KeyboardInterrupt):
            with _sigterm_as_interrupt():
                os.kill(os.getpid(), signal.SIGINT)
                sum(range(10))

    def test_every_handler_is_restored_even_if_one_raises_as_it_comes_back(self, monkeypatch):
        """If a signal taken while the handlers are put back raises, the other handlers are
        still put back, and its interrupt then propagates."""
        import verirun.interrupts as interrupts

        before = {number: signal.getsignal(number) for number in interrupts.DEFERRED}
        real, raised = signal.signal, []

        def restore_then_raise(number, handler):
            previous = real(number, handler)
            if handler is not interrupts._note and not raised:
                raised.append(number)
                raise KeyboardInterrupt("taken as its handler came back")
            return previous

        with pytest.raises(KeyboardInterrupt, match="came back"):
            with deferred_signals():
                monkeypatch.setattr(interrupts.signal, "signal", restore_then_raise)
        monkeypatch.undo()
        assert {number: signal.getsignal(number) for number in before} == before
        with deferred_signals():  # and the next section sets its handlers again
            assert signal.getsignal(signal.SIGTERM) is interrupts._note

    def test_outside_the_main_thread_the_block_just_runs(self):
        """In another thread (where no handler can be set) the section runs its block as is."""
        ran = []

        def body():
            with deferred_signals():
                ran.append(True)

        thread = threading.Thread(target=body)
        thread.start()
        thread.join()
        assert ran == [True]


class TestSignalDuringStandby:
    @pytest.mark.parametrize("count", [1, 2, 3])
    def test_signals_while_making_safe_wait_for_the_read_back(self, worker, device, count):
        """One, two or three kill requests taken by another thread during standby do not cut
        it short: standby and read-back finish, the device reads off, the last commands the
        calibrator received are the standby and its read-back, and one interrupt follows."""
        used, probe = device
        spy = Spy(used, worker)
        cal = Calibrator(spy, "scpi-generic")
        with _sigterm_as_interrupt():
            with pytest.raises(KeyboardInterrupt):  # not a SafetyError: the state is known
                with output_guard(cal):
                    cal.source("dc-voltage", 100.0)
                    cal.output_on()
                    assert probe.query("OUTP?") in ("1", "ON")
                    spy.fire_at = _signals(count)
        assert spy.fire_at == {}  # every signal was sent
        assert spy.sent[-3:] == MAKE_SAFE
        assert "OUTP ON" not in spy.sent[spy.sent.index("OUTP OFF") :]
        assert probe.query("OUTP?") in ("0", "OFF")

    @pytest.mark.parametrize("count", [1, 2, 3])
    def test_signals_while_making_safe_after_an_interrupt(self, worker, device, count):
        """When the block was already interrupted, further signals during standby change
        nothing: the first interrupt propagates, the output reads off."""
        used, probe = device
        spy = Spy(used, worker)
        cal = Calibrator(spy, "scpi-generic")
        with _sigterm_as_interrupt():
            with pytest.raises(KeyboardInterrupt, match="first"):
                with output_guard(cal):
                    cal.output_on()
                    spy.fire_at = _signals(count)
                    raise KeyboardInterrupt("first")
        assert spy.sent[-3:] == MAKE_SAFE
        assert probe.query("OUTP?") in ("0", "OFF")


class _SignalsAtFsync:
    """Replaces ``os.fsync``: sends signals at the chosen fsyncs of a journal line (counted from
    1; the fsyncs of folders, records and certificates are not counted), then syncs."""

    def __init__(self, worker: Worker, real, at: dict[int, int], signum=signal.SIGTERM):
        self.worker, self.real, self.at, self.signum = worker, real, dict(at), signum
        self.calls = 0

    def __call__(self, fd):
        if not os.readlink(f"/proc/self/fd/{fd}").endswith(".jsonl"):
            return self.real(fd)
        self.calls += 1
        for _ in range(self.at.pop(self.calls, 0)):
            self.worker.send(self.signum)
            sum(range(10))
        return self.real(fd)


def _note(n: int) -> dict:
    """A journal document of a kind the journal holds (read back, it is checked against its
    model)."""
    return {"kind": "note", "time": "2026-12-01T09:00:00Z", "point": None, "text": str(n)}


class TestSignalAtJournalFsync:
    @pytest.mark.parametrize("count", [1, 2, 3])
    def test_the_line_and_the_chain_move_on_together(self, tmp_path, worker, monkeypatch, count):
        """Signals taken while a line is fsynced act after the append: the next line gets the
        next sequence number and the chain verifies."""
        journal = Journal(tmp_path / "journal.jsonl")
        journal.append(_note(0))
        monkeypatch.setattr(
            record_mod.os, "fsync", _SignalsAtFsync(worker, record_mod.os.fsync, {1: count})
        )
        with _sigterm_as_interrupt():
            with pytest.raises(KeyboardInterrupt):
                journal.append(_note(1))
        journal.append(_note(2))
        journal.close()
        docs = read_journal(tmp_path / "journal.jsonl").documents
        assert [d["seq"] for d in docs] == [0, 1, 2]
        assert verify_chain(docs) == []


def _edge_run(folder: Path, resource, **given):
    """A whole run of the edge procedure in ``folder``, driving ``resource``."""
    edge = dict(
        runs_dir=folder / "runs",
        procedure=PROCEDURE,
        bench=BENCH,
        readings=READINGS,
        lab=LAB,
        item={"serial": "EDGE-1", "asset": None, "condition": "as new"},
        operator="tester",
        clock=VirtualClock(dt.datetime(2026, 12, 1, 9, tzinfo=dt.timezone.utc)),
        calibrator=resource,
    )
    return build_run(**{**edge, **given})


class _RunOnSpy:
    """A whole run of the edge procedure on the spied simulated calibrator."""

    def __init__(self, tmp_path, worker, device):
        self.tmp_path, self.used, self.probe = tmp_path, *device
        self.spy = Spy(self.used, worker)

    def run(self):
        with _sigterm_as_interrupt():  # as the CLI's process has, around the whole call
            try:
                _edge_run(self.tmp_path, self.spy, uid="e" * 32)
            except BaseException as exc:  # noqa: BLE001 - the test looks at what arrived
                return exc
        return None

    def checks(self, error):
        """The run folder named on the interrupt, the journal verifying, the output off."""
        assert isinstance(error, KeyboardInterrupt), error
        run_dir = error.run_dir
        docs = read_journal(run_dir / "journal.jsonl").documents
        assert verify_chain(docs) == []
        assert docs[-1]["kind"] == "stop"
        assert self.spy.sent[-3:] == MAKE_SAFE
        assert self.probe.query("OUTP?") in ("0", "OFF")
        return run_dir, docs


class TestSignalsInARun:
    @pytest.mark.parametrize("count", [1, 2, 3])
    def test_at_the_fsync_of_the_last_observation(
        self, tmp_path, worker, device, monkeypatch, count
    ):
        """Signals at the fsync of the last reading: the reading is kept once, the stop follows
        it in the chain, the record is written from a verifying journal, the output reads off."""
        run = _RunOnSpy(tmp_path, worker, device)
        # fsyncs: start, three observations, the hazardous-output note, the fourth observation (6).
        monkeypatch.setattr(
            record_mod.os, "fsync", _SignalsAtFsync(worker, record_mod.os.fsync, {6: count})
        )
        run_dir, docs = run.checks(run.run())
        observed = [d["point"] for d in docs if d["kind"] == "observation"]
        assert len(observed) == len(set(observed)) == 4
        assert verified_record(run_dir).run.status in ("complete", "aborted")

    @pytest.mark.parametrize("count", [1, 2, 3])
    def test_while_the_record_is_written(self, tmp_path, worker, device, monkeypatch, count):
        """Ctrl-C while the run is closed acts only once the record is on disk: the record
        verifies and is complete, no temporary file is left, and the interrupt names the run."""
        run = _RunOnSpy(tmp_path, worker, device)
        real = build_mod.write_record

        def write_record(record, path):
            for _ in range(count):
                worker.send(signal.SIGINT)
                sum(range(10))
            return real(record, path)

        monkeypatch.setattr(build_mod, "write_record", write_record)
        run_dir, _ = run.checks(run.run())
        assert verified_record(run_dir).run.status == "complete"
        assert not list(run_dir.glob("*.tmp"))

    def test_after_the_last_reading(self, tmp_path, worker, device):
        """A kill request just after the last reading was shown: every reading is journaled,
        the record is written and verifies, the output reads off."""
        run = _RunOnSpy(tmp_path, worker, device)

        class Console(QuietConsole):
            def result(self, point, entry):
                if point.index + 1 == point.total:
                    worker.send()
                    sum(range(10))

        with _sigterm_as_interrupt():
            try:
                _edge_run(tmp_path, run.spy, console=Console(), uid="f" * 32)
                error = None
            except BaseException as exc:  # noqa: BLE001
                error = exc
        run_dir, docs = run.checks(error)
        assert sum(d["kind"] == "observation" for d in docs) == 4
        assert verified_record(run_dir).points


CHILD = textwrap.dedent("""
    import json, os, signal, sys, threading
    from pathlib import Path
    from verirun import cli
    from verirun.record import journal as record
    from verirun.record import build as closing
    from verirun.bench.calibrator import Calibrator

    where, count, out = sys.argv[1], int(sys.argv[2]), Path(sys.argv[3])
    threading.Thread(target=threading.Event().wait, daemon=True).start()  # a second thread alive
    sent = []

    def fire():
        for _ in range(count):
            os.kill(os.getpid(), signal.SIGTERM)  # to the process: the system picks the thread
            sum(range(10))

    real_write, real_query = Calibrator._write, Calibrator._query
    def _write(self, command):
        sent.append(command)
        if where == "standby" and command == "OUTP OFF" and "VOLT 80.0" in sent and "OUTP ON" in sent[-3:]:
            fire()
        return real_write(self, command)
    replies = []
    def _query(self, command):
        sent.append(command)
        reply = real_query(self, command)
        replies.append((command, reply))
        return reply
    Calibrator._write, Calibrator._query = _write, _query

    real_fsync, calls = record.os.fsync, [0]
    def fsync(fd):  # counting the fsyncs of journal lines only
        if not os.readlink(f"/proc/self/fd/{fd}").endswith(".jsonl"):
            return real_fsync(fd)
        calls[0] += 1
        if where.startswith("fsync-") and calls[0] == int(where[6:]):
            fire()
        return real_fsync(fd)
    record.os.fsync = fsync

    real_record = closing.write_record
    def write_record(doc, path):
        if where == "close":
            fire()
        return real_record(doc, path)
    closing.write_record = write_record

    code = cli.main(sys.argv[4:])
    run_dir = next(Path(sys.argv[4 + sys.argv[4:].index("--runs") + 1]).glob("*"))
    # What the calibrator last answered to the output-state query, before the process ended.
    output = [reply for command, reply in replies if command == "OUTP?"][-1]
    out.write_text(json.dumps({"code": code, "sent": sent, "output": output, "run": str(run_dir)}))
""")  # noqa: E501


class TestRealSignalsInAProcess:
    @pytest.mark.parametrize(
        "where, count",
        [
            ("standby", 2),
            ("standby", 3),  # standby after the hazardous point's reading
            ("fsync-3", 1),
            ("fsync-6", 2),  # at the fsync of the second and of the last reading
            ("close", 1),
            ("close", 2),  # while the record is written
        ],
    )
    def test_sigterm_to_a_verirun_process(self, tmp_path, where, count):
        """Real SIGTERMs to a verirun process with a second thread, at standby, at a journal
        fsync and while the record is written: exit 2 (stopped), the calibrator's last
        commands are the standby and its read-back and the device reads off, the journal
        verifies with each reading once, and the record is written."""
        out = tmp_path / "out.json"
        args = [
            "run",
            str(PROCEDURE),
            "--bench",
            str(BENCH),
            "--readings",
            str(READINGS),
            "--simulate",
            "--serial",
            "EDGE-2",
            "--customer",
            "C",
            "--runs",
            str(tmp_path / "runs"),
            "--reports",
            str(tmp_path / "reports"),
        ]
        proc = subprocess.run(
            [sys.executable, "-c", CHILD, where, str(count), str(out), *args],
            capture_output=True,
            text=True,
            timeout=60,
        )
        assert proc.returncode == 0, proc.stderr
        found = json.loads(out.read_text())
        assert found["code"] == 2, proc.stderr
        assert found["sent"][-3:] == MAKE_SAFE
        assert found["output"] in ("0", "OFF")
        run_dir = Path(found["run"])
        docs = read_journal(run_dir / "journal.jsonl").documents
        assert verify_chain(docs) == []
        observed = [d["point"] for d in docs if d["kind"] == "observation"]
        assert len(observed) == len(set(observed))
        assert (run_dir / "record.json").exists() and not list(run_dir.glob("*.tmp"))
        assert "verirun resume" in proc.stderr or where == "close"

    @pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
    def test_a_signal_while_the_operator_is_at_the_prompt(self, tmp_path, signum):
        """Ctrl-C or SIGTERM while a reading prompt waits (the console's reader thread alive):
        the run stops at once with exit 2, the output in standby, and the resume hint."""

        proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "verirun",
                "run",
                str(PROCEDURE),
                "--bench",
                str(BENCH),
                "--simulate",
                "--serial",
                "PROMPT",
                "--customer",
                "C",
                "--condition",
                "as new",
                "--temperature",
                "23",
                "--humidity",
                "40",
                "--runs",
                str(tmp_path / "runs"),
                "--reports",
                str(tmp_path / "reports"),
            ],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
        )
        proc.stdin.write(b"\n")  # the leads are connected
        proc.stdin.flush()
        read_until(proc, b"reading in V")
        proc.send_signal(signum)
        _, err = proc.communicate(timeout=30)
        assert proc.returncode == 2, err.decode()
        assert "standby" in err.decode() and "verirun resume" in err.decode()
        docs = read_journal(next((tmp_path / "runs").glob("*/journal.jsonl"))).documents
        assert verify_chain(docs) == [] and docs[-1]["kind"] == "stop"


class TestSignalAfterSilence:
    def test_a_signal_during_the_silence_standby_stops_the_run(self, tmp_path, worker, device):
        """A kill request taken while the output goes to standby because the operator was
        silent is not lost: the standby finishes (device off, last commands the read-back)
        and the run stops instead of asking to apply the stimulus again."""
        from rich.console import Console as RichConsole

        from verirun.console import Console
        from verirun.readings import OperatorSilent

        used, probe = device
        spy = Spy(used, worker)
        answers = iter(["", "silent"])

        def typist(prompt):
            answer = next(answers, None)
            if answer == "silent":
                spy.fire_at = _signals(2)  # taken during the standby that follows
                raise OperatorSilent(300.0)
            if answer is None:
                raise AssertionError(f"asked {prompt!r} after the signal")
            return answer

        import io

        console = Console(RichConsole(file=io.StringIO(), width=200), input_func=typist)
        with _sigterm_as_interrupt():
            with pytest.raises(KeyboardInterrupt) as info:
                _edge_run(tmp_path, spy, readings=None, console=console, uid="d" * 32)
        assert spy.sent[-3:] == MAKE_SAFE and probe.query("OUTP?") in ("0", "OFF")
        docs = read_journal(info.value.run_dir / "journal.jsonl").documents
        assert (
            verify_chain(docs) == []
            and docs[-1]["kind"] == "stop"
            and docs[-1]["status"] == "aborted"
        )


class TestAKillRequestWhoseRaiseIsLost:
    def test_the_run_stops_before_the_output_goes_on_again(
        self, tmp_path, worker, device, monkeypatch
    ):
        """A SIGTERM taken inside a callback Python runs for itself (an import's lock, a weak
        reference's finaliser) has its KeyboardInterrupt printed and dropped there. Here the
        handler runs in such a place, while the second point's level is set: the run must
        still stop before the output is switched on for that point, output off, journal whole."""
        from verirun.bench.calibrator import Calibrator as Driver

        run = _RunOnSpy(tmp_path, worker, device)
        real_source, calls = Driver.source, []

        def source(self, *args, **kwargs):
            calls.append(args)
            if len(calls) == 2:
                try:  # as a callback would: the handler's raise goes no further than this
                    signal.raise_signal(signal.SIGTERM)
                except KeyboardInterrupt:
                    pass
            return real_source(self, *args, **kwargs)

        monkeypatch.setattr(Driver, "source", source)
        run_dir, docs = run.checks(run.run())
        assert sum(d["kind"] == "observation" for d in docs) == 1
        assert run.spy.sent.count("OUTP ON") == 1  # only for the first point
        assert docs[-1]["status"] == "aborted" and "SIGTERM" in docs[-1]["reason"]
