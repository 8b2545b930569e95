"""Replay files are checked whole before the calibrator is sent anything.

Each file below has one kind of fault (or all of them); the run must refuse it with every
problem as ``file:line`` while the fault-injecting VISA wrapper records that not one command
reached the calibrator, and no run folder is made.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from runkit import build_run

from verirun.bench.calibrator import Calibrator
from verirun.bench.config import load_bench
from verirun.errors import ProcedureError
from verirun.procedure.load import load_procedure
from verirun.procedure.plan import plan
from verirun.readings import ScriptedReadings, VirtualMeter

DATA = Path(__file__).resolve().parent.parent / "data"
GOOD = (DATA / "bench-meter-readings.csv").read_text(encoding="utf-8")


def refused(tmp_path, bench, readings) -> list[str]:
    """Run the test procedure with ``readings`` on the faulty bench; return the problems."""
    with pytest.raises(ProcedureError) as info:
        build_run(
            runs_dir=tmp_path / "runs",
            procedure=DATA / "bench-meter.yaml",
            bench=DATA / "bench-test.yaml",
            readings=readings,
            lab={"name": "Test lab"},
            item="S-1",
            operator="tester",
            calibrator=bench.resource,
        )
    assert bench.resource.sent == [], "a command reached the calibrator"
    assert not (tmp_path / "runs").exists()
    return info.value.problems


def csv_with(tmp_path, text: str) -> ScriptedReadings:
    path = tmp_path / "readings.csv"
    path.write_text(text, encoding="utf-8")
    return ScriptedReadings(path)


class TestReadingsFileRefusedBeforeAnythingIsSent:
    def test_decimal_comma_row(self, tmp_path, bench):
        """`dcv-10,5,5,1` (5,1 with a decimal comma) is four fields, refused at its line, not
        replayed as 5 V."""
        problems = refused(
            tmp_path, bench, csv_with(tmp_path, GOOD.replace("dcv-10,5 V,5\n", "dcv-10,5,5,1\n"))
        )
        assert any(
            p.startswith(f"{tmp_path / 'readings.csv'}:3: 4 fields") and "decimal" in p
            for p in problems
        )

    def test_quoted_decimal_comma_refused_as_at_the_prompt(self, tmp_path, bench):
        """A quoted "5,1" is refused with the prompt's words: use a decimal point."""
        problems = refused(
            tmp_path,
            bench,
            csv_with(tmp_path, GOOD.replace("dcv-10,5 V,5\n", 'dcv-10,5 V,"5,1"\n')),
        )
        assert problems == [
            f"{tmp_path / 'readings.csv'}:3: reading: '5,1': use a decimal point, not a comma"
        ]

    def test_missing_row(self, tmp_path, bench):
        """A point with no row is named by step, with the row to add."""
        problems = refused(
            tmp_path, bench, csv_with(tmp_path, GOOD.replace("dca-50m,10 mA,10.25\n", ""))
        )
        assert len(problems) == 1 and "no reading for step 5 (dca-50m at 10 mA)" in problems[0]
        assert "add a row dca-50m,10 mA,READING" in problems[0]

    def test_bad_value_wrong_unit_extra_row_mistyped_range_and_duplicate_all_at_once(
        self, tmp_path, bench
    ):
        """Every kind of fault in one file is reported in one pass, in line order."""
        text = (
            GOOD.replace("dcv-10,10 V,9.9", "dcv-10,10 V,abc")
            .replace("dca-50m,50 mA,49.5 mA", "dca-50m,50 mA,49.5 V")
            .replace("ohm-x1,12 ohm,12", "ohm-xl,12 ohm,12")
            + "dcv-10,7 V,7\n"
            + "dcv-10,2 V,2.05\n"
        )
        problems = refused(tmp_path, bench, csv_with(tmp_path, text))
        name = tmp_path / "readings.csv"
        assert [p.split(": ", 1)[0] for p in problems] == [
            f"{name}:4",
            f"{name}:7",
            f"{name}:9",
            f"{name}:11",
            f"{name}:12",
            f"{name}:13",
        ]
        assert "not a number" in problems[0]
        assert "in volts, expected amperes" in problems[1]
        assert "no range 'ohm-xl'" in problems[2]
        assert "no point at 7 V" in problems[3]
        assert "left over" in problems[4] and "line 2" in problems[4]
        assert "no reading for step 8 (ohm-x1 at 12 Ω)" in problems[5]

    def test_a_reading_beyond_the_scale(self, tmp_path, bench):
        """A reading the prompt would refuse (past the scale's stop) is refused beforehand."""
        problems = refused(
            tmp_path, bench, csv_with(tmp_path, GOOD.replace("dcv-10,10 V,9.9", "dcv-10,10 V,12"))
        )
        assert (
            len(problems) == 1
            and ":4: reading:" in problems[0]
            and "beyond the ends" in problems[0]
        )

    def test_header_missing_a_column(self, tmp_path, bench):
        """A file whose header lacks a column says which, at line 1, before anything is sent."""
        calibrator = Calibrator(bench.resource, "scpi-generic")
        with pytest.raises(ProcedureError, match=r":1: missing column\(s\) reading"):
            csv_with(tmp_path, "range,at,value\n")
        del calibrator
        assert bench.resource.sent == []


class TestReadingsFileMatching:
    def test_good_file_checks_clean(self):
        """The test readings file has a row for every point and nothing more."""
        points = plan(
            load_procedure(DATA / "bench-meter.yaml"), load_bench(DATA / "bench-test.yaml")
        )
        assert ScriptedReadings(DATA / "bench-meter-readings.csv").check(points) == []

    def test_bare_numbers_in_the_unit_the_prompt_shows(self, tmp_path):
        """On a 50 mA range a bare 10.25 is 10.25 mA (the prompt shows mA), in both columns."""
        points = plan(load_procedure(DATA / "bench-meter.yaml"))
        readings = csv_with(tmp_path, GOOD.replace("dca-50m,10 mA,10.25", "dca-50m,10,10.25"))
        assert readings.check(points) == []
        point = next(p for p in points if p.range.id == "dca-50m")
        assert readings.take(point).value == pytest.approx(10.25e-3)

    def test_rows_for_points_already_done_are_not_problems_on_resume(self):
        """Resuming with the file the run started with: rows of finished points are not left
        over."""
        points = plan(load_procedure(DATA / "bench-meter.yaml"))
        readings = ScriptedReadings(DATA / "bench-meter-readings.csv")
        assert readings.check(points[4:], points) == []


class TestVirtualMeterFile:
    def write(self, tmp_path, ranges: str):
        path = tmp_path / "meter.yaml"
        path.write_text(f"format: 1\nmeter: test meter\nranges:\n{ranges}", encoding="utf-8")
        return VirtualMeter(path)

    def test_mistyped_range_missing_range_and_wrong_offset_unit(self, tmp_path, bench):
        """A range the procedure lacks, a range without a model, and an offset in the wrong unit
        are each reported at their line before anything is sent."""
        meter = self.write(
            tmp_path,
            "  dcv-10: {gain: 1.01}\n  dcv-100: {offset: 0.2 A}\n"
            "  dca-50m: {gain: 1}\n  ohm-xl: {centre: 12.5 ohm}\n",
        )
        problems = refused(tmp_path, bench, meter)
        name = tmp_path / "meter.yaml"
        assert (
            f"{name}:5: ranges.dcv-100.offset: '0.2 A' is in amperes, expected volts; write it in V"
            in problems
        )
        assert any(
            p.startswith(f"{name}:7: ranges.ohm-xl: the procedure has no range 'ohm-xl'")
            for p in problems
        )
        assert any("no model for range 'ohm-x1'" in p for p in problems)


class TestRepeatedPoints:
    def test_a_point_repeated_in_the_procedure_takes_its_rows_in_file_order(self, tmp_path):
        """Up-scale then down-scale at 5 V: two rows for dcv-10 at 5 V are taken in file order, one
        per step; a third is left over."""
        text = (
            (DATA / "bench-meter.yaml")
            .read_text(encoding="utf-8")
            .replace("points: [2 V, 5 V, 10 V]", "points: [2 V, 5 V, 10 V, 5 V]")
        )
        from verirun.procedure.load import load_procedure_text

        points = plan(load_procedure_text(text, "p.yaml"))
        good = GOOD.replace("dcv-10,10 V,9.9\n", "dcv-10,10 V,9.9\ndcv-10,5 V,5.1\n")
        readings = csv_with(tmp_path, good)
        assert readings.check(points) == []
        taken = [readings.take(p).typed for p in points[:4]]
        assert taken == ["2.05", "5", "9.9", "5.1"]
        extra = csv_with(tmp_path, good + "dcv-10,5 V,5.2\n")
        problems = extra.check(points)
        assert len(problems) == 1 and ":12: a row left over" in problems[0]


class TestNominalNamedByARow:
    """A replay row names the first nominal of its range, in plan order, that equals its value
    or lies within a relative 1e-9 of it, as ``math.isclose`` (Python's standard library)
    decides; the look-up among a range's many nominals gives exactly what a scan of them all
    gives."""

    @staticmethod
    def _scan(nominals: list[float], at: float) -> float | None:
        return next(
            (n for n in nominals if n == at or math.isclose(n, at, rel_tol=1e-9, abs_tol=1e-15)),
            None,
        )

    def test_the_same_value_written_two_ways(self):
        """0.3 and 3 × 0.1 (0.30000000000000004), one value written two ways: each names the first
        listed."""
        from verirun.readings import _Nominals

        assert 3 * 0.1 != 0.3
        assert _Nominals([3 * 0.1, 0.3]).named_by(0.3) == 3 * 0.1
        assert _Nominals([0.3, 3 * 0.1]).named_by(3 * 0.1) == 0.3
        assert _Nominals([0.3, 0.5]).named_by(0.4) is None
        assert _Nominals([0.0, 1e-16]).named_by(0.0) == 0.0

    @settings(max_examples=300, deadline=None)
    @given(
        st.lists(
            st.floats(-1e3, 1e3, allow_nan=False, width=64).map(lambda x: round(x, 3)),
            min_size=1,
            max_size=30,
            unique=True,
        ),
        st.integers(0, 29),
        st.sampled_from([0.0, 1e-12, -1e-12, 5e-10, 2e-9, 1e-6]),
    )
    def test_the_look_up_gives_what_a_scan_gives(self, nominals, pick, nudge):
        """Over random nominals, with near twins (3e-10 apart, both within reach of a row),
        each row's value a nominal nudged by up to 1e-6 of it."""
        from verirun.readings import _Nominals

        twins = [n * (1 + 3e-10) for n in nominals[:3]]
        nominals = list(dict.fromkeys(nominals + twins))
        at = nominals[pick % len(nominals)] * (1 + nudge)
        assert _Nominals(nominals).named_by(at) == self._scan(nominals, at)
