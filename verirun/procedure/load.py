"""Load a procedure file: YAML -> validated structure -> resolved procedure in SI floats.

Every problem in the file is collected and reported at once as ``file:line: field: message``,
so a run never dies half-way on a typo.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from pathlib import Path

from verirun import yamlfile
from verirun.errors import ProcedureError, UnitError
from verirun.functions import is_alternating, unit_of
from verirun.metrology import decision, scales, tolerance, uncertainty
from verirun.procedure.model import Accuracy, ProcedureFile, Range
from verirun.units import in_band, parse_quantity, parse_value

#: The procedure format version this verirun reads.
FORMAT = 1

_ARC_FORMS = {
    "percent_of_full_scale": "percent-of-full-scale",
    "class_index": "class",
    "degrees": "degrees",
    "percent_of_length": "percent-of-length",
}
_VALUE_FORMS = {
    "percent_of_reading": "percent-of-reading",
    "percent_of_range": "percent-of-range",
    "counts": "counts",
    "absolute": "absolute",
}
#: The unit each term may be written with, and how the message shows it.
_ACCURACY_UNITS = {
    "percent_of_full_scale": ("%", "in percent (2 or 2 %)"),
    "class_index": ("", "a class index (1.5)"),
    "degrees": ("deg", "in degrees of arc (3 or 3 deg)"),
    "percent_of_length": ("%", "in percent (1 or 1 %)"),
    "percent_of_reading": ("%", "in percent (0.5 or 0.5 %)"),
    "percent_of_range": ("%", "in percent (0.1 or 0.1 %)"),
    "counts": ("", "a whole number of counts (2)"),
}


@dataclass(frozen=True, kw_only=True, slots=True)
class Band:
    """An accuracy statement and the frequencies it holds for (``None``: all)."""

    statement: tolerance.Statement
    low_hz: float | None = None
    high_hz: float | None = None
    text: str

    def covers(self, frequency: float | None) -> bool:
        """True when this band applies at ``frequency``, ends included."""
        return in_band(frequency, self.low_hz, self.high_hz)


@dataclass(frozen=True, kw_only=True, slots=True)
class ResolvedRange:
    """A range with every quantity in SI floats and its scale law built."""

    id: str
    function: str
    unit: str
    law: scales.ScaleLaw
    arc: float | None
    full_scale: float | None
    resolution: float | None
    resolution_domain: str | None  # "value", "deg" or "length" (percent of scale length)
    bands: tuple[Band, ...]
    read_on: str | None
    connect: str | None
    points: tuple[tuple[float, float | None], ...]  # (nominal, frequency)
    battery: float | None
    extra_terms: tuple[uncertainty.Term, ...] = ()

    @property
    def context(self) -> tolerance.RangeContext:
        """What a tolerance statement needs to know about this range."""
        count = self.resolution if self.resolution_domain == "value" else None
        return tolerance.RangeContext(
            law=self.law, arc=self.arc, full_scale=self.full_scale, count=count
        )

    def meter_terms(self) -> list[uncertainty.Term]:
        """The meter's own contributions to each reading's uncertainty: its readability (the
        resolution it is read to) and the procedure's extra terms for the range."""
        return list(self._meter_terms)

    @property
    def _meter_terms(self) -> tuple[uncertainty.Term, ...]:
        terms = []
        if self.resolution:
            if self.resolution_domain == "deg":
                terms.append(
                    uncertainty.readability_term(
                        division=self.resolution, unit="degrees", arc=self.arc, name="readability"
                    )
                )
            elif self.resolution_domain == "length":
                terms.append(
                    uncertainty.readability_term(
                        division=self.resolution / 100.0, unit="length", name="readability"
                    )
                )
            else:
                terms.append(
                    uncertainty.readability_term(division=self.resolution, name="readability")
                )
        terms.extend(self.extra_terms)
        return tuple(terms)

    def band_at(self, frequency: float | None) -> Band:
        """The accuracy band that applies at ``frequency`` (checked at load time to exist)."""
        for band in self.bands:
            if band.covers(frequency):
                return band
        raise LookupError(f"no accuracy band of range {self.id} covers {frequency} Hz")


@dataclass(frozen=True, kw_only=True)
class Procedure:
    """A loaded procedure: its validated file, resolved ranges, source text and hash."""

    file: ProcedureFile
    ranges: tuple[ResolvedRange, ...]
    rule: decision.Rule
    text: str
    source: str

    @property
    def sha256(self) -> str:
        """SHA-256 of the procedure text exactly as run."""
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()

    @property
    def id(self) -> str:
        return self.file.procedure.id

    @property
    def revision(self) -> str:
        return str(self.file.procedure.revision)


def load_procedure(path: str | Path) -> Procedure:
    """Load and fully validate the procedure file at ``path``.

    Raises
    ------
    ProcedureError
        Listing every problem, each as ``file:line: field: message``.
    """
    return _resolve(yamlfile.load_file(path))


def load_procedure_text(text: str, source: str = "<procedure>") -> Procedure:
    """Load a procedure from its text (as stored in a run record)."""
    return _resolve(yamlfile.load_text(text, source))


def _resolve(located: yamlfile.LocatedData) -> Procedure:
    early: list[str] = []
    try:
        yamlfile.check_format(located, FORMAT, "procedure")
    except ProcedureError as exc:
        early.extend(exc.problems)
    try:
        model = yamlfile.validate(ProcedureFile, located)
    except ProcedureError as exc:
        raise ProcedureError(early + exc.problems + _range_problems(located)) from None
    if early:
        raise ProcedureError(early)
    problems: list[str] = []
    ranges = []
    seen: dict[str, int] = {}
    for index, rng in enumerate(model.ranges):
        loc = ("ranges", index)
        if rng.id in seen:
            problems.append(
                located.problem(
                    loc + ("id",), f"duplicate range id {rng.id!r} (also range {seen[rng.id] + 1})"
                )
            )
        seen.setdefault(rng.id, index)
        resolved = _RangeResolver(located, loc, rng, problems).resolve()
        if resolved is not None:
            ranges.append(resolved)
    rule = _rule(located, model, problems)
    if problems:
        raise ProcedureError(problems)
    return Procedure(
        file=model, ranges=tuple(ranges), rule=rule, text=located.text, source=located.source
    )


def _range_problems(located: yamlfile.LocatedData) -> list[str]:
    """The problems of each range that is valid in itself, in a file whose structure is not:
    so that one pass over the file reports them all."""
    from pydantic import ValidationError

    data = located.data if isinstance(located.data, dict) else {}
    items = data.get("ranges")
    problems: list[str] = []
    if not isinstance(items, list):
        return problems
    for index, item in enumerate(items):
        try:
            rng = Range.model_validate(item)
        except ValidationError:
            continue  # its problems are among the structure's
        _RangeResolver(located, ("ranges", index), rng, problems).resolve()
    return problems


def _rule(
    located: yamlfile.LocatedData, model: ProcedureFile, problems: list[str]
) -> decision.Rule | None:
    """The decision rule the procedure states, with its parameter checked where it is written."""
    spec = model.decision
    params: dict[str, float] = {}
    if spec.guard_ratio is not None:
        if spec.rule not in ("guarded", "non-binary"):
            problems.append(
                located.problem(
                    ("decision", "guard-ratio"),
                    f"only the guarded and non-binary rules take a guard ratio, not {spec.rule}",
                )
            )
            return None
        params["ratio"] = float(spec.guard_ratio)
    if spec.risk_target is not None:
        if spec.rule != "risk":
            problems.append(
                located.problem(
                    ("decision", "risk-target"),
                    f"only the risk rule takes a risk target, not {spec.rule}",
                )
            )
            return None
        try:
            params["target"] = parse_value(spec.risk_target, "%") / 100.0
        except UnitError as exc:
            problems.append(located.problem(("decision", "risk-target"), str(exc)))
            return None
    try:
        return decision.rule_from_name(spec.rule, **params)
    except ValueError as exc:
        key = (
            "guard-ratio" if "ratio" in params else "risk-target" if "target" in params else "rule"
        )
        problems.append(located.problem(("decision", key), str(exc)))
        return None


class _RangeResolver:
    """Turn one validated range into SI floats, collecting problems with their locations."""

    def __init__(self, located: yamlfile.LocatedData, loc: tuple, rng: Range, problems: list[str]):
        self.located, self.loc, self.rng, self.problems = located, loc, rng, problems
        self.unit = unit_of(rng.function)
        self.ok = True

    def fail(self, field: tuple, message: str, *, missing: bool = False) -> None:
        self.problems.append(self.located.problem(self.loc + field, message, missing=missing))
        self.ok = False

    def quantity(
        self, field: tuple, text, unit: str, *, positive: bool = False, allow_zero: bool = True
    ) -> float | None:
        if text is None:
            return None
        try:
            value = parse_value(text, unit)
        except UnitError as exc:
            self.fail(field, str(exc))
            return None
        if positive and (value < 0 or (value == 0 and not allow_zero)):
            self.fail(
                field, f"must be {'positive' if not allow_zero else 'zero or more'}, got {text!r}"
            )
            return None
        return value

    def resolve(self) -> ResolvedRange | None:
        rng = self.rng
        ac = is_alternating(rng.function)
        full_scale = self.quantity(
            ("full-scale",), rng.full_scale, self.unit, positive=True, allow_zero=False
        )
        centre = self.quantity(("centre",), rng.centre, "Ω", positive=True, allow_zero=False)
        battery = self.quantity(("battery",), rng.battery, "V", positive=True, allow_zero=False)
        arc = self.quantity(("arc",), rng.arc, "deg", positive=True, allow_zero=False)
        if arc is not None and arc > 360:
            self.fail(("arc",), f"an arc of {arc:g} degrees is more than a full turn")
        lower = self._lower_end(full_scale)
        law = self._law(full_scale, centre, lower)
        resolution, resolution_domain = self._resolution()
        range_freq = self.quantity(
            ("frequency",), rng.frequency, "Hz", positive=True, allow_zero=False
        )
        if range_freq is not None and not ac:
            self.fail(("frequency",), f"a {rng.function} range takes no frequency")
        bands = self._bands(ac)
        points = self._points(ac, range_freq, full_scale, bands, law)
        if law is not None and bands:
            self._check_statements(law, arc, full_scale, resolution, resolution_domain, bands)
        extra = self._extra_terms(arc)
        if not self.ok:
            return None
        resolved = ResolvedRange(
            extra_terms=tuple(extra),
            id=rng.id,
            function=rng.function,
            unit=self.unit,
            law=law,
            arc=arc,
            full_scale=full_scale,
            resolution=resolution,
            resolution_domain=resolution_domain,
            bands=tuple(bands),
            read_on=rng.read_on,
            connect=rng.connect,
            points=tuple(points),
            battery=battery,
        )
        self._check_arithmetic(resolved)
        return resolved if self.ok else None

    def _check_arithmetic(self, rng: ResolvedRange) -> None:
        """Work out each point's window and budget now, so that numbers too extreme to compute
        are reported at their line instead of stopping a run."""
        for i, (nominal, freq) in enumerate(rng.points):
            try:
                win = tolerance.window(rng.band_at(freq).statement, nominal, rng.context)
                budget = uncertainty.budget(
                    terms=rng.meter_terms(), nominal=nominal, law=rng.law, domain=win.domain
                )
                if not all(math.isfinite(x) for x in (win.low, win.half_width, budget.expanded)):
                    raise ValueError("the numbers are too large to work with")
            except (ValueError, ArithmeticError) as exc:
                self.fail(("points", i), f"its window or uncertainty cannot be worked out: {exc}")

    def _lower_end(self, full_scale) -> float | None:
        """The value at the left stop of a linear scale (``lower-end``; see the model)."""
        rng = self.rng
        if rng.lower_end is None:
            if full_scale is None or not rng.function.startswith("dc-"):
                return 0.0
            negative = False
            for item in rng.points:
                at = item.at if hasattr(item, "at") else item
                try:
                    negative = negative or parse_value(at, self.unit) < 0
                except UnitError:
                    pass  # reported with the point
            return -full_scale if negative else 0.0
        if (rng.scale or "linear") != "linear":
            self.fail(
                ("lower-end",), f"a {rng.scale} scale ends at 0 Ω; lower-end is for linear scales"
            )
            return None
        if not rng.function.startswith("dc-"):
            self.fail(
                ("lower-end",),
                f"a {rng.function} range reads magnitudes from zero; lower-end is for DC ranges",
            )
            return None
        lower = self.quantity(("lower-end",), rng.lower_end, self.unit)
        if lower is not None and full_scale is not None and lower >= full_scale:
            self.fail(("lower-end",), f"must be below the full-scale value, got {rng.lower_end!r}")
            return None
        return lower

    def _law(self, full_scale, centre, lower=0.0) -> scales.ScaleLaw | None:
        rng = self.rng
        scale = rng.scale
        if scale is None:
            if rng.function == "resistance":
                self.fail(
                    ("scale",),
                    missing=True,
                    message="required for a resistance range: write scale: series-ohms (zero"
                    " at the right end, infinity at the left: most analog ohmmeters), shunt-ohms"
                    " (zero at the left end) or linear (a digital meter, with full-scale)",
                )
                return None
            scale = "linear"  # voltage and current ranges are linear unless they say otherwise
        if scale == "linear":
            if rng.centre is not None:
                self.fail(
                    ("centre",),
                    "a linear scale has no centre-scale value: remove centre, or write"
                    " scale: series-ohms (or shunt-ohms) for an ohms scale",
                )
            if full_scale is None or lower is None:
                if rng.full_scale is None:
                    self.fail(
                        ("full-scale",),
                        missing=True,
                        message="required for a linear scale: write full-scale: and the value"
                        f" at the right end of the scale, e.g. full-scale: 10 {self.unit}",
                    )
                return None
            return scales.Linear(low=lower, high=full_scale)
        if rng.function != "resistance":
            self.fail(
                ("scale",),
                f"a {scale} scale is for resistance, not {rng.function}: write"
                " scale: linear, or leave scale out",
            )
            return None
        if centre is None:
            if rng.centre is None:
                self.fail(
                    ("centre",),
                    missing=True,
                    message=f"required for a {scale} scale: write centre: and the value marked"
                    " at the middle of the scale, e.g. centre: 12 ohm",
                )
            return None
        return scales.make_law(scale, centre=centre)

    def _unit_or_degrees(self, text) -> str:
        return (
            "deg"
            if isinstance(text, str) and text.strip().endswith(("deg", "°", "degrees"))
            else self.unit
        )

    def _along_the_arc(self, text) -> str | None:
        """``"deg"`` or ``"%"`` when ``text`` is a step along the arc, else ``None``."""
        if isinstance(text, str) and text.strip().endswith("%"):
            return "%"
        unit = self._unit_or_degrees(text)
        return "deg" if unit == "deg" else None

    def _resolution(self) -> tuple[float | None, str | None]:
        """The step the operator reads to: ``resolution``, or ``minor-division`` × ``read-to``."""
        rng = self.rng
        if rng.resolution is not None and rng.minor_division is not None:
            self.fail(
                ("minor-division",),
                "give either resolution or minor-division (with read-to), not both",
            )
            return None, None
        if rng.read_to is not None and rng.minor_division is None:
            self.fail(
                ("read-to",), "read-to is a fraction of the minor division: give minor-division too"
            )
            return None, None
        key, text = (
            ("resolution", rng.resolution)
            if rng.resolution is not None
            else ("minor-division", rng.minor_division)
        )
        if text is None:
            # Without it the budget leaves out how well the meter can be read, and the TUR means
            # nothing.
            example = (
                "0.5 deg along the arc" if rng.function == "resistance" else f"0.05 {self.unit}"
            )
            self.problems.append(
                self.located.problem(
                    self.loc + ("resolution",),
                    "required, but missing: the step the meter is read to, e.g."
                    f" resolution: {example}, or minor-division: with read-to:"
                    " (a fraction of the division)",
                    missing=True,
                )
            )
            self.ok = False
            return None, None
        along = self._along_the_arc(text)
        if rng.scale in ("series-ohms", "shunt-ohms") and along is None:
            self.fail(
                (key,),
                f"on a {rng.scale} scale give the {key} along the arc, in degrees (0.5 deg)"
                " or percent of scale length (0.5 %): its divisions are not evenly spaced in"
                f" ohms, so {text!r} cannot stand for every point",
            )
            return None, None
        unit = along or self.unit
        value = self.quantity((key,), text, unit, positive=True, allow_zero=False)
        if value is None:
            return None, None
        if rng.read_to is not None:
            if not (math.isfinite(rng.read_to) and 0 < rng.read_to <= 1):
                self.fail(
                    ("read-to",),
                    "must be a fraction of a division, more than 0 and at most 1,"
                    f" got {rng.read_to!r}",
                )
                return None, None
            value *= rng.read_to
        return value, {"deg": "deg", "%": "length"}.get(unit, "value")

    def _extra_terms(self, arc: float | None) -> list[uncertainty.Term]:
        """The procedure's extra uncertainty contributions, as standard uncertainties."""
        terms = []
        for i, extra in enumerate(self.rng.uncertainty):
            field = ("uncertainty", i)
            unit = self._unit_or_degrees(extra.limit)
            limit = self.quantity(field + ("limit",), extra.limit, unit, positive=True)
            if limit is None:
                continue
            level = None
            if extra.level is not None:
                level_pct = self.quantity(field + ("level",), extra.level, "%", positive=True)
                if level_pct is None:
                    continue
                level = level_pct / 100.0
            try:
                u = uncertainty.standard_from_limit(
                    limit, distribution=extra.distribution, level=level
                )
            except ValueError as exc:
                self.fail(
                    field + (("level",) if extra.level is not None else ("distribution",)), str(exc)
                )
                continue
            if unit == "deg":
                if not arc:
                    self.fail(
                        field + ("limit",), "a contribution in degrees needs the arc of the scale"
                    )
                    continue
                terms.append(
                    uncertainty.Term(
                        name=extra.name,
                        standard_uncertainty=u / arc,
                        domain="deflection",
                        distribution=extra.distribution,
                    )
                )
            else:
                terms.append(
                    uncertainty.Term(
                        name=extra.name,
                        standard_uncertainty=u,
                        domain="value",
                        distribution=extra.distribution,
                    )
                )
        return terms

    def _bands(self, ac: bool) -> list[Band]:
        accuracy = self.rng.accuracy
        items = accuracy if isinstance(accuracy, list) else [accuracy]
        listed = isinstance(accuracy, list)
        bands = []
        for i, acc in enumerate(items):
            field = ("accuracy", i) if listed else ("accuracy",)
            band = self._band(field, acc, ac, listed)
            if band is not None:
                bands.append(band)
        if listed and len(items) == 0:
            self.fail(("accuracy",), "give at least one accuracy statement")
        return bands

    def _band(self, field: tuple, acc: Accuracy, ac: bool, listed: bool) -> Band | None:
        given = {
            name: getattr(acc, name)
            for name in (*_ARC_FORMS, *_VALUE_FORMS)
            if getattr(acc, name) is not None
        }
        arc_forms = [n for n in given if n in _ARC_FORMS]
        value_forms = [n for n in given if n in _VALUE_FORMS]
        if not given:
            self.fail(
                field, "give one of " + ", ".join([*_ARC_FORMS.values(), *_VALUE_FORMS.values()])
            )
            return None
        if len(arc_forms) > 1 or (arc_forms and value_forms):
            names = [_ARC_FORMS.get(n) or _VALUE_FORMS[n] for n in given]
            self.fail(
                field,
                f"{' and '.join(names)} cannot be combined; give one of"
                f" {', '.join(_ARC_FORMS.values())},"
                f" or a sum of {', '.join(_VALUE_FORMS.values())}",
            )
            return None
        for name in list(given):
            if name == "absolute":
                continue
            key = _ARC_FORMS.get(name) or _VALUE_FORMS[name]
            value = self._accuracy_number(field + (key,), name, given[name])
            if value is None:
                return None
            given[name] = value
        low = high = None
        if acc.from_ is not None or acc.to is not None:
            if not ac:
                self.fail(field, "frequency bands ('from', 'to') are for AC ranges only")
                return None
            low = self.quantity(field + ("from",), acc.from_, "Hz", positive=True)
            high = self.quantity(field + ("to",), acc.to, "Hz", positive=True)
            if low is None or high is None:
                if acc.from_ is None or acc.to is None:
                    self.fail(field, "a frequency band needs both 'from' and 'to'")
                return None
            if high < low:
                self.fail(field + ("to",), "the band's upper frequency is below its lower one")
                return None
        elif listed and len(self.rng.accuracy) > 1:
            self.fail(field, "with several accuracy statements, each needs its band ('from', 'to')")
            return None
        if arc_forms:
            name = arc_forms[0]
            value = given[name]
            statement = {
                "percent_of_full_scale": lambda: tolerance.PercentOfFullScale(percent=value),
                "class_index": lambda: tolerance.ClassIndex(index=value),
                "degrees": lambda: tolerance.DegreesOfArc(degrees=value),
                "percent_of_length": lambda: tolerance.PercentOfLength(percent=value),
            }[name]()
        else:
            absolute = self.quantity(field + ("absolute",), acc.absolute, self.unit, positive=True)
            if acc.absolute is not None and absolute is None:
                return None
            statement = tolerance.ValueStatement(
                reading=given.get("percent_of_reading", 0.0),
                range=given.get("percent_of_range", 0.0),
                counts=given.get("counts", 0.0),
                absolute=absolute or 0.0,
            )
        return Band(
            statement=statement, low_hz=low, high_hz=high, text=describe_accuracy(acc, given)
        )

    def _accuracy_number(self, field: tuple, name: str, text) -> float | None:
        """One term of an accuracy statement: a number, or with its unit (``2 %``, ``3 deg``)."""
        unit, example = _ACCURACY_UNITS[name]
        try:
            value, dimension = parse_quantity(text, None)
        except UnitError:
            dimension, value = "?", math.nan
        if dimension not in ("", unit) or not math.isfinite(value) or value < 0:
            self.fail(field, f"must be a number, zero or more, {example}; got {text!r}")
            return None
        return value

    def _points(
        self, ac: bool, range_freq, full_scale, bands: list[Band], law=None
    ) -> list[tuple[float, float | None]]:
        points = []
        for i, item in enumerate(self.rng.points):
            field = ("points", i)
            at = item.at if hasattr(item, "at") else item
            freq_text = getattr(item, "frequency", None)
            nominal = self.quantity(field + (("at",) if hasattr(item, "at") else ()), at, self.unit)
            freq = self.quantity(
                field + ("frequency",), freq_text, "Hz", positive=True, allow_zero=False
            )
            if nominal is None or (freq_text is not None and freq is None):
                continue
            if freq_text is not None and not ac:
                self.fail(field + ("frequency",), f"a {self.rng.function} point takes no frequency")
                continue
            freq = freq if freq is not None else range_freq
            if ac and freq is None:
                self.fail(
                    field,
                    "an AC point needs a frequency (give 'frequency' on the range or the point)",
                )
                continue
            if self.rng.function == "resistance" and nominal < 0:
                self.fail(field, f"a resistance cannot be negative, got {at!r}")
                continue
            if full_scale is not None and abs(nominal) > full_scale * (1 + 1e-12):
                self.fail(
                    field,
                    f"{at!r} is beyond the full-scale value of the range"
                    f" (full-scale: {self.rng.full_scale});"
                    " a point is at most the full-scale value",
                )
                continue
            if isinstance(law, scales.Linear) and nominal < law.low:
                self.fail(
                    field,
                    f"{at!r} is below the lower end of the scale ({law.low:g} {self.unit});"
                    " give lower-end for a zero-centre scale or a meter of either polarity",
                )
                continue
            if ac and nominal < 0:
                self.fail(
                    field, f"an AC value is an rms magnitude and cannot be negative, got {at!r}"
                )
                continue
            if bands and not any(b.covers(freq) for b in bands):
                self.fail(field, f"no accuracy band of the range covers {freq:g} Hz")
                continue
            points.append((nominal, freq))
        return points

    def _check_statements(self, law, arc, full_scale, resolution, resolution_domain, bands) -> None:
        ctx = tolerance.RangeContext(
            law=law,
            arc=arc,
            full_scale=full_scale,
            count=resolution if resolution_domain == "value" else None,
        )
        for band in bands:
            try:
                band.statement.half_width(full_scale or 1.0, ctx)
            except ValueError as exc:
                self.fail(("accuracy",), str(exc))


#: How each term of an accuracy statement is printed on the certificate.
_WORDS = (
    ("percent_of_full_scale", "{:g} % of full scale"),
    ("class_index", "class {:g}"),
    ("degrees", "{:g}° of arc"),
    ("percent_of_length", "{:g} % of scale length"),
    ("percent_of_reading", "{:g} % of reading"),
    ("percent_of_range", "{:g} % of range"),
    ("counts", "{:g} counts"),
    ("absolute", "{}"),
)


def describe_accuracy(acc: Accuracy, values: dict | None = None) -> str:
    """The accuracy statement in words, as printed on the certificate; ``values`` are its terms
    as numbers (when written with a unit, ``"2 %"``), by field name."""
    values = values or {}
    parts = [
        words.format(values.get(name, getattr(acc, name)))
        for name, words in _WORDS
        if getattr(acc, name) is not None
    ]
    text = "± (" + " + ".join(parts) + ")" if len(parts) > 1 else "± " + parts[0] if parts else ""
    if acc.from_ is not None:
        text += f", {acc.from_} to {acc.to}"
    return text
