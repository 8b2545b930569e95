"""The bench file: which calibrator, how to reach it, its own calibration, and safety settings."""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from pydantic import Field, StrictStr

from verirun import yamlfile
from verirun.errors import ProcedureError, UnitError
from verirun.functions import FunctionName, is_alternating, unit_of
from verirun.metrology.uncertainty import CalibratorSpec
from verirun.procedure.model import QuantityText, Strict
from verirun.units import in_band, parse_quantity, parse_value

#: The bench format version this verirun reads.
FORMAT = 1

#: The highest hazardous-live levels a bench may set (IEC 61010-1, normal conditions, the most
#: lenient of its editions, from memory): a bench can lower the thresholds, never raise them
#: past these, so the operator's confirmation cannot be switched off by configuration.
MAX_THRESHOLDS = {"hazardous-dc": 70.0, "hazardous-ac-rms": 33.0, "hazardous-ac-peak": 46.7}

#: The longest settling wait and instrument timeout a bench may set, in seconds: an hour, and
#: ten minutes (a longer wait is a mistake, and an enormous one cannot be slept at all).
MAX_SETTLE_S, MAX_TIMEOUT_S = 3600.0, 600.0
#: How long the operator may be silent at a reading prompt, with the output on, before it goes
#: to standby (``safety: idle-standby``): between a second and an hour.
MIN_IDLE_S, MAX_IDLE_S = 1.0, 3600.0


class BenchInfo(Strict):
    """Where the work is done."""

    id: StrictStr
    location: StrictStr | None = None


class AccuracyLine(Strict):
    """One line of the calibrator's specification: ± (output + of-range + floor) on a range.

    ``output`` and ``of-range`` are in ppm or % (``"10 ppm"``, ``"0.001 %"``); ``floor`` is in
    the function's unit; ``level`` is the confidence level (``"99 %"``) or ``limits`` for bounds
    with no stated level. For AC, ``from`` and ``to`` give the frequency band it holds for.
    """

    function: FunctionName
    range: QuantityText
    output: QuantityText = 0
    of_range: QuantityText = 0
    floor: QuantityText = 0
    level: QuantityText
    from_: QuantityText | None = Field(default=None, alias="from")
    to: QuantityText | None = None


class CurrentLimit(Strict):
    """The most current the calibrator's resistance output accepts, for values up to ``up-to``.

    A series ohmmeter drives its own test current through the resistance it measures; a
    calibrator's resistance output is specified only up to a current that depends on the value.
    """

    up_to: QuantityText
    max: QuantityText


class CalibratorInfo(Strict):
    """The reference standard: identity, its VISA address and its own calibration status."""

    description: StrictStr
    asset: StrictStr
    resource: StrictStr
    visa_library: StrictStr = ""
    profile: StrictStr = "scpi-generic"
    identity: StrictStr
    certificate: StrictStr
    calibration_due: dt.date
    traceability: StrictStr | None = None
    timeout: QuantityText = "2 s"
    accuracy: list[AccuracyLine] = []
    resistance_current: list[CurrentLimit] = []


class SafetyInfo(Strict):
    """Hazardous-live thresholds and whether a scripted run may switch on above them."""

    hazardous_dc: QuantityText = "60 V"
    hazardous_ac_rms: QuantityText = "30 V"
    hazardous_ac_peak: QuantityText = "42.4 V"
    scripted_hazardous: Literal["refuse", "allow"] = "refuse"
    idle_standby: QuantityText = "300 s"


class BenchFile(Strict):
    """A whole bench file."""

    format: int
    bench: BenchInfo
    calibrator: CalibratorInfo
    settle: QuantityText = "0 s"
    safety: SafetyInfo = SafetyInfo()


@dataclass(frozen=True, kw_only=True)
class SpecLine:
    """A resolved line of the calibrator's specification."""

    function: str
    range: float
    spec: CalibratorSpec
    low_hz: float | None
    high_hz: float | None
    text: str

    def covers(self, function: str, value: float, frequency: float | None) -> bool:
        """True when this line holds for ``value`` (and ``frequency``) of ``function``."""
        if function != self.function or abs(value) > self.range * (1 + 1e-12):
            return False
        return in_band(frequency, self.low_hz, self.high_hz)


@dataclass(frozen=True, kw_only=True)
class Bench:
    """A loaded bench file, with quantities in SI floats."""

    file: BenchFile
    text: str
    source: str
    settle_s: float
    timeout_s: float
    hazardous_dc: float
    hazardous_ac_rms: float
    hazardous_ac_peak: float
    #: The calibrator's specification lines, smallest range first.
    accuracy: tuple[SpecLine, ...] = ()
    #: (up to this resistance, the most current accepted), lowest resistance first.
    resistance_current: tuple[tuple[float, float], ...] = ()
    #: Seconds the operator may stay silent at a reading prompt before the output goes to standby.
    idle_standby_s: float = 300.0

    def current_limit(self, resistance: float) -> float | None:
        """The most current the resistance output accepts at ``resistance`` (``None``: not
        given)."""
        for up_to, most in self.resistance_current:
            if resistance <= up_to * (1 + 1e-12):
                return most
        return None

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()

    def spec_for(self, function: str, value: float, frequency: float | None) -> SpecLine | None:
        """The specification line for applying ``value``: the smallest range that holds it (the
        lines are held smallest range first)."""
        for line in self.accuracy:
            if line.covers(function, value, frequency):
                return line
        return None


def load_bench(path: str | Path) -> Bench:
    """Load and validate a bench file.

    Raises
    ------
    ProcedureError
        Listing every problem as ``file:line: field: message``.
    """
    return _resolve(yamlfile.load_file(path))


def load_bench_text(text: str, source: str = "<bench>") -> Bench:
    """Load a bench file from its text (as stored in a run record)."""
    return _resolve(yamlfile.load_text(text, source))


def _resolve(located: yamlfile.LocatedData) -> Bench:
    early: list[str] = []
    try:
        yamlfile.check_format(located, FORMAT, "bench file")
    except ProcedureError as exc:
        early.extend(exc.problems)
    try:
        model = yamlfile.validate(BenchFile, located)
    except ProcedureError as exc:
        # The accuracy lines that are valid in themselves are checked too: every problem at once.
        raise ProcedureError(early + exc.problems + _line_problems(located)) from None
    if early:
        raise ProcedureError(early)
    problems: list[str] = []

    def quantity(loc: tuple, text, unit: str) -> float:
        return _quantity(located, problems, loc, text, unit)

    settle = quantity(("settle",), model.settle, "s")
    timeout = quantity(("calibrator", "timeout"), model.calibrator.timeout, "s")
    dc = quantity(("safety", "hazardous-dc"), model.safety.hazardous_dc, "V")
    rms = quantity(("safety", "hazardous-ac-rms"), model.safety.hazardous_ac_rms, "V")
    peak = quantity(("safety", "hazardous-ac-peak"), model.safety.hazardous_ac_peak, "V")
    accuracy = [
        spec
        for i, line in enumerate(model.calibrator.accuracy)
        if (spec := _spec_line(located, ("calibrator", "accuracy", i), line, problems)) is not None
    ]
    limits = []
    for i, limit in enumerate(model.calibrator.resistance_current):
        before = len(problems)
        up_to = quantity(("calibrator", "resistance-current", i, "up-to"), limit.up_to, "Ω")
        most = quantity(("calibrator", "resistance-current", i, "max"), limit.max, "A")
        if len(problems) == before:
            limits.append((up_to, most))
    if timeout < 0.001 and not problems:
        problems.append(located.problem(("calibrator", "timeout"), "must be at least 1 ms"))
    idle = quantity(("safety", "idle-standby"), model.safety.idle_standby, "s")
    for loc, value, low, high in (
        (("settle",), settle, 0.0, MAX_SETTLE_S),
        (("calibrator", "timeout"), timeout, 0.0, MAX_TIMEOUT_S),
        (("safety", "idle-standby"), idle, MIN_IDLE_S, MAX_IDLE_S),
    ):
        if not low <= value <= high and not any(".".join(loc) in p for p in problems):
            problems.append(located.problem(loc, f"{value:g} s is outside {low:g} s to {high:g} s"))
    if not model.calibrator.identity.strip():
        problems.append(
            located.problem(
                ("calibrator", "identity"),
                "is empty, which any instrument would"
                " match; give the start of the calibrator's *IDN? answer",
            )
        )
    for key, value in (
        ("hazardous-dc", dc),
        ("hazardous-ac-rms", rms),
        ("hazardous-ac-peak", peak),
    ):
        if any(f"safety.{key}" in p for p in problems):
            continue
        if value == 0:
            problems.append(
                located.problem(
                    ("safety", key), "a hazardous-live threshold must be more than zero"
                )
            )
        elif value > MAX_THRESHOLDS[key]:
            problems.append(
                located.problem(
                    ("safety", key),
                    f"{value:g} V is above {MAX_THRESHOLDS[key]:g} V,"
                    " the highest hazardous-live level of any edition of IEC 61010-1;"
                    " a bench may lower the thresholds, never raise them past that",
                )
            )
    if problems:
        raise ProcedureError(problems)
    return Bench(
        file=model,
        text=located.text,
        source=located.source,
        settle_s=settle,
        timeout_s=timeout,
        hazardous_dc=dc,
        hazardous_ac_rms=rms,
        hazardous_ac_peak=peak,
        # Smallest range first (in file order among equal ranges): the first line that holds a
        # value is its line. Sorted once here, not at every point planned.
        accuracy=tuple(sorted(accuracy, key=lambda line: line.range)),
        resistance_current=tuple(sorted(limits)),
        idle_standby_s=idle,
    )


def _quantity(located, problems: list[str], loc: tuple, text, unit: str) -> float:
    """A quantity of the bench file in ``unit``, zero or more (a problem is noted, 0.0 returned)."""
    try:
        value = parse_value(text, unit)
    except UnitError as exc:
        problems.append(located.problem(loc, str(exc)))
        return 0.0
    if value < 0:
        problems.append(located.problem(loc, f"must be zero or more, got {text!r}"))
    return value


def _spec_line(located, loc: tuple, line: AccuracyLine, problems: list[str]) -> SpecLine | None:
    """One accuracy line resolved, or ``None`` with its problems noted."""
    unit = unit_of(line.function)
    before = len(problems)
    rng = _quantity(located, problems, loc + ("range",), line.range, unit)
    output = _ppm(located, loc + ("output",), line.output, problems)
    of_range = _ppm(located, loc + ("of-range",), line.of_range, problems)
    floor = _quantity(located, problems, loc + ("floor",), line.floor, unit)
    level = _level(located, loc + ("level",), line.level, problems)
    low = high = None
    if line.from_ is not None or line.to is not None:
        if not is_alternating(line.function) or line.from_ is None or line.to is None:
            problems.append(
                located.problem(
                    loc, "a frequency band needs both 'from' and 'to', on an AC function"
                )
            )
        else:
            low = _quantity(located, problems, loc + ("from",), line.from_, "Hz")
            high = _quantity(located, problems, loc + ("to",), line.to, "Hz")
    if rng == 0 and len(problems) == before:
        problems.append(located.problem(loc + ("range",), "must be more than zero"))
    if len(problems) != before:
        return None
    spec = CalibratorSpec(output_ppm=output, range_ppm=of_range, floor=floor, level=level)
    return SpecLine(
        function=line.function,
        range=rng,
        spec=spec,
        low_hz=low,
        high_hz=high,
        text=_spec_text(line),
    )


def _line_problems(located) -> list[str]:
    """The problems of each accuracy line valid in itself, in a file whose structure is not."""
    from pydantic import ValidationError

    data = located.data if isinstance(located.data, dict) else {}
    calibrator = data.get("calibrator")
    lines = calibrator.get("accuracy") if isinstance(calibrator, dict) else None
    problems: list[str] = []
    for i, item in enumerate(lines if isinstance(lines, list) else []):
        try:
            line = AccuracyLine.model_validate(item)
        except ValidationError:
            continue  # its problems are among the structure's
        _spec_line(located, ("calibrator", "accuracy", i), line, problems)
    return problems


def _ppm(located, loc, text, problems) -> float:
    """A relative term in ppm, given as ``"10 ppm"`` or ``"0.001 %"`` (a bare number is ppm)."""
    try:
        value, dimension = parse_quantity(text, None)
    except UnitError as exc:
        problems.append(located.problem(loc, str(exc)))
        return 0.0
    if dimension not in ("", "ppm", "%"):
        problems.append(located.problem(loc, f"give ppm or % (e.g. 10 ppm), got {text!r}"))
        return 0.0
    if value < 0:
        problems.append(located.problem(loc, f"must be zero or more, got {text!r}"))
        return 0.0
    return value * 1e4 if dimension == "%" else value


def _level(located, loc, text, problems):
    """A confidence level (``"99 %"`` -> 0.99) or ``"limits"``."""
    if text == "limits":
        return "limits"
    try:
        value = parse_value(text, "%")
    except UnitError as exc:
        problems.append(
            located.problem(loc, f"{exc}; give a level such as 95 % or 99 %, or limits")
        )
        return "limits"
    if not 0 < value < 100:
        problems.append(
            located.problem(loc, f"a confidence level is between 0 and 100 %, got {text!r}")
        )
        return "limits"
    return value / 100.0


def _spec_text(line: AccuracyLine) -> str:
    labels = []
    if str(line.output) not in ("0", "0.0"):
        labels.append(f"{line.output} of output")
    if str(line.of_range) not in ("0", "0.0"):
        labels.append(f"{line.of_range} of range")
    if str(line.floor) not in ("0", "0.0"):
        labels.append(f"{line.floor}")
    level = "limits" if line.level == "limits" else f"{line.level} confidence"
    return f"± ({' + '.join(labels) or '0'}) on the {line.range} range, {level}"
