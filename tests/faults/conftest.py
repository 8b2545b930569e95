"""Fault injection for bench tests: a VISA resource wrapper that fails on cue, and a demo run.

:class:`FaultyResource` wraps a real (simulated) VISA resource and passes every exchange
through, except the ones a test picks: on the n-th command matching a rule, or after a number of
commands, it can time out, lose the connection, queue an instrument error for the next
error-queue query, or answer a query with text of its own. A fault can be one-shot (the link
recovers) or lasting (every later command fails the same way, so even standby cannot be sent).
"""

from __future__ import annotations

import errno
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import pytest
from runkit import build_run, demo_run, sim_resources

from verirun.bench.config import load_bench
from verirun.conduct import demo_files
from verirun.lab import load_lab
from verirun.procedure.load import load_procedure
from verirun.procedure.plan import plan
from verirun.readings import ScriptedReadings

#: The query that takes one entry off the error queue (the scpi-generic profile's).
ERROR_QUERY = "SYST:ERR?"


def timeout_error():
    """The error pyvisa raises when an instrument does not answer in time."""
    import pyvisa

    return pyvisa.errors.VisaIOError(pyvisa.constants.StatusCode.error_timeout)


def lost_connection_error():
    """The error a socket or serial link raises when the other end goes away."""
    return ConnectionResetError(errno.ECONNRESET, "Connection reset by peer")


@dataclass
class Rule:
    """One fault: what triggers it and what it does.

    ``match`` is an exact command, a predicate, or ``None`` for any command; the rule fires on
    the ``nth`` matching command (1-based). ``action`` is ``"timeout"``, ``"lost"``, ``"queue"``
    (the command goes through, and the next error-queue query answers ``answer``) or
    ``"answer"`` (a query is answered with ``answer`` instead of the device's reply). With
    ``lasting``, every command after the trigger fails with the same error; with ``deliver``
    as well, the triggering command itself still reaches the device and only the ones after it
    fail (the link drops just after the instrument acted on it).
    """

    match: str | Callable[[str], bool] | None
    action: str
    nth: int = 1
    answer: str | None = None
    lasting: bool = False
    deliver: bool = False
    seen: int = 0
    fired: bool = False

    def matches(self, command: str) -> bool:
        if self.match is None:
            return True
        if callable(self.match):
            return self.match(command)
        return command == self.match


@dataclass
class FaultyResource:
    """A VISA resource that passes exchanges to ``inner`` except where a rule says otherwise."""

    inner: object
    rules: list[Rule] = field(default_factory=list)
    sent: list[str] = field(default_factory=list)
    injected: list[tuple[int, str, str]] = field(
        default_factory=list
    )  # (position, command, action)
    _pending_answers: list[str] = field(default_factory=list)
    _broken: Callable[[], BaseException] | None = None
    closed: bool = False

    # --- building faults -----------------------------------------------------------------
    def on(
        self,
        match,
        action: str,
        *,
        nth: int = 1,
        answer: str | None = None,
        lasting: bool = False,
        deliver: bool = False,
    ) -> "FaultyResource":
        """Add a fault on the ``nth`` command matching ``match``."""
        if deliver and not (lasting and action in ("timeout", "lost")):
            raise ValueError("deliver is for a lasting timeout or lost connection")
        self.rules.append(
            Rule(
                match=match, action=action, nth=nth, answer=answer, lasting=lasting, deliver=deliver
            )
        )
        return self

    def after(self, count: int, action: str, *, lasting: bool = False) -> "FaultyResource":
        """Add a fault on the command after the first ``count`` commands."""
        return self.on(None, action, nth=count + 1, lasting=lasting)

    # --- the resource surface the driver uses --------------------------------------------
    @property
    def timeout(self):
        return getattr(self.inner, "timeout", None)

    def write(self, command: str):
        return self._exchange(command, query=False)

    def query(self, command: str) -> str:
        return self._exchange(command, query=True)

    def close(self) -> None:
        self.closed = True
        self.inner.close()

    # --- machinery -----------------------------------------------------------------------
    def _exchange(self, command: str, *, query: bool):
        position = len(self.sent)
        self.sent.append(command)
        if self._broken is not None:
            self.injected.append((position, command, "still broken"))
            raise self._broken()
        for rule in self.rules:
            if rule.fired or not rule.matches(command):
                continue
            rule.seen += 1
            if rule.seen < rule.nth:
                continue
            rule.fired = True
            self.injected.append((position, command, rule.action))
            if rule.action in ("timeout", "lost"):
                make = timeout_error if rule.action == "timeout" else lost_connection_error
                if rule.lasting:
                    self._broken = make
                if rule.deliver:
                    break
                raise make()
            if rule.action == "queue":
                self._pending_answers.append(rule.answer)
                break
            if rule.action == "answer":
                self.inner.query(command) if query else self.inner.write(command)
                return rule.answer
            raise ValueError(f"unknown fault action {rule.action!r}")
        if query and command == ERROR_QUERY and self._pending_answers:
            self.inner.query(command)  # keep the device's own queue in step
            return self._pending_answers.pop(0)
        return self.inner.query(command) if query else self.inner.write(command)


@dataclass
class Bench:
    """A fresh simulated calibrator: the faulty wrapper the driver uses, and a raw probe handle."""

    resource: FaultyResource
    probe: object

    def output_reads(self) -> str:
        """The output state as the device itself reports it (bypassing driver and wrapper)."""
        return self.probe.query("OUTP?").strip()


def open_bench(folder: Path) -> Bench:
    """A simulated calibrator of its own (a fresh copy of the device file in ``folder``)."""
    device, probe = sim_resources(folder, count=2, timeout=200)
    return Bench(resource=FaultyResource(device), probe=probe)


@dataclass
class RunResult:
    """What a run on the faulty bench left behind, and the bench it ran on."""

    error: BaseException | None
    run_dir: Path | None
    documents: list[dict]
    bench: Bench

    @property
    def resource(self) -> FaultyResource:
        return self.bench.resource

    @property
    def observations(self) -> list[dict]:
        return [d for d in self.documents if d["kind"] == "observation"]

    @property
    def stop(self) -> dict | None:
        stops = [d for d in self.documents if d["kind"] == "stop"]
        return stops[-1] if stops else None


@dataclass(frozen=True)
class DemoInputs:
    """The demo procedure, bench file and lab profile, loaded once (they are frozen values)."""

    procedure: object
    bench: object
    lab: object
    readings_csv: Path


@pytest.fixture(scope="session")
def demo_inputs() -> DemoInputs:
    """The demo's procedure, bench and lab, and the scripted readings of tests/data."""
    with demo_files() as demo:
        return DemoInputs(
            procedure=load_procedure(demo["procedure"]),
            bench=load_bench(demo["bench"]),
            lab=load_lab(demo["lab"]),
            readings_csv=Path(__file__).resolve().parent.parent / "data" / "qm40-readings.csv",
        )


@pytest.fixture(scope="session")
def demo_plan(demo_inputs):
    """The test points of the demo procedure on the demo bench, in run order."""
    return plan(demo_inputs.procedure, demo_inputs.bench)


@pytest.fixture(scope="session")
def fault_run(tmp_path_factory, demo_inputs):
    """Run the demo on a fresh faulty bench; return what reached the caller and the journal.

    Call it as ``fault_run(setup, readings=None)``: ``setup(resource)`` installs the faults on
    the :class:`FaultyResource`; ``readings``, when given, takes the scripted readings of
    tests/data/qm40-readings.csv and returns the source to use instead.
    """
    opened: list[Bench] = []

    def run(
        setup: Callable[[FaultyResource], object] | None = None, readings: Callable | None = None
    ) -> RunResult:
        folder = tmp_path_factory.mktemp("fault-run")
        bench = open_bench(folder)
        opened.append(bench)
        if setup is not None:
            setup(bench.resource)
        scripted = ScriptedReadings(demo_inputs.readings_csv)
        source = readings(scripted) if readings is not None else scripted
        runs = folder / "runs"
        error = None
        try:
            build_run(
                **{
                    **demo_run(),
                    "procedure": demo_inputs.procedure,
                    "bench": demo_inputs.bench,
                    "lab": demo_inputs.lab.lab.model_dump(mode="json"),
                    "readings": source,
                },
                runs_dir=runs,
                calibrator=bench.resource,
            )
        except BaseException as exc:  # noqa: BLE001 - the test inspects whatever arrived
            error = exc
        folders = sorted(p for p in runs.glob("*") if p.is_dir()) if runs.exists() else []
        run_dir = folders[-1] if folders else None
        documents = []
        if run_dir is not None and (run_dir / "journal.jsonl").exists():
            for line in (run_dir / "journal.jsonl").read_text(encoding="utf-8").splitlines():
                if line.strip():
                    documents.append(json.loads(line))
        return RunResult(error=error, run_dir=run_dir, documents=documents, bench=bench)

    yield run
    for bench in opened:
        bench.probe.close()


@pytest.fixture
def bench(tmp_path) -> Bench:
    """A fresh faulty simulated calibrator, for tests of the wrapper itself."""
    made = open_bench(tmp_path)
    yield made
    made.probe.close()
