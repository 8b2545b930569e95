"""Evaluate one reading against its test point: error, percent of tolerance and verdict.

A thin join of the plan (which carries each point's window) and the pure metrology functions;
the engine, the run record and ``verirun window`` all evaluate through here so that a verdict is
worked out one way only.
"""

from __future__ import annotations

from dataclasses import dataclass

from verirun.metrology import tolerance
from verirun.procedure.plan import TestPoint


@dataclass(frozen=True, kw_only=True)
class Result:
    """The evaluation of one reading.

    ``error`` is in ``error_unit``: the range's unit for a tolerance stated on the value, degrees
    of arc for one stated in degrees, percent of scale length for one stated along the scale.
    """

    reading: float
    error: float
    error_unit: str
    percent_of_tolerance: float | None
    verdict: str


def evaluate(point: TestPoint, reading: float) -> Result:
    """Evaluate ``reading`` at ``point`` by simple acceptance (limits included)."""
    win = point.window
    dev = tolerance.deviation(win, reading, point.range.law)
    statement = point.range.band_at(point.frequency).statement
    if win.domain == "value":
        unit, factor = point.unit, 1.0
    elif isinstance(statement, tolerance.DegreesOfArc):
        unit, factor = "deg", float(point.range.arc)
    else:
        unit, factor = "% of length", 100.0
    verdict = "pass" if win.contains(reading) else "fail"
    return Result(reading=reading, error=dev.error * factor, error_unit=unit,
                  percent_of_tolerance=dev.percent_of_tolerance, verdict=verdict)
