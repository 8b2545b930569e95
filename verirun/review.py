"""The review of a procedure on a bench before its first real run: what will be applied, how it
is judged, and what needs a second look.

Nothing here opens an instrument. The review is the plan with everything worked out per point
(window, expanded uncertainty, TUR, acceptance limits, the calibrator's accuracy line, hazard,
the ohmmeter's test current, where the pointer should stand), the preflight's problems, and
warnings a reviewer should weigh (TUR below 4 : 1, a test current that cannot be checked). It is
printed as a table and written as an HTML page a second person signs before the first run.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass

from verirun import preflight
from verirun.bench.config import Bench
from verirun.bench.safety import HazardLimits, is_hazardous
from verirun.evaluation import evaluate
from verirun.metrology import scales
from verirun.pointer import pointer, shows_pointer
from verirun.procedure.load import Procedure
from verirun.procedure.plan import TestPoint, plan
from verirun.units import format_quantity

#: Below this test uncertainty ratio a point is flagged
#: (ANSI/NCSL Z540.3 and common practice: 4 : 1).
TUR_FLAG = 4.0


@dataclass(frozen=True, kw_only=True)
class Row:
    """One step of the plan as the reviewer sees it; every value already in words."""

    step: int
    range: str
    stimulus: str
    accuracy: str
    window: str
    expanded: str
    tur: str
    tur_low: bool
    acceptance: str
    calibrator_line: str
    hazard: str
    test_current: str
    current_over: bool
    pointer: str
    read_on: str


@dataclass(frozen=True, kw_only=True)
class Review:
    """The whole review: which files, each step, the problems that stop a run and the warnings."""

    procedure: str
    procedure_file: str
    procedure_sha256: str
    bench: str
    bench_file: str
    bench_sha256: str
    rows: tuple[Row, ...]
    problems: tuple[str, ...]
    warnings: tuple[str, ...]


def review(procedure: Procedure, bench: Bench, profile, *, today: dt.date) -> Review:
    """Work out the review of ``procedure`` on ``bench`` (with its driver ``profile``)."""
    points = plan(procedure, bench)
    problems = list(preflight.problems(points, bench, profile, today=today))
    warnings: list[str] = []
    limits = HazardLimits(
        dc_volts=bench.hazardous_dc,
        ac_rms_volts=bench.hazardous_ac_rms,
        ac_peak_volts=bench.hazardous_ac_peak,
    )
    scripted = bench.file.safety.scripted_hazardous
    rows, hazardous, flagged = [], [], []
    warned_ranges: set[str] = set()
    for point in points:
        where = f"step {point.index + 1} ({point.range.id} at {point.stimulus_text()})"
        judged = evaluate(point, point.nominal)
        low_tur = judged.tur is not None and judged.tur < TUR_FLAG
        if low_tur:
            flagged.append(f"{where}: TUR {judged.tur:.2f} : 1")
        danger = is_hazardous(point.function, point.nominal, limits)
        if danger:
            hazardous.append(point.index + 1)
        current, over = _current(point, bench, warnings, warned_ranges)
        rows.append(
            Row(
                step=point.index + 1,
                range=point.range.id,
                stimulus=point.stimulus_text(),
                accuracy=point.accuracy_text,
                window=_window(point),
                expanded=format_quantity(judged.expanded_value, point.unit, 2)
                if math.isfinite(judged.expanded_value)
                else "∞",
                tur=f"{judged.tur:.2f}" if judged.tur is not None else "none (unbounded)",
                tur_low=low_tur,
                acceptance=(
                    f"{format_quantity(judged.acceptance[0], point.unit, 5)} to"
                    f" {format_quantity(judged.acceptance[1], point.unit, 5)}"
                )
                if judged.acceptance
                else "none",
                calibrator_line=point.standard.text if point.standard is not None else "none",
                hazard="yes: confirmed at each switch-on" if danger else "no",
                test_current=current,
                current_over=over,
                pointer=_pointer(point),
                read_on=point.range.read_on or "",
            )
        )
    if flagged:
        warnings.append(
            f"{len(flagged)} point{'s' if len(flagged) != 1 else ''} with a TUR below"
            f" {TUR_FLAG:g} : 1 (flagged on the certificate): " + "; ".join(flagged)
        )
    if hazardous:
        warnings.append(
            f"{len(hazardous)} point{'s' if len(hazardous) != 1 else ''} at or above the bench's"
            f" hazardous-live threshold (step{'s' if len(hazardous) != 1 else ''}"
            f" {', '.join(map(str, hazardous))}): the operator"
            " confirms before each switch-on; a scripted run needs the bench's"
            f" safety: scripted-hazardous: allow (this bench: {scripted})"
        )
    return Review(
        procedure=f"{procedure.id} revision {procedure.revision}",
        procedure_file=procedure.source,
        procedure_sha256=procedure.sha256,
        bench=bench.file.bench.id,
        bench_file=bench.source,
        bench_sha256=bench.sha256,
        rows=tuple(rows),
        problems=tuple(problems),
        warnings=tuple(warnings),
    )


def _window(point: TestPoint) -> str:
    win = point.window
    return (
        f"{format_quantity(win.low, point.unit, 5)} to {format_quantity(win.high, point.unit, 5)}"
    )


def _pointer(point: TestPoint) -> str:
    if not shows_pointer(point):
        return ""
    where = pointer(point)
    return f"{where.text()}; window {where.window_text()}"


def _current(point, bench, warnings, warned) -> tuple[str, bool]:
    """The test current at an ohms point in words, checked against the bench's limit."""
    rng = point.range
    if rng.function != "resistance":
        return "", False
    if isinstance(rng.law, scales.ShuntOhms):
        if rng.id not in warned:
            warned.add(rng.id)
            warnings.append(
                f"range {rng.id}: the test current of a shunt-ohms scale is not worked out;"
                " check it against the calibrator's limit by hand"
            )
        return "not worked out (shunt-ohms)", False
    current = preflight.test_current(point)
    if current is None:
        if rng.id not in warned:
            warned.add(rng.id)
            warnings.append(
                f"range {rng.id}: no battery: given, so the ohmmeter's test current cannot be"
                " checked; give the voltage of its cell (battery: 1.5 V)"
            )
        return "unknown (no battery)", False
    limit = bench.current_limit(point.nominal)
    text = format_quantity(current, "A", 3)
    if limit is None:
        if rng.id not in warned:
            warned.add(rng.id)
            warnings.append(
                f"range {rng.id}: the bench file gives no calibrator.resistance-current limit at"
                " these values, so the test current is not checked; add the limits of the"
                " calibrator's data sheet"
            )
        return f"{text} (no limit given)", False
    if preflight.current_problem(point, bench) is not None:  # listed with the preflight's problems
        return f"{text}, over the {format_quantity(limit, 'A', 3)} limit", True
    return f"{text} (limit {format_quantity(limit, 'A', 3)})", False


def render_html(result: Review) -> str:
    """The review as an HTML page (the same bytes for the same review)."""
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    env = Environment(
        loader=PackageLoader("verirun", "templates"),
        autoescape=select_autoescape(["html", "j2"], default=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    return env.get_template("review.html.j2").render(review=result)


COLUMNS = (
    ("step", "step"),
    ("range", "range"),
    ("stimulus", "applied"),
    ("window", "window"),
    ("expanded", "U (k = 2)"),
    ("tur", "TUR"),
    ("acceptance", "acceptance"),
    ("hazard", "hazard"),
    ("test_current", "test current"),
    ("pointer", "pointer"),
)
