"""Checks of a plan against the bench before any output goes on.

Everything that can be known before the run starts is checked here, so that a run does not stop
half-way: every stimulus within the calibrator's output limits (its driver profile), every
stimulus covered by a line of the calibrator's specification (or the point's uncertainty would
be unknown), the test current a series ohmmeter drives through the calibrator's resistance
output within the limit the bench file gives, and the standard within its calibration due date.
"""

from __future__ import annotations

import datetime as dt

from verirun.bench.config import Bench
from verirun.errors import BenchError, ProcedureError
from verirun.metrology import scales
from verirun.procedure.plan import TestPoint
from verirun.units import format_quantity


def problems(points: list[TestPoint], bench: Bench, profile, *, today: dt.date) -> list[str]:
    """Every reason the plan cannot run on ``bench``, one line each (empty when it can)."""
    found = []
    cal = bench.file.calibrator
    if cal.calibration_due < today:
        found.append(
            f"{bench.source}: calibrator.calibration-due: the standard {cal.asset} was due for"
            f" calibration on {cal.calibration_due.isoformat()}; a run with an overdue"
            " standard cannot start (recalibrate it, or use another bench)"
        )
    for point in points:
        try:
            profile.source_commands(point.function, point.nominal, point.frequency)
        except BenchError as exc:
            found.append(f"{_where(point)}: the calibrator cannot source it: {exc.message}")
        if point.standard is None:
            found.append(
                f"{_where(point)}: {bench.source} gives no accuracy line of the calibrator for"
                f" {point.function} at this value; add one under calibrator.accuracy"
            )
        over = current_problem(point, bench)
        if over is not None:
            found.append(f"{_where(point)}: {over}")
    return found


def test_current(point: TestPoint) -> float | None:
    """The current a series ohmmeter drives through the resistance at ``point``:
    ``I = E / (Rc + Rx)`` from its battery voltage E and centre value Rc (``None`` when the range
    is not a series-ohms scale or gives no ``battery``)."""
    rng = point.range
    if not isinstance(rng.law, scales.SeriesOhms) or rng.battery is None:
        return None
    return scales.series_pointer_current(rng.battery, rng.law.centre, point.nominal)


test_current.__test__ = False  # not a pytest test


def current_problem(point: TestPoint, bench: Bench) -> str | None:
    """Why the ohmmeter's test current at ``point`` is more than the calibrator accepts (or
    ``None``)."""
    current = test_current(point)
    limit = bench.current_limit(point.nominal) if current is not None else None
    if limit is None or current <= limit * (1 + 1e-12):
        return None
    rng = point.range
    return (
        f"the ohmmeter drives {format_quantity(current, 'A', 3)} (I = E / (Rc + Rx) ="
        f" {format_quantity(rng.battery, 'V')} / ({format_quantity(rng.law.centre, 'Ω')} +"
        f" {format_quantity(point.nominal, 'Ω')})) through the calibrator's resistance output,"
        f" which accepts at most {format_quantity(limit, 'A', 3)} there ({bench.source}:"
        " calibrator.resistance-current); choose another point or range"
    )


def _where(point: TestPoint) -> str:
    return f"step {point.index + 1} ({point.range.id} at {point.stimulus_text()})"


def check(points: list[TestPoint], bench: Bench, profile, *, today: dt.date) -> None:
    """Raise :class:`ProcedureError` listing every problem :func:`problems` finds."""
    found = problems(points, bench, profile, today=today)
    if found:
        raise ProcedureError(found)
