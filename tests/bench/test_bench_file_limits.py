"""Bench file values that would let any instrument through or cannot be waited for."""

from __future__ import annotations

from pathlib import Path

import pytest

from verirun.bench.config import load_bench, load_bench_text
from verirun.errors import ProcedureError

BENCH = Path(__file__).resolve().parent.parent / "data" / "edge" / "bench.yaml"


def problems(text):
    with pytest.raises(ProcedureError) as err:
        load_bench_text(text, "b.yaml")
    return err.value.problems


def line_of(text, key):
    return next(
        number for number, line in enumerate(text.splitlines(), 1) if line.strip().startswith(key)
    )


class TestIdentity:
    @pytest.mark.parametrize("value", ['""', '"   "'])
    def test_empty_identity_is_refused(self, value):
        """An empty identity would match every instrument's answer, so it is refused at its line."""
        text = BENCH.read_text().replace(
            "identity: Verirun Simulation,SIM-CAL-1", f"identity: {value}"
        )
        found = problems(text)
        assert found == [
            f"b.yaml:{line_of(text, 'identity:')}: calibrator.identity: is empty, which any"
            " instrument would match; give the start of the calibrator's *IDN? answer"
        ]


class TestTimes:
    @pytest.mark.parametrize(
        "key, value, where",
        [
            ("settle: 0 s", "settle: 1e300 s", "settle"),
            ("settle: 0 s", "settle: 3601 s", "settle"),
            ("timeout: 2 s", "timeout: 1e300 s", "calibrator.timeout"),
        ],
    )
    def test_waits_too_long_to_be_meant_are_refused(self, key, value, where):
        """A settle time over an hour (1e300 s would overflow the wait) or a timeout over ten
        minutes is refused naming the file, line and field."""
        text = BENCH.read_text().replace(key, value)
        found = problems(text)
        assert len(found) == 1
        assert found[0].startswith(f"b.yaml:{line_of(text, value.split(':')[0] + ':')}: {where}: ")
        assert "is outside" in found[0]

    def test_limits_themselves_are_accepted(self):
        """An hour of settling and ten minutes of timeout are the largest accepted."""
        text = (
            BENCH.read_text()
            .replace("settle: 0 s", "settle: 3600 s")
            .replace("timeout: 2 s", "timeout: 600 s")
        )
        bench = load_bench_text(text, "b.yaml")
        assert (bench.settle_s, bench.timeout_s) == (3600.0, 600.0)

    def test_the_edge_bench_loads(self):
        """The edge tests' bench file is valid."""
        assert load_bench(BENCH).settle_s == 0.0
