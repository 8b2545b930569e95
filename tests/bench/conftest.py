"""Fixtures for bench tests: a scripted-exchange resource and a fresh simulated calibrator."""

from __future__ import annotations

import pytest

from verirun.bench import Calibrator
from verirun.bench.sim import SIM_RESOURCE, sim_library


class ProtocolViolation(AssertionError):
    """The driver sent something the test did not expect."""


class ExpectedProtocol:
    """A resource that accepts exactly the listed exchanges, in order.

    Each pair is ``(command, reply)``: ``reply`` ``None`` expects a write, a string expects a
    query answered with it, and an exception instance is raised when the command arrives.
    """

    def __init__(self, pairs):
        self.pending = list(pairs)
        self.violations: list[str] = []
        self.closed = False
        self.timeout = 200

    def write(self, command):
        return self._take(command, query=False)

    def query(self, command):
        return self._take(command, query=True)

    def close(self):
        self.closed = True

    def _take(self, command, *, query):
        kind = "query" if query else "write"
        if not self.pending:
            return self._violate(f"unexpected {kind} {command!r}: no more exchanges expected")
        expected, reply = self.pending.pop(0)
        if isinstance(reply, BaseException):
            if command != expected:
                return self._violate(f"expected {expected!r}, got {kind} {command!r}")
            raise reply
        if command != expected or (reply is None) == query:
            want = "write" if reply is None else "query"
            return self._violate(f"expected {want} {expected!r}, got {kind} {command!r}")
        return reply

    def _violate(self, text):
        self.violations.append(text)
        raise ProtocolViolation(text)


@pytest.fixture
def expect():
    """Build an :class:`ExpectedProtocol`; at teardown every exchange must have happened, and no
    other."""
    made = []

    def build(pairs):
        made.append(ExpectedProtocol(pairs))
        return made[-1]

    yield build
    for fake in made:
        assert not fake.violations, fake.violations
        assert not fake.pending, f"exchanges never made: {fake.pending}"


@pytest.fixture
def sim(tmp_path):
    """A calibrator driver on a fresh copy of the simulated device, with 200 ms timeouts."""
    calibrator = Calibrator.open(
        sim_library(tmp_path), SIM_RESOURCE, "scpi-generic", timeout_ms=200
    )
    yield calibrator
    calibrator.close()


@pytest.fixture
def custom_profile(tmp_path):
    """Write a changed copy of the packaged scpi-generic profile and return its path."""
    from importlib.resources import files

    import yaml

    def build(change, name="custom.yaml"):
        data = yaml.safe_load(
            (files("verirun.bench") / "profiles" / "scpi-generic.yaml").read_text("utf-8")
        )
        change(data)
        path = tmp_path / name
        path.write_text(yaml.safe_dump(data, sort_keys=False), encoding="utf-8")
        return path

    return build
