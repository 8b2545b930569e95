"""Accuracy statements and the allowable window they give at a nominal value.

Each statement is evaluated in the domain where it is made:

- in the *value* domain (volts, amperes, ohms): percent of reading, percent of full scale or a
  class index on a linear scale, percent of reading plus percent of range, percent of reading
  plus counts, an absolute value;
- in the *deflection* domain (fraction of scale length): degrees of arc, percent of scale length,
  a class index on an ohms scale (whose fiducial length is the scale length).

A deflection-domain half-width ``df`` is mapped back through the scale law only at the edges:
``low, high = sorted(law.value(f0 - df), law.value(f0 + df))``. On a series ohms scale the
upper limit is unbounded (``math.inf``) once ``f0 - df <= 0``, and the lower limit is ``0`` once
``f0 + df >= 1``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Literal

from verirun.metrology.exact import Exact, as_written
from verirun.metrology.scales import Linear, ScaleLaw, ShuntOhms

Domain = Literal["value", "deflection"]


def _check_amount(owner: object, *names: str) -> None:
    # A negative or infinite term would silently narrow or void a window; refuse it up front.
    for name in names:
        amount = getattr(owner, name)
        if not (math.isfinite(amount) and amount >= 0):
            raise ValueError(
                f"{type(owner).__name__}.{name} must be finite and not negative, got {amount!r}"
            )


@dataclass(frozen=True, kw_only=True)
class RangeContext:
    """What a statement needs to know about the range it is stated for.

    Parameters
    ----------
    law
        The scale law of the range.
    arc
        Arc span of the scale in degrees (needed by degree statements).
    full_scale
        The range value (needed by percent-of-range statements; defaults to the law's fiducial).
    count
        The value of one count (least significant digit) of a digital range.
    """

    law: ScaleLaw
    arc: float | None = None
    full_scale: float | None = None
    count: float | None = None

    def __post_init__(self) -> None:
        for name in ("arc", "full_scale", "count"):
            amount = getattr(self, name)
            if amount is not None and not math.isfinite(amount):
                raise ValueError(f"RangeContext.{name} must be finite, got {amount!r}")
        for name in ("arc", "count"):
            amount = getattr(self, name)
            if amount is not None and amount <= 0:
                raise ValueError(f"RangeContext.{name} must be positive, got {amount!r}")


class _Statement:
    """What every accuracy statement shares: its half-width as a float, from the exact one."""

    __slots__ = ()

    def half_width(self, nominal: float, ctx: "RangeContext") -> tuple[Domain, float]:
        """The half-width at ``nominal`` and the domain it is in (see :meth:`exact_half_width`)."""
        domain, half = self.exact_half_width(nominal, ctx)
        try:
            return domain, float(half)
        except OverflowError:
            raise ValueError("the numbers are too large to work with") from None

    def exact_half_width(self, nominal: float, ctx: "RangeContext") -> tuple[Domain, Fraction]:
        """The half-width at ``nominal``, in exact arithmetic of the numbers as written: in the
        quantity's base unit for ``"value"``, a fraction of scale length for ``"deflection"``."""
        raise NotImplementedError


def _fiducial(ctx: "RangeContext") -> float | None:
    return ctx.full_scale if ctx.full_scale is not None else ctx.law.fiducial


@dataclass(frozen=True, kw_only=True)
class PercentOfFullScale(_Statement):
    """± ``percent`` % of the fiducial value (the span of a linear scale)."""

    percent: float
    kind = "percent-of-full-scale"

    def __post_init__(self) -> None:
        _check_amount(self, "percent")

    def exact_half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, Fraction]:
        fiducial = _fiducial(ctx)
        if fiducial is None:
            raise ValueError(
                "percent of full scale needs a linear scale; state an ohms scale's"
                " accuracy in degrees of arc or percent of scale length"
            )
        return "value", as_written(self.percent) / 100 * abs(as_written(fiducial))


@dataclass(frozen=True, kw_only=True)
class ClassIndex(_Statement):
    """Accuracy class (IEC 60051-1): ± ``index`` % of the fiducial value.

    On a linear scale the fiducial value is the full-scale (span) value; on an ohms scale it is
    the scale length, so the class index is a percent of scale length there.
    """

    index: float
    kind = "class"

    def __post_init__(self) -> None:
        _check_amount(self, "index")

    def exact_half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, Fraction]:
        if isinstance(ctx.law, Linear):
            return "value", as_written(self.index) / 100 * abs(as_written(_fiducial(ctx)))
        return "deflection", as_written(self.index) / 100


@dataclass(frozen=True, kw_only=True)
class DegreesOfArc(_Statement):
    """± ``degrees`` of arc along the scale."""

    degrees: float
    kind = "degrees"

    def __post_init__(self) -> None:
        _check_amount(self, "degrees")

    def exact_half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, Fraction]:
        if not ctx.arc:
            raise ValueError("a tolerance in degrees needs the arc span of the scale")
        return "deflection", as_written(self.degrees) / as_written(ctx.arc)


@dataclass(frozen=True, kw_only=True)
class PercentOfLength(_Statement):
    """± ``percent`` % of the scale length."""

    percent: float
    kind = "percent-of-length"

    def __post_init__(self) -> None:
        _check_amount(self, "percent")

    def exact_half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, Fraction]:
        return "deflection", as_written(self.percent) / 100


@dataclass(frozen=True, kw_only=True)
class ValueStatement(_Statement):
    """± (``reading`` % of reading + ``range`` % of range + ``counts`` counts + ``absolute``).

    Any term may be zero; percent of reading, percent of reading plus percent of range, percent of
    reading plus counts and an absolute limit are all this one statement.
    """

    reading: float = 0.0
    range: float = 0.0
    counts: float = 0.0
    absolute: float = 0.0
    kind = "value"

    def __post_init__(self) -> None:
        _check_amount(self, "reading", "range", "counts", "absolute")

    def exact_half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, Fraction]:
        width = abs(as_written(nominal)) * as_written(self.reading) / 100 + as_written(
            self.absolute
        )
        if self.range:
            fiducial = _fiducial(ctx)
            if fiducial is None:
                raise ValueError("percent of range needs the range's full-scale value")
            width += abs(as_written(fiducial)) * as_written(self.range) / 100
        if self.counts:
            if ctx.count is None:
                raise ValueError("a tolerance in counts needs the value of one count (resolution)")
            width += as_written(self.counts) * as_written(ctx.count)
        return "value", width


Statement = PercentOfFullScale | ClassIndex | DegreesOfArc | PercentOfLength | ValueStatement


@dataclass(frozen=True, kw_only=True, slots=True)
class Window:
    """The allowable window at one nominal value.

    ``low`` and ``high`` are the limits in the quantity's base unit; ``high`` is ``math.inf``
    when the window is unbounded above (an arc tolerance reaching the infinity end of a series
    ohms scale). ``domain`` and ``half_width`` say where the tolerance was stated: ``half_width``
    is in the quantity's base unit for ``"value"``, and a fraction of scale length for
    ``"deflection"``.

    ``zone`` is the tolerance zone where decisions are taken: the limits in the tolerance's own
    domain in exact arithmetic of the numbers as written (see :mod:`verirun.metrology.exact`).
    On an ohms scale a side whose limit lies at or past an end of the arc is open (``±inf``):
    the pointer cannot go there. ``exact_low`` and ``exact_high`` are the same limits in the
    value domain, exact. ``per_unit`` is how many reporting units make one unit of the domain:
    1 for the value, the arc for degrees, 100 for percent of scale length; ``unit`` names the
    reporting unit (``""`` for the quantity's own, ``"deg"``, ``"% of length"``). ``stops`` is
    true on an ohms scale, whose arc ends at two stops (0 and infinity); ``admits_rest`` true
    when the zone holds the pointer's rest position there, so that a meter whose circuit is open
    (the pointer never moves) would pass.
    """

    nominal: float
    low: float
    high: float
    domain: Domain
    half_width: float
    zone: tuple[Exact, Exact] = (-math.inf, math.inf)
    exact_low: Exact = -math.inf
    exact_high: Exact = math.inf
    per_unit: Fraction = Fraction(1)
    unit: str = ""
    stops: bool = False
    admits_rest: bool = False

    def contains(self, reading: float) -> bool:
        """True when ``reading`` lies inside the window, limits included, in exact arithmetic
        of the numbers as written."""
        return self.exact_low <= as_written(reading) <= self.exact_high

    @property
    def bounded(self) -> bool:
        """False when the upper limit is unbounded."""
        return math.isfinite(self.high)

    @property
    def reachable(self) -> tuple[Exact, Exact]:
        """The tolerance zone cut to the ends of the arc on a scale whose arc ends at stops (an
        ohms scale, 0 .. 1 of its length); elsewhere the zone itself."""
        low, high = self.zone
        if self.stops and self.domain == "deflection":
            low, high = max(low, 0), min(high, 1)
        return low, high


def _report_unit(statement: "Statement") -> tuple[Fraction, str]:
    if isinstance(statement, DegreesOfArc):
        return Fraction(1), "deg"
    return Fraction(100), "% of length"


def window(statement: Statement, nominal: float, ctx: RangeContext) -> Window:
    """The allowable window of ``statement`` at ``nominal`` on the range described by ``ctx``."""
    domain, half = statement.exact_half_width(nominal, ctx)
    if half < 0:
        raise ValueError(f"tolerance half-width must be finite and not negative, got {float(half)}")
    n = as_written(nominal)
    ohms = not isinstance(ctx.law, Linear)
    if domain == "value":
        low, high = n - half, n + half
        if ohms:
            low = max(low, Fraction(0))  # a resistance cannot read below zero
        zone = (low, high)
        per_unit, unit = Fraction(1), ""
    else:
        f0 = ctx.law.exact_fraction(n)
        below, above = f0 - half, f0 + half
        zone = (below, above)
        if ohms:
            # An ohms scale ends at 0 and at infinity: a limit at or past an end of the arc is
            # no limit at all (the pointer cannot go there), so that side of the zone is open.
            zone = (below if below > 0 else -math.inf, above if above < 1 else math.inf)
        a, b = ctx.law.exact_value(below), ctx.law.exact_value(above)
        low, high = min(a, b, n), max(a, b, n)
        per_unit, unit = _report_unit(statement)
        if unit == "deg":
            per_unit = as_written(ctx.arc)
    rest = ohms and (
        zone[0] <= 0
        if domain == "value" and isinstance(ctx.law, ShuntOhms)
        else domain == "deflection" and zone[0] == -math.inf
    )
    try:
        float_low, float_high, float_half = float(low), float(high), float(half)
    except OverflowError:
        raise ValueError("the numbers are too large to work with") from None
    # The float limits hold the float nominal even where it is not a decimal of 15 digits.
    return Window(
        nominal=nominal,
        low=min(float_low, nominal),
        high=max(float_high, nominal),
        domain=domain,
        half_width=float_half,
        zone=zone,
        exact_low=low,
        exact_high=high,
        per_unit=per_unit,
        unit=unit,
        stops=ohms,
        admits_rest=rest,
    )


@dataclass(frozen=True, kw_only=True, slots=True)
class Deviation:
    """How far a reading lies from its nominal, in the domain the tolerance is stated in.

    ``error`` is ``reading - nominal`` in base units for a value-domain statement and
    ``f(reading) - f(nominal)`` as a fraction of scale length for a deflection-domain one
    (so on a series ohms scale a reading above nominal gives a negative error).
    ``percent_of_tolerance`` is ``100 * error / half_width``.
    """

    error: float
    percent_of_tolerance: float | None


def deviation(win: Window, reading: float, law: ScaleLaw) -> Deviation:
    """The error of ``reading`` against ``win``, in the statement's own domain."""
    y, n = as_written(reading), as_written(win.nominal)
    if win.domain == "value":
        exact = y - n
    else:
        exact = law.exact_fraction(y) - law.exact_fraction(n)
    if isinstance(exact, float):  # a reading at infinity
        return Deviation(error=exact, percent_of_tolerance=None)
    error = float(exact)
    pct = float(100 * exact / Fraction(win.half_width)) if win.half_width > 0 else None
    return Deviation(error=error, percent_of_tolerance=pct)
