"""Where readings of the meter under test come from: the operator, a file, or a virtual meter.

All three answer one call, ``take(point) -> Entry``. The console asks a person (see
:mod:`verirun.console`); :class:`ScriptedReadings` replays a CSV file for reproducible dry runs
and tests; :class:`VirtualMeter` models a meter with small invented errors for the demo.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from decimal import ROUND_FLOOR, Decimal
from pathlib import Path
from typing import Literal, Protocol

from verirun import yamlfile
from verirun.errors import ProcedureError, UnitError
from verirun.metrology import scales
from verirun.procedure.load import ResolvedRange
from verirun.procedure.model import Number, QuantityText, Strict
from verirun.procedure.plan import TestPoint
from verirun.units import format_quantity, parse_quantity, parse_value

EntryKind = Literal["reading", "repeat", "skip", "note", "abort"]

#: Words the operator may type at the prompt instead of a reading.
COMMANDS = {
    "repeat": "apply the stimulus again and read again",
    "skip": "skip this point; give the reason after the word (skip lead broken)",
    "note": "add a note to the record (note pointer sticks at 3 V)",
    "abort": "stop the run now; the output goes to standby and the run can be resumed",
}


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
class Entry:
    """What came back for one point: a reading, or one of the operator's commands."""

    kind: EntryKind
    typed: str
    value: float | None = None
    text: str | None = None


class ReadingSource(Protocol):
    """Anything that can give the reading of the meter under test at a test point."""

    #: True when a person answers (hazardous-live confirmations are asked of them).
    interactive: bool

    def take(self, point: TestPoint) -> Entry:
        """The reading (or operator command) for ``point``."""


def parse_entry(typed: str, point: TestPoint) -> Entry:
    """Turn what was typed at ``point`` into an :class:`Entry`.

    A bare number is in the range's unit; a unit may be given (``"4.9 V"``, ``"250 mA"``).

    Raises
    ------
    UnitError
        With the reason: not a number, decimal comma, wrong unit, or beyond the scale's ends.
    """
    text = typed.strip()
    word, _, rest = text.partition(" ")
    if word.lower() in COMMANDS:
        kind = word.lower()
        rest = rest.strip()
        if kind in ("skip", "note") and not rest:
            raise UnitError(f"give the {'reason' if kind == 'skip' else 'note'} after '{kind}'")
        return Entry(kind=kind, typed=typed, text=rest or None)
    value, _ = parse_quantity(text, point.unit)
    _check_on_scale(value, point)
    return Entry(kind="reading", typed=typed, value=value)


#: How far past either end of a linear scale, as a fraction of its length, a reading is accepted.
OVERTRAVEL = 0.05


def _check_on_scale(value: float, point: TestPoint) -> None:
    law = point.range.law
    if isinstance(law, scales.Linear):
        # A pointer a little past an end can still be read against the last division; one
        # further out than OVERTRAVEL of the scale length is on its stop and cannot be.
        low, high = sorted((law.low, law.high))
        margin = OVERTRAVEL * (high - low)
        if not low - margin <= value <= high + margin:
            raise UnitError(f"{format_quantity(value, point.unit)} is beyond the ends of the scale"
                            f" ({format_quantity(low, point.unit)} to {format_quantity(high, point.unit)})")
    elif value < 0:
        raise UnitError("a resistance reading cannot be below zero")


class ScriptedReadings:
    """Readings replayed from a CSV file with columns ``range``, ``at`` and ``reading``.

    ``at`` is the nominal value of the point (with or without its unit); ``reading`` is exactly
    what an operator would type, operator commands included. Rows are matched to points by range
    and nominal, so the file need not follow the procedure's order.
    """

    interactive = False

    def __init__(self, path: str | Path):
        self.path = Path(path)
        self._raw: dict[str, list[tuple[int, str, str]]] = {}  # range -> (line, at, reading)
        try:
            with open(self.path, newline="", encoding="utf-8") as fh:
                reader = csv.DictReader(fh)
                missing = {"range", "at", "reading"} - set(reader.fieldnames or [])
                if missing:
                    raise ProcedureError(f"{self.path}:1: missing column(s) {', '.join(sorted(missing))}"
                                         " (need range, at, reading)")
                for row in reader:
                    self._raw.setdefault((row["range"] or "").strip(), []).append(
                        (reader.line_num, (row["at"] or "").strip(), row["reading"] or ""))
        except FileNotFoundError:
            raise ProcedureError(f"{self.path}: no such file") from None
        except (OSError, UnicodeDecodeError, csv.Error) as exc:
            raise ProcedureError(f"{self.path}: cannot read: {exc}") from None
        # Per range, the rows' nominal values parsed once (in the range's unit) -> their rows.
        self._by_nominal: dict[str, dict[float, list[tuple[int, str]]]] = {}

    def _rows_of_range(self, point: TestPoint) -> dict[float, list[tuple[int, str]]]:
        rng = point.range.id
        if rng not in self._by_nominal:
            table: dict[float, list[tuple[int, str]]] = {}
            for line, at, reading in self._raw.get(rng, []):
                try:
                    nominal = parse_value(at, point.unit)
                except UnitError as exc:
                    raise ProcedureError(f"{self.path}:{line}: at: {exc}") from None
                table.setdefault(nominal, []).append((line, reading))
            self._by_nominal[rng] = table
        return self._by_nominal[rng]

    def _queue(self, point: TestPoint) -> list[tuple[int, str]]:
        table = self._rows_of_range(point)
        queue = table.get(point.nominal)
        if queue is None:  # written differently (the text one ulp from the nominal): match closely
            queue = next((rows for nominal, rows in table.items()
                          if math.isclose(nominal, point.nominal, rel_tol=1e-9, abs_tol=1e-15)), [])
            table[point.nominal] = queue
        return queue

    def take(self, point: TestPoint) -> Entry:
        """The next scripted entry for ``point``.

        Raises
        ------
        ProcedureError
            If the file has no (more) rows for the point, or a row does not parse.
        """
        queue = self._queue(point)
        if not queue:
            raise ProcedureError(f"{self.path}: no reading for range {point.range.id} at"
                                 f" {format_quantity(point.nominal, point.unit)}")
        line, typed = queue.pop(0)
        try:
            return parse_entry(typed, point)
        except UnitError as exc:
            raise ProcedureError(f"{self.path}:{line}: reading: {exc}") from None


class MeterRangeModel(Strict):
    """The invented errors of one range of a virtual meter."""

    gain: Number = 1.0
    offset: QuantityText = 0
    centre: QuantityText | None = None


class VirtualMeterFile(Strict):
    """A virtual meter file: a model of a meter under test with small invented errors."""

    format: int
    meter: str
    ranges: dict[str, MeterRangeModel]


class VirtualMeter:
    """A model of a meter under test: what its pointer would show, read off its scale.

    A linear range shows ``gain * x + offset``. An ohms range whose real centre-scale value
    differs from the marked one deflects by the real law and is read on the marked scale.
    The reading is what a person writes down (see :func:`read_off_scale`).
    """

    interactive = False

    def __init__(self, path: str | Path):
        located = yamlfile.load_file(path)
        yamlfile.check_format(located, 1, "virtual meter")
        self.model = yamlfile.validate(VirtualMeterFile, located)
        self._located = located
        problems = []
        for name, rng in self.model.ranges.items():
            for key, text, unit in (("offset", rng.offset, None), ("centre", rng.centre, "Ω")):
                if text is None:
                    continue
                try:
                    parse_quantity(text, unit)
                except UnitError as exc:
                    problems.append(located.problem(("ranges", name, key), str(exc)))
        if problems:
            raise ProcedureError(problems)

    def shown(self, point: TestPoint) -> float:
        """The value the pointer shows at ``point``, before it is read off the scale."""
        rng = point.range
        model = self.model.ranges.get(rng.id, MeterRangeModel())
        law = rng.law
        if isinstance(law, scales.Linear):
            offset = parse_value(model.offset, rng.unit)
            return model.gain * point.nominal + offset
        real_centre = parse_value(model.centre, "Ω") if model.centre is not None else law.centre
        real = scales.make_law(law.name, centre=real_centre)
        return law.value(real.fraction(point.nominal))

    def take(self, point: TestPoint) -> Entry:
        """The reading at ``point``, written as an operator would type it."""
        rng = point.range
        typed = read_off_scale(self.shown(point), rng)
        if typed is None:
            raise ProcedureError(f"virtual meter: the pointer of {rng.id} sits at infinity")
        return parse_entry(typed, point)


def read_off_scale(value: float, rng: ResolvedRange) -> str | None:
    """What a person reading the pointer at ``value`` on ``rng`` writes down, with its unit.

    The pointer is read to the range's readability, in the domain the readability is stated in:

    - in the range's unit (``resolution: 0.25 V``): the nearest multiple of the resolution,
      written as that multiple (``30.5 V``);
    - along the arc (``resolution: 0.5 deg``): the nearest mark of that many degrees. The value
      written is the one that mark says: the shortest decimal whose own position on the scale
      lies within half a readability step of the mark (the nearest such one when several are
      equally short), so that a reader of the written value finds the pointer on the same
      mark. On a 90° scale with a 16 kΩ centre, the 3° mark near the open end spans 427 kΩ to
      508 kΩ and is read ``500 kΩ``; on one with a 16 Ω centre the 45.5° mark is read ``15.6 Ω``.

    Without a readability the value is written to four significant digits. ``None`` when the
    mark read is at the infinity end of an ohms scale.
    """
    if math.isinf(value):
        return None
    if rng.resolution and rng.resolution_domain == "deg" and rng.arc:
        return _read_on_arc(value, rng.law, rng.resolution / rng.arc, rng.unit)
    if rng.resolution:
        step = Decimal(f"{rng.resolution:.12g}")
        return _written(round(value / rng.resolution) * step, rng.unit)
    return format_quantity(value, rng.unit, digits=4)


def _read_on_arc(value: float, law: scales.ScaleLaw, step: float, unit: str) -> str | None:
    """The shortest value on the mark nearest to ``value``, marks ``step`` of the scale apart."""
    mark = round(law.fraction(value) / step) * step
    says = law.value(mark)
    if math.isinf(says):
        return None

    def on_mark(candidate: Decimal) -> bool:
        return abs(law.fraction(float(candidate)) - mark) < step / 2

    if on_mark(Decimal(0)):
        return _written(Decimal(0), unit)
    exact = Decimal(repr(says))
    for digits in range(1, 18):
        quantum = Decimal(1).scaleb(exact.adjusted() - digits + 1)
        below = (exact / quantum).to_integral_value(rounding=ROUND_FLOOR) * quantum
        found = [c for c in (below, below + quantum) if on_mark(c)]
        if found:
            return _written(min(found, key=lambda c: abs(law.fraction(float(c)) - mark)), unit)
    return _written(exact, unit)


def _written(number: Decimal, unit: str) -> str:
    """``number`` (in base units) written with an SI prefix and exactly its own digits."""
    digits = len(number.normalize().as_tuple().digits) if number else 1
    return format_quantity(float(number), unit, digits=digits)
