"""The virtual meter writes what a person reads off the scale, to the range's readability.

Expected readings are worked by hand from the scale laws: a linear scale's value is
``low + f (high - low)``; on a series ohms scale the deflection is ``θ = arc Rc / (Rc + Rx)``
and the value at ``θ`` is ``Rx = Rc (arc - θ) / θ`` (both derived from f = Rc/(Rc+Rx)).
"""

from __future__ import annotations

import dataclasses
import math
from decimal import ROUND_FLOOR, Decimal
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from verirun.errors import ProcedureError
from verirun.evaluation import evaluate
from verirun.procedure.load import load_procedure, load_procedure_text
from verirun.procedure.plan import plan
from verirun.readings import VirtualMeter, read_off_scale
from verirun.units import parse_value

DATA = Path(__file__).resolve().parents[1] / "data"

PROCEDURE = (DATA / "virtual-meter-procedure.yaml").read_text(encoding="utf-8")

RANGES = {r.id: r for r in load_procedure_text(PROCEDURE, "proc.yaml").ranges}
# A procedure must state each range's readability; a range without one is made here directly,
# for the writing of a value when none is known.
RANGES["v-none"] = dataclasses.replace(
    RANGES["v-deg"], id="v-none", resolution=None, resolution_domain=None
)


def at_degrees(theta: float, centre: float, arc: float = 90.0) -> float:
    """The resistance at ``theta`` degrees of a series ohms scale: Rc (arc - θ) / θ."""
    return centre * (arc - theta) / theta


class TestReadOffAnOhmsScale:
    def test_centre_scale_reads_the_shortest_value_on_the_mark(self):
        """A pointer at 45.556° is read at the 45.5° mark; the mark's cell 45.25°..45.75° holds
        15.475..15.823 Ω, in which no one- or two-digit value lies (15 and 16 fall outside) and
        15.6 is the nearest three-digit one: it is written 15.6 Ω, not 15.65 or 15.648 Ω."""
        pointer = at_degrees(90 * 16.4 / 32.4, 16.0)  # 45.556°: a 16.4 Ω real centre at 16 Ω
        assert read_off_scale(pointer, RANGES["ohm"]) == "15.6 Ω"
        assert at_degrees(45.75, 16.0) < 15.6 < at_degrees(45.25, 16.0)
        assert not at_degrees(45.75, 16.0) < 15.0 < at_degrees(45.25, 16.0)
        assert not at_degrees(45.75, 16.0) < 16.0 < at_degrees(45.25, 16.0)

    def test_near_the_open_end_one_digit_is_all_there_is_to_read(self):
        """At the 3° mark of a 16 kΩ centre scale one 0.5° cell spans 427 kΩ (3.25°) to 508 kΩ
        (2.75°), so the mark reads 500 kΩ, although the law puts 464 kΩ exactly on it."""
        pointer = at_degrees(90 * 18.5 / 518.5, 16000.0)  # 3.211°
        assert read_off_scale(pointer, RANGES["ohm-k"]) == "500 kΩ"
        assert at_degrees(3.0, 16000.0) == pytest.approx(464000.0)

    def test_full_deflection_reads_zero(self):
        """Within a quarter degree of full deflection the pointer is on the 0 Ω mark."""
        assert read_off_scale(0.01, RANGES["ohm"]) == "0 Ω"  # θ = 90 × 16/16.01 = 89.94°

    def test_the_infinity_mark_has_no_value(self):
        """Within a quarter degree of the open end the pointer is on ∞: no value is written."""
        assert read_off_scale(at_degrees(0.2, 16.0), RANGES["ohm"]) is None
        assert read_off_scale(math.inf, RANGES["ohm"]) is None

    @settings(max_examples=300, deadline=None)
    @given(theta=st.floats(min_value=0.3, max_value=89.7))
    def test_written_value_is_on_the_mark_and_shortest(self, theta):
        """Whatever the pointer's position, the written value lies within a quarter degree of the
        mark read (so reading the value back finds the same mark), and no value with one digit
        fewer does."""
        rng = RANGES["ohm"]
        text = read_off_scale(at_degrees(theta, 16.0), rng)
        mark = round(theta / 0.5) * 0.5
        if text is None:
            assert mark == 0.0
            return
        value = parse_value(text, "Ω")
        position = 90 * rng.law.fraction(value)
        assert abs(position - mark) < 0.25
        digits = len(Decimal(text.split()[0]).normalize().as_tuple().digits)
        if value == 0 or digits == 1:
            return
        exact = Decimal(repr(value))
        quantum = Decimal(1).scaleb(exact.adjusted() - digits + 2)
        below = (exact / quantum).to_integral_value(rounding=ROUND_FLOOR) * quantum
        for shorter in (below, below + quantum):
            assert abs(90 * rng.law.fraction(float(shorter)) - mark) >= 0.25


class TestReadOffALinearScale:
    def test_value_resolution_writes_the_multiple(self):
        """29.55 mA read to 0.25 mA is the 118th step: 29.5 mA, not 29.55 or 29.50 mA."""
        assert read_off_scale(0.02955, RANGES["ma"]) == "29.5 mA"
        assert read_off_scale(0.006018, RANGES["ma"]) == "6 mA"  # 24.07 steps -> 24 × 0.25 mA

    def test_degree_resolution_on_a_linear_scale(self):
        """5.04 V on a 10 V, 90° scale is at 45.36°, read on the 45° mark, whose 1° cell holds
        4.944..5.056 V: the shortest value there is 5 V."""
        assert read_off_scale(5.04, RANGES["v-deg"]) == "5 V"

    def test_without_readability_four_digits(self):
        """A range with no stated readability is written to four significant digits."""
        assert read_off_scale(5.04321, RANGES["v-none"]) == "5.043 V"


# The demo's virtual meter at each point of the demo procedure, worked from its file's errors:
# dcv-6: 1.012 x - 0.02 V to 0.05 V; dcv-30: 1.015 x to 0.25 V; dca-30m: 0.985 x to 0.25 mA;
# acv-30: 0.975 x + 0.3 V to 0.25 V; ohms: θ = 90 Rc'/(Rc' + Rx) with Rc' = 16.4 Ω or 18.5 kΩ,
# read on the nearest 0.5° mark of the scale marked for 16 Ω or 16 kΩ.
DEMO_READINGS = [
    "1.2 V",  # 1.1944 V = 23.9 steps of 0.05 V -> 24
    "2.4 V",  # 2.4088 V -> 48.2 -> 48
    "3.6 V",  # 3.6232 V -> 72.5 (72.464) -> 72
    "4.85 V",  # 4.8376 V -> 96.8 -> 97
    "6.05 V",  # 6.052 V -> 121.0 -> 121
    "6 V",  # 6.09 V = 24.4 steps of 0.25 V -> 24
    "15.25 V",  # 15.225 V -> 60.9 -> 61
    "30.5 V",  # 30.45 V -> 121.8 -> 122
    "6 mA",  # 5.91 mA -> 23.6 -> 24 steps of 0.25 mA
    "14.75 mA",  # 14.775 mA -> 59.1 -> 59
    "29.5 mA",  # 29.55 mA -> 118.2 -> 118
    "6.25 V",  # 6.15 V -> 24.6 -> 25
    "15 V",  # 14.925 V -> 59.7 -> 60
    "29.5 V",  # 29.55 V -> 118.2 -> 118
    # θ = 90 × 16.4/20.4 = 72.35° -> 72.5°; cell 3.794..3.931 Ω; 3.8 and 3.9 in, 3.9 nearer
    "3.9 Ω",
    "15.6 Ω",  # θ = 45.56° -> 45.5°; cell 15.475..15.823 Ω
    "62 Ω",  # θ = 90 × 16.4/80.4 = 18.36° -> 18.5°; cell 60.8..62.9 Ω; 62 nearer than 61
    "3.5 kΩ",  # θ = 90 × 18.5/22.5 = 74° exactly; cell 3.394..3.525 kΩ; 3.5 nearer than 3.4
    "13.7 kΩ",  # θ = 90 × 18.5/34.5 = 48.26° -> 48.5°; cell 13.54..13.84 kΩ; 13.7 nearer
    "500 kΩ",  # θ = 90 × 18.5/518.5 = 3.21° -> 3°; cell 427.1..507.6 kΩ
]


class TestTheDemoMeter:
    def test_each_reading_of_the_demo(self, demo_procedure_path):
        """The demo's virtual meter gives the hand-worked reading at each of the 20 points."""
        meter = VirtualMeter(demo_procedure_path.parent / "virtual-meter.yaml")
        points = plan(load_procedure(demo_procedure_path))
        assert [meter.take(p).typed for p in points] == DEMO_READINGS

    def test_one_point_fails_and_one_window_is_open(self, demo_procedure_path):
        """The 16 kΩ point fails (13.7 kΩ at 48.48° is 3.48° from 45°, beyond 3°), and the
        500 kΩ window is unbounded above (θ0 = 90 × 16/516 = 2.79° < 3°) and its reading passes."""
        meter = VirtualMeter(demo_procedure_path.parent / "virtual-meter.yaml")
        points = plan(load_procedure(demo_procedure_path))
        verdicts = {p.key: evaluate(p, meter.take(p).value).verdict for p in points}
        assert [k for k, v in verdicts.items() if v != "pass"] == ["ohm-x1k@16kohm"]
        far = next(p for p in points if p.key == "ohm-x1k@500kohm")
        assert math.isinf(far.window.high) and verdicts[far.key] == "pass"
        assert far.window.low == pytest.approx(at_degrees(1440 / 516 + 3, 16000.0))  # 232.67 kΩ

    def test_pointer_on_the_infinity_mark_is_an_error(self, tmp_path, demo_procedure_path):
        """A modelled pointer that ends on the ∞ mark is a clear error, not a reading."""
        path = tmp_path / "meter.yaml"
        path.write_text(
            "format: 1\nmeter: m\nranges:\n  ohm-x1: {centre: 0.01 ohm}\n", encoding="utf-8"
        )
        meter = VirtualMeter(path)
        point = next(
            p for p in plan(load_procedure(demo_procedure_path)) if p.key == "ohm-x1@64ohm"
        )
        with pytest.raises(ProcedureError, match="sits at infinity"):
            meter.take(point)
