"""Checks of a plan against the bench before any output goes on.

Everything that can be known before the run starts is checked here, so that a run does not stop
half-way: every stimulus within the calibrator's output limits (its driver profile), every
stimulus covered by a line of the calibrator's specification (or the point's uncertainty would
be unknown), and the standard within its calibration due date.
"""

from __future__ import annotations

import datetime as dt

from verirun.bench.config import Bench
from verirun.errors import BenchError, ProcedureError
from verirun.procedure.plan import TestPoint


def problems(points: list[TestPoint], bench: Bench, profile, *, today: dt.date) -> list[str]:
    """Every reason the plan cannot run on ``bench``, one line each (empty when it can)."""
    found = []
    cal = bench.file.calibrator
    if cal.calibration_due < today:
        found.append(f"{bench.source}: calibrator.calibration-due: the standard {cal.asset} was due for"
                     f" calibration on {cal.calibration_due.isoformat()}; a run with an overdue"
                     " standard cannot start (recalibrate it, or use another bench)")
    for point in points:
        try:
            profile.source_commands(point.function, point.nominal, point.frequency)
        except BenchError as exc:
            found.append(f"{_where(point)}: the calibrator cannot source it: {exc.message}")
        if point.standard is None:
            found.append(f"{_where(point)}: {bench.source} gives no accuracy line of the calibrator for"
                         f" {point.function} at this value; add one under calibrator.accuracy")
    return found


def _where(point: TestPoint) -> str:
    return f"step {point.index + 1} ({point.range.id} at {point.stimulus_text()})"


def check(points: list[TestPoint], bench: Bench, profile, *, today: dt.date) -> None:
    """Raise :class:`ProcedureError` listing every problem :func:`problems` finds."""
    found = problems(points, bench, profile, today=today)
    if found:
        raise ProcedureError(found)
