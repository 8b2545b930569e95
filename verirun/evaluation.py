"""Evaluate one reading against its test point: error, percent of tolerance and verdict.

A thin join of the plan (which carries each point's window) and the pure metrology functions;
the engine, the console, the run record and ``verirun window`` all evaluate through here so that
a verdict is worked out one way only. The engine counts each reading's :func:`verdict` as it is
taken (the rule's statement alone); the console shows, and the record holds, its whole
:func:`evaluate` (the same statement, with the error, U, TUR and limits beside it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from fractions import Fraction

from verirun.metrology import decision, tolerance
from verirun.metrology.exact import as_written
from verirun.metrology.uncertainty import round_uncertainty
from verirun.procedure.plan import TestPoint
from verirun.units import format_limit, format_typed, row_exponent, typed_decimal, unit_text


@dataclass(frozen=True, kw_only=True, slots=True)
class Result:
    """The evaluation of one reading.

    ``error`` and ``expanded`` are in ``error_unit``: the range's unit for a tolerance stated on
    the value, degrees of arc for one stated in degrees, percent of scale length for one stated
    along the scale. ``expanded_value`` is the expanded uncertainty carried into the range's
    unit at the nominal; ``acceptance`` the acceptance limits in the range's unit (``None`` when
    the rule leaves no acceptance zone). ``*_pct`` are percentages of the tolerance half-width,
    measured from the nominal in the tolerance's own domain.

    ``expanded`` is U as reported (two significant digits, GUM 7.2.6), the number the guard
    bands are worked from. ``interval`` is the coverage interval of the reading in the range's
    unit: ``reading ± U`` for a tolerance stated on the value, and for one stated along an ohms
    scale the interval ``f(reading) ± U`` mapped through the scale law (asymmetric in ohms, and
    open, ``inf``, where it reaches the end of the arc). ``exact_acceptance`` and ``outer`` are
    the exact acceptance limits and, under the non-binary rule, the limits ``w`` outside the
    tolerance (see :class:`~verirun.metrology.decision.Decision`); ``within_tolerance`` whether
    the reading lies within the tolerance limits.
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
    interval: tuple[float, float] | None = None
    exact_acceptance: tuple | None = None
    outer: tuple | None = None
    within_tolerance: bool = True


@dataclass(frozen=True, kw_only=True, slots=True)
class Site:
    """What evaluating a reading needs to know of the point it was taken at: a test point of a
    plan, or the numbers ``verirun window`` is given."""

    window: tolerance.Window
    law: object
    unit: str
    budget: object
    rule: decision.Rule
    bare_factor: float = 1.0  # the unit a bare number is typed in, as a factor to base units

    @classmethod
    def of(cls, point: "TestPoint | Site") -> "Site":
        """The site of a test point (a site is its own)."""
        if isinstance(point, Site):
            return point
        from verirun.readings import reading_unit

        return cls(
            window=point.window,
            law=point.range.law,
            unit=point.unit,
            budget=point.budget,
            rule=point.rule,
            bare_factor=reading_unit(point.range)[1],
        )


def error_unit(point: TestPoint) -> tuple[str, float]:
    """The unit errors at ``point`` are reported in, and the factor from the tolerance's domain."""
    if point.window.domain == "value":
        return point.unit, 1.0
    return point.window.unit, float(point.window.per_unit)


def coverage_interval(site: Site, reading: float, expanded) -> tuple[float, float] | None:
    """The interval ``reading ± U`` in the range's unit, ``U`` exact in the tolerance's domain;
    along an ohms scale it is mapped through the scale law (see :class:`Result`)."""
    if expanded == 0:
        return None
    law = site.law
    y = as_written(reading)
    if site.window.domain == "value":
        return float(y - expanded), float(y + expanded)
    f = law.exact_fraction(y)
    a, b = law.exact_value(f - expanded), law.exact_value(f + expanded)
    return float(min(a, b)), float(max(a, b))


def verdict(point: "TestPoint | Site", reading: float) -> decision.Verdict:
    """The verdict :func:`evaluate` gives ``reading`` at ``point``, alone (see
    :func:`verirun.metrology.decision.verdict`)."""
    law = point.law if isinstance(point, Site) else point.range.law
    return decision.verdict(
        point.rule, window=point.window, law=law, budget=point.budget, reading=reading
    )


def evaluate(point: "TestPoint | Site", reading: float) -> Result:
    """Evaluate ``reading`` at ``point`` under the procedure's decision rule."""
    site = Site.of(point)
    win = site.window
    law = site.law
    dev = tolerance.deviation(win, reading, law)
    unit, factor = error_unit(site)
    judged = decision.judge(site.rule, window=win, law=law, budget=site.budget, reading=reading)
    half = win.half_width
    n = as_written(win.nominal)
    centre = n if win.domain == "value" else law.exact_fraction(n)
    zone = judged.outcome.acceptance

    def pct(x: float) -> float | None:
        return 100.0 * x / half if half > 0 and math.isfinite(x) else None

    empty = zone.empty
    expanded = judged.expanded  # U as reported, exact, in the tolerance's domain
    expanded_value = float(expanded) if win.domain == "value" else site.budget.expanded_value
    return Result(
        reading=reading,
        error=dev.error * factor,
        error_unit=unit,
        percent_of_tolerance=dev.percent_of_tolerance,
        verdict=judged.verdict,
        expanded=float(expanded * win.per_unit),
        expanded_value=expanded_value,
        k=site.budget.k,
        tur=judged.tur,
        conformance=judged.conformance,
        acceptance=judged.acceptance,
        expanded_pct=pct(float(expanded)),
        accept_low_pct=None if empty else pct(float(zone.low - centre)),
        accept_high_pct=None if empty else pct(float(zone.high - centre)),
        interval=coverage_interval(site, reading, expanded),
        exact_acceptance=judged.exact_acceptance,
        outer=judged.outer,
        within_tolerance=judged.within_tolerance,
    )


def _decimal_text(value: Decimal, unit: str, *, signed: bool) -> str:
    """``value`` as fixed-point text with ``unit``; signed when asked, but zero never is."""
    text = f"{value:f}"
    if value == 0:
        text = text.lstrip("-")  # never "+0" or "-0"
    elif signed and not text.startswith("-"):
        text = "+" + text
    return f"{text} {unit}" if unit else text


def _in_domain_unit(value: Decimal, unit: str, *, signed: bool) -> str:
    """An error or U along the scale: ``+0.8°``, ``0.42 % of length``."""
    text = _decimal_text(value, "", signed=signed)
    return f"{text}°" if unit == "deg" else f"{text} {unit}"


def shown(
    point: "TestPoint | Site", result: Result | None = None, typed: str | None = None
) -> dict:
    """Every number of one row as printed, under one SI prefix: the one formatter of verirun.

    The console's result line, ``verirun window``, the run record and the certificate print
    these texts. Without ``typed`` (``verirun window`` with no reading) the result's figures
    are shown under the prefix of the limits and ``reading`` is ``None``. The reading is shown as
    ``typed`` (its digits kept); each limit with enough digits that the reading shown, compared with
    the limit shown, gives the verdict shown; U to two significant digits (GUM 7.2.6) and the error
    rounded to the same decimal place; zero never signed. Keys: ``unit`` (the row's prefixed unit),
    ``low``, ``high`` (tolerance limits), and for a reading ``reading``, ``accept_low``,
    ``accept_high`` (acceptance limits, ``None`` when the rule leaves none), ``outer_low``,
    ``outer_high`` (non-binary: ``w`` outside the tolerance), ``error``, ``U_spec`` (U in the
    error's unit), ``U`` (U in the range's unit where the tolerance is stated on the value, else
    ``None``), ``interval`` (the coverage interval in the range's unit, as the scale law maps it).
    """
    site = Site.of(point)
    win = site.window
    unit = site.unit
    reading = None
    places = 0
    if typed is not None and result is not None:
        number, exponent = typed_decimal(typed, unit, bare_factor=site.bare_factor)
        reading = as_written(result.reading)
        places = max(-number.as_tuple().exponent, 0)
    else:  # the limits alone, or a result judged at the nominal with no reading typed
        exponent = row_exponent(unit, win.nominal, win.high if math.isfinite(win.high) else None)

    def limit(value, side: str) -> str:
        return format_limit(value, unit, exponent, reading=reading, side=side, places=places)

    out = {
        "unit": unit_text(unit, exponent),
        "nominal": format_limit(as_written(win.nominal), unit, exponent, places=0),
        "low": limit(win.exact_low, "low"),
        "high": limit(win.exact_high, "high"),
    }
    if result is None:
        return out
    out["reading"] = (
        format_typed(typed, unit, exponent, bare_factor=site.bare_factor)
        if typed is not None
        else None
    )
    accept = result.exact_acceptance
    out["accept_low"] = limit(accept[0], "low") if accept else None
    out["accept_high"] = limit(accept[1], "high") if accept else None
    outer = result.outer
    out["outer_low"] = limit(outer[0], "low") if outer else None
    out["outer_high"] = limit(outer[1], "high") if outer else None
    exact_error = _exact_error(site, as_written(result.reading))
    if result.expanded > 0:
        u = round_uncertainty(result.expanded)
        place = Decimal(1).scaleb(u.as_tuple().exponent)
        error = Decimal(exact_error.numerator) / Decimal(exact_error.denominator)
        error = error.quantize(place, rounding=ROUND_HALF_EVEN)
        if win.domain == "value":
            scale = Decimal(1).scaleb(-exponent)
            out["error"] = _decimal_text(error * scale, unit_text(unit, exponent), signed=True)
            out["U_spec"] = _decimal_text(u * scale, unit_text(unit, exponent), signed=False)
            out["U"] = out["U_spec"]
        else:
            out["error"] = _in_domain_unit(error, win.unit, signed=True)
            out["U_spec"] = _in_domain_unit(u, win.unit, signed=False)
            out["U"] = None
        low, high = result.interval
        out["interval"] = (
            f"{format_limit(as_written(low), unit, exponent, places=places)} to"
            f" {format_limit(as_written(high), unit, exponent, places=places)}"
        )
    else:
        out["error"] = (
            _decimal_text(
                _exact_decimal(exact_error * Fraction(10) ** -exponent),
                unit_text(unit, exponent),
                signed=True,
            )
            if win.domain == "value"
            else _in_domain_unit(Decimal(repr(round(float(exact_error), 6))), win.unit, signed=True)
        )
        out["U_spec"] = out["U"] = "—"
        out["interval"] = None
    return out


def _exact_error(site: Site, reading: Fraction) -> Fraction:
    """The error of ``reading`` in the error's unit, exact."""
    win = site.window
    n = as_written(win.nominal)
    if win.domain == "value":
        return reading - n
    law = site.law
    return (law.exact_fraction(reading) - law.exact_fraction(n)) * win.per_unit


def _exact_decimal(q: Fraction) -> Decimal:
    d = Decimal(q.numerator) / Decimal(q.denominator)
    return d.normalize() if d != 0 else Decimal(0)
