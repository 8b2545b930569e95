"""Evaluate one reading against its test point: error, percent of tolerance and verdict.

A thin join of the plan (which carries each point's window) and the pure metrology functions;
the engine, the run record and ``verirun window`` all evaluate through here so that a verdict is
worked out one way only.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from verirun.metrology import decision, tolerance
from verirun.procedure.plan import TestPoint


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
class Result:
    """The evaluation of one reading.

    ``error`` and ``expanded`` are in ``error_unit``: the range's unit for a tolerance stated on
    the value, degrees of arc for one stated in degrees, percent of scale length for one stated
    along the scale. ``expanded_value`` is the expanded uncertainty carried into the range's
    unit at the nominal; ``acceptance`` the acceptance limits in the range's unit (``None`` when
    the rule leaves no acceptance zone). ``*_pct`` are percentages of the tolerance half-width,
    measured from the nominal in the tolerance's own domain.
    """

    reading: float
    error: float
    error_unit: str
    percent_of_tolerance: float | None
    verdict: str
    expanded: float
    expanded_value: float
    k: float
    tur: float | None
    conformance: float
    acceptance: tuple[float, float] | None
    expanded_pct: float | None
    accept_low_pct: float | None
    accept_high_pct: float | None


def error_unit(point: TestPoint) -> tuple[str, float]:
    """The unit errors at ``point`` are reported in, and the factor from the tolerance's domain."""
    if point.window.domain == "value":
        return point.unit, 1.0
    if isinstance(point.statement, tolerance.DegreesOfArc):
        return "deg", float(point.range.arc)
    return "% of length", 100.0


def evaluate(point: TestPoint, reading: float) -> Result:
    """Evaluate ``reading`` at ``point`` under the procedure's decision rule."""
    win = point.window
    law = point.range.law
    dev = tolerance.deviation(win, reading, law)
    unit, factor = error_unit(point)
    judged = decision.judge(point.rule, window=win, law=law, budget=point.budget, reading=reading)
    half = win.half_width
    centre = win.nominal if win.domain == "value" else law.fraction(win.nominal)
    zone = judged.outcome.acceptance

    def pct(x: float) -> float | None:
        return 100.0 * x / half if half > 0 and math.isfinite(x) else None

    empty = zone.empty
    return Result(reading=reading, error=dev.error * factor, error_unit=unit,
                  percent_of_tolerance=dev.percent_of_tolerance, verdict=judged.verdict,
                  expanded=point.budget.expanded * factor, expanded_value=point.budget.expanded_value,
                  k=point.budget.k, tur=judged.tur, conformance=judged.conformance,
                  acceptance=judged.acceptance, expanded_pct=pct(point.budget.expanded),
                  accept_low_pct=None if empty else pct(zone.low - centre),
                  accept_high_pct=None if empty else pct(zone.high - centre))
