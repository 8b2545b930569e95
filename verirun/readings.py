"""Where readings of the meter under test come from: the operator, a file, or a virtual meter.

All three answer one call, ``take(point) -> Entry``. The console asks a person (see
:mod:`verirun.console`); :class:`ScriptedReadings` replays a CSV file for reproducible dry runs
and tests; :class:`VirtualMeter` models a meter with small invented errors for the demo.
"""

from __future__ import annotations

import bisect
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
from verirun.text import refusal
from verirun.units import (
    format_quantity,
    parse_quantity,
    parse_value,
    prefix_for,
    split_quantity,
)

EntryKind = Literal["reading", "repeat", "skip", "note", "abort", "undo"]

#: Words the operator may type at the prompt instead of a reading.
COMMANDS = {
    "repeat": "apply the stimulus again and read again",
    "skip": "skip this point; give the reason after the word (skip lead broken)",
    "note": "add a note to the record (note pointer sticks at 3 V)",
    "abort": "stop the run now; the output goes to standby and the run can be resumed",
    "undo": "withdraw the last reading (journaled) and measure that step again",
}


#: The longest line accepted at the reading prompt (a note included), in characters.
MAX_ENTRY_LENGTH = 1000


class OperatorSilent(Exception):
    """Nothing was typed at a prompt within its time limit (``args[0]``, in seconds)."""


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
class Entry:
    """What came back for one point: a reading, or one of the operator's commands."""

    kind: EntryKind
    typed: str
    value: float | None = None
    text: str | None = None
    #: Readings typed before this one at the same prompt, asked about as far off and replaced.
    replaced: tuple[str, ...] = ()


class ReadingSource(Protocol):
    """Anything that can give the reading of the meter under test at a test point."""

    #: True when a person answers (hazardous-live confirmations are asked of them).
    interactive: bool

    def take(self, point: TestPoint) -> Entry:
        """The reading (or operator command) for ``point``.

        An interactive source also takes ``within=`` seconds, and raises
        :class:`OperatorSilent` when nothing was typed in that time.
        """


def reading_unit(rng) -> tuple[str, float]:
    """The unit a bare number is read in on ``rng``, and its factor to base units.

    It is the unit of the range's marked value with the prefix that value is written with: mA
    on a 50 mA range (factor 1e-3), V on a 10 V range, kΩ on an ohms range of centre 1.2 kΩ.
    The reading prompt shows it, so what the operator types means what the prompt says.
    """
    marked = rng.full_scale if rng.full_scale is not None else getattr(rng.law, "centre", None)
    factor, prefix = prefix_for(marked) if marked else (1.0, "")
    return prefix + rng.unit, factor


def parse_entry(typed: str, point: TestPoint) -> Entry:
    """Turn what was typed at ``point`` into an :class:`Entry`.

    A bare number is in the unit the prompt shows (:func:`reading_unit`); a unit may be given
    (``"4.9 V"``, ``"250 mA"``), or a prefix alone (``"1.06k"``).

    Raises
    ------
    UnitError
        With the reason: not a number, decimal comma, wrong unit, or beyond the scale's ends.
    """
    if len(typed) > MAX_ENTRY_LENGTH:
        raise UnitError(f"too long: at most {MAX_ENTRY_LENGTH} characters")
    if (why := refusal(typed)) is not None:
        raise UnitError(f"the line {why}")
    text = typed.strip()
    word, _, rest = text.partition(" ")
    if word.lower() in COMMANDS:
        kind = word.lower()
        rest = rest.strip()
        if kind in ("skip", "note") and not rest:
            raise UnitError(f"give the {'reason' if kind == 'skip' else 'note'} after '{kind}'")
        return Entry(kind=kind, typed=typed, text=rest or None)
    _, factor = reading_unit(point.range)
    value, _ = parse_quantity(text, point.unit, bare_factor=factor)
    _check_as_written(text, value)
    _check_on_scale(value, point)
    return Entry(kind="reading", typed=typed, value=value)


#: The most significant digits a reading may have: as many as a float carries exactly, so that
#: the reading decided on is the reading as typed (see :mod:`verirun.metrology.exact`).
MAX_DIGITS = 15


def _check_as_written(text: str, value: float) -> None:
    """Refuse a reading of more digits than a float carries, or one too small to work with;
    ``text`` has been read by :func:`parse_quantity` as ``value``."""
    number = Decimal(split_quantity(text)[0])
    digits = len(number.normalize().as_tuple().digits) if number else 0
    if digits > MAX_DIGITS:
        raise UnitError(
            f"{text.strip()!r} has {digits} significant digits; give at most {MAX_DIGITS}"
        )
    if number and value == 0.0:
        raise UnitError(f"{text.strip()!r} is too small a number to work with")


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
            unit, factor = reading_unit(point.range)
            raise UnitError(
                f"{_in(value, factor, unit)} is beyond the ends of the scale: a reading"
                f" from {_in(low - margin, factor, unit)} to {_in(high + margin, factor, unit)}"
                " is accepted"
            )
    elif value < 0:
        raise UnitError("a resistance reading cannot be below zero")


def _in(value: float, factor: float, unit: str) -> str:
    return f"{value / factor:.6g} {unit}"


#: How many tolerances from the nominal a reading must be before the console asks again.
GROSS_TOLERANCES = 3.0


def tolerances_off(point: TestPoint, value: float) -> float | None:
    """How many tolerance half-widths ``value`` lies from the nominal (``None``: not defined)."""
    from verirun.metrology import tolerance

    try:
        pct = tolerance.deviation(point.window, value, point.range.law).percent_of_tolerance
    except (ValueError, ZeroDivisionError):
        return None
    return None if pct is None or not math.isfinite(pct) else abs(pct) / 100.0


@dataclass(frozen=True, slots=True)
class _Row:
    line: int
    range: str
    at: str
    reading: str


#: The columns of a readings file, in the order they are written.
COLUMNS = ("range", "at", "reading")


class _Nominals:
    """The nominals of one range, to find the one a replay file's ``at`` names.

    A row names the first nominal, in plan order, equal to its value or within a relative 1e-9
    of it (one value written two ways may give floats a few units of the last place apart).
    Kept sorted as well, so that a row looks only at the few nominals near its value, not at
    every one of the range's.
    """

    REL, ABS = 1e-9, 1e-15

    def __init__(self, nominals):
        #: Each nominal once, in plan order, with its place in that order.
        self.order = {n: i for i, n in enumerate(dict.fromkeys(nominals))}
        self.sorted = sorted(self.order)

    def named_by(self, at: float) -> float | None:
        # isclose reaches REL times the larger of the two magnitudes, or ABS: twice REL of
        # |at| covers the larger, and twice that again is a margin; the test below decides.
        reach = max(abs(at) * 2 * self.REL, self.ABS) * 2
        lo = bisect.bisect_left(self.sorted, at - reach)
        hi = bisect.bisect_right(self.sorted, at + reach)
        close = [
            n
            for n in self.sorted[lo:hi]
            if n == at or math.isclose(n, at, rel_tol=self.REL, abs_tol=self.ABS)
        ]
        return min(close, key=self.order.__getitem__) if close else None


class ScriptedReadings:
    """Readings replayed from a CSV file with columns ``range``, ``at`` and ``reading``.

    ``at`` is the nominal value of the point (with or without its unit; a bare number is in the
    unit the reading prompt shows); ``reading`` is exactly what an operator would type,
    operator commands included. Rows are matched to points by range and nominal, in the
    file's order where a procedure repeats a point, so the file need not follow the
    procedure's order. :meth:`check` checks the whole file against the plan before the run
    starts.
    """

    interactive = False

    def __init__(self, path: str | Path):
        self.path = Path(path)
        self._rows: list[_Row] = []
        self._problems: list[str] = []  # found in reading the file itself
        self._last_line = 1
        try:
            with open(self.path, newline="", encoding="utf-8-sig") as fh:
                reader = csv.reader(fh)
                header = next(reader, None)
                names = [h.strip().lower() for h in header or []]
                missing = [c for c in COLUMNS if c not in names]
                if missing:
                    raise ProcedureError(
                        f"{self.path}:1: missing column(s) {', '.join(missing)}: the first"
                        " line must be the header range,at,reading"
                    )
                unknown = [h for h in names if h not in COLUMNS]
                if unknown:
                    self._problems.append(
                        f"{self.path}:1: unknown column(s) {', '.join(map(repr, unknown))};"
                        " the header is range,at,reading"
                    )
                where = {name: names.index(name) for name in COLUMNS}
                for fields in reader:
                    line = reader.line_num
                    self._last_line = line
                    if not any(f.strip() for f in fields):
                        continue
                    if len(fields) != len(names):
                        hint = (
                            " (a decimal comma? write a decimal point, 10.4, or quote the field)"
                            if len(fields) > len(names)
                            else ""
                        )
                        self._problems.append(
                            f"{self.path}:{line}: {len(fields)} fields where the header has"
                            f" {len(names)}{hint}; write range,at,reading"
                        )
                        continue
                    self._rows.append(
                        _Row(
                            line=line,
                            range=fields[where["range"]].strip(),
                            at=fields[where["at"]].strip(),
                            reading=fields[where["reading"]],
                        )
                    )
        except FileNotFoundError:
            raise ProcedureError(f"{self.path}: no such file") from None
        except (OSError, UnicodeDecodeError, csv.Error) as exc:
            raise ProcedureError(f"{self.path}: cannot read: {exc}") from None
        # Per (range id, nominal of its point) the rows not yet replayed, in file order.
        self._queues: dict[tuple[str, float], list[_Row]] = {}
        self._checked = False
        self._parsed: dict[int, Entry] = {}  # line -> its entry, parsed when the file was checked

    def _match(
        self, points: list[TestPoint], problems: list[str]
    ) -> dict[tuple[str, float], list[_Row]]:
        """Assign every row to the point it names; a row that names none is a problem."""
        ranges, by_range = {}, {}
        for p in points:
            ranges.setdefault(p.range.id, p.range)
            by_range.setdefault(p.range.id, []).append(p.nominal)
        nominals = {rid: _Nominals(values) for rid, values in by_range.items()}
        queues: dict[tuple[str, float], list[_Row]] = {}
        for row in self._rows:
            rng = ranges.get(row.range)
            if rng is None:
                problems.append(
                    f"{self.path}:{row.line}: range: the procedure has no range {row.range!r}"
                    f" (its ranges: {', '.join(ranges)})"
                )
                continue
            unit, factor = reading_unit(rng)
            try:
                at = parse_quantity(row.at, rng.unit, bare_factor=factor)[0]
            except UnitError as exc:
                problems.append(
                    f"{self.path}:{row.line}: at: {exc}; write the point's nominal value,"
                    f" e.g. {format_quantity(next(iter(nominals[rng.id].order)), rng.unit)}"
                )
                continue
            nominal = nominals[rng.id].named_by(at)
            if nominal is None:
                problems.append(
                    f"{self.path}:{row.line}: at: range {rng.id} has no point at"
                    f" {format_quantity(at, rng.unit)} (its points:"
                    f" {', '.join(format_quantity(n, rng.unit) for n in nominals[rng.id].order)})"
                )
                continue
            queues.setdefault((rng.id, nominal), []).append(row)
        return queues

    def check(self, points: list[TestPoint], every: list[TestPoint] | None = None) -> list[str]:
        """Every problem of the file for a run of ``points``, each as ``file:line: ...``.

        Each row is matched to its point and parsed as the run would parse it; a point without
        a reading, a row naming no point of the procedure and a row left over once its point
        has its reading are all problems. ``every`` is the whole plan when ``points`` is part of
        it (a resumed run): rows for its other points are not used and not problems.
        """
        problems = list(self._problems)
        queues = self._match(every if every is not None else points, problems)
        rows = {key: list(rows) for key, rows in queues.items()}
        pending = set()
        for point in points:
            key = (point.range.id, point.nominal)
            pending.add(key)
            if self._replay_check(point, rows.get(key, []), problems) == "abort":
                break  # the run stops here; later points need no rows
        for key in pending:
            for row in rows.get(key, []):
                first = queues[key][0].line
                problems.append(
                    f"{self.path}:{row.line}: a row left over: range {key[0]} at {row.at!r} already"
                    f" has its reading (line {first}); remove the duplicate"
                )
        self._queues, self._checked = queues, True
        prefix = len(str(self.path)) + 1
        return sorted(problems, key=lambda text: _line_order(text[prefix:]))

    def _replay_check(self, point: TestPoint, queue: list[_Row], problems: list[str]) -> str | None:
        """Replay ``point``'s rows as the run would; return the kind of its last entry."""
        while queue:
            row = queue.pop(0)
            try:
                entry = self._entry(row, point)
            except UnitError as exc:
                problems.append(f"{self.path}:{row.line}: reading: {exc}")
                return None
            self._parsed[row.line] = entry  # the run takes it as parsed here
            if entry.kind in ("reading", "skip", "abort"):
                return entry.kind
        problems.append(
            f"{self.path}:{self._last_line + 1}: no reading for step {point.index + 1}"
            f" ({point.range.id} at {format_quantity(point.nominal, point.unit)});"
            f" add a row {point.range.id},{format_quantity(point.nominal, point.unit)},READING"
        )
        return None

    def _entry(self, row: _Row, point: TestPoint) -> Entry:
        entry = parse_entry(row.reading, point)
        if entry.kind == "undo":
            raise UnitError(
                "'undo' is for the console; in a file, write the reading as it should be"
            )
        return entry

    def take(self, point: TestPoint) -> Entry:
        """The next scripted entry for ``point``.

        Raises
        ------
        ProcedureError
            If the file has no (more) rows for the point, or a row does not parse.
        """
        key = (point.range.id, point.nominal)
        if not self._checked and key not in self._queues:
            # Not checked against a plan: match the rows of this point now.
            self._queues[key] = self._match([point], []).get(key, [])
        queue = self._queues.get(key, [])
        if not queue:
            raise ProcedureError(
                f"{self.path}: no reading for range {point.range.id} at"
                f" {format_quantity(point.nominal, point.unit)}"
            )
        row = queue.pop(0)
        parsed = self._parsed.pop(row.line, None)
        if parsed is not None:
            return parsed
        try:
            return self._entry(row, point)
        except UnitError as exc:
            raise ProcedureError(f"{self.path}:{row.line}: reading: {exc}") from None


def _line_order(problem: str) -> int:
    number = problem.split(":", 1)[0]
    return int(number) if number.isdigit() else 0


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

    def check(self, points: list[TestPoint], every: list[TestPoint] | None = None) -> list[str]:
        """Every problem of the file for a run of ``points``, each as ``file:line: field: message``.

        Every range of the procedure needs a model (``{gain: 1}`` for a meter without error),
        every model a range of the procedure; an offset is in its range's unit, a real centre
        is for an ohms range and gain and offset for a linear one; and every point must give a
        reading the run would accept.
        """
        located, problems = self._located, []
        ranges: dict[str, object] = {}
        for p in every if every is not None else points:
            ranges.setdefault(p.range.id, p.range)
        for name, model in self.model.ranges.items():
            loc = ("ranges", name)
            rng = ranges.get(name)
            if rng is None:
                problems.append(
                    located.problem(
                        loc,
                        f"the procedure has no range {name!r} (its ranges: {', '.join(ranges)})",
                    )
                )
                continue
            linear = isinstance(rng.law, scales.Linear)
            if linear and model.centre is not None:
                problems.append(
                    located.problem(
                        loc + ("centre",),
                        f"{name} is a linear range: give gain and offset, not centre",
                    )
                )
            if not linear and (
                "gain" in model.model_fields_set or "offset" in model.model_fields_set
            ):
                problems.append(
                    located.problem(
                        loc,
                        f"{name} is an ohms range: give its real centre"
                        " (centre: 12.3 ohm), not gain or offset",
                    )
                )
            if linear:
                try:
                    parse_value(model.offset, rng.unit)
                except UnitError as exc:
                    problems.append(
                        located.problem(loc + ("offset",), f"{exc}; write it in {rng.unit}")
                    )
        missing = [name for name in ranges if name not in self.model.ranges]
        for name in missing:
            problems.append(
                located.problem(
                    ("ranges",),
                    f"no model for range {name!r}; add"
                    f" '{name}: {{gain: 1}}' for a meter without error",
                    missing=False,
                )
            )
        if not problems:
            for point in points:
                try:
                    self.take(point)
                except (UnitError, ProcedureError) as exc:
                    problems.append(
                        located.problem(
                            ("ranges", point.range.id),
                            f"step {point.index + 1} ({point.range.id} at"
                            f" {point.stimulus_text()}): the meter would read what the"
                            f" run refuses: {exc}",
                        )
                    )
        return problems

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
    - along the arc (``resolution: 0.5 deg``, or ``0.5 %`` of scale length): the nearest mark
      of that many degrees (or that part of the length). The value
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
    along = {"deg": rng.arc, "length": 100.0}.get(rng.resolution_domain or "")
    if rng.resolution and along:
        return _read_on_arc(value, rng.law, rng.resolution / along, rng.unit)
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
