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
from typing import Literal

from verirun.metrology.scales import Linear, ScaleLaw

Domain = Literal["value", "deflection"]


def _check_amount(owner: object, *names: str) -> None:
    # A negative or infinite term would silently narrow or void a window; refuse it up front.
    for name in names:
        amount = getattr(owner, name)
        if not (math.isfinite(amount) and amount >= 0):
            raise ValueError(f"{type(owner).__name__}.{name} must be finite and not negative,"
                             f" got {amount!r}")


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


@dataclass(frozen=True, kw_only=True)
class PercentOfFullScale:
    """± ``percent`` % of the fiducial value (the span of a linear scale)."""

    percent: float
    kind = "percent-of-full-scale"

    def __post_init__(self) -> None:
        _check_amount(self, "percent")

    def half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, float]:
        fiducial = ctx.full_scale if ctx.full_scale is not None else ctx.law.fiducial
        if fiducial is None:
            raise ValueError("percent of full scale needs a linear scale; state an ohms scale's"
                             " accuracy in degrees of arc or percent of scale length")
        return "value", self.percent / 100.0 * abs(fiducial)


@dataclass(frozen=True, kw_only=True)
class ClassIndex:
    """Accuracy class (IEC 60051-1): ± ``index`` % of the fiducial value.

    On a linear scale the fiducial value is the full-scale (span) value; on an ohms scale it is
    the scale length, so the class index is a percent of scale length there.
    """

    index: float
    kind = "class"

    def __post_init__(self) -> None:
        _check_amount(self, "index")

    def half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, float]:
        if isinstance(ctx.law, Linear):
            fiducial = ctx.full_scale if ctx.full_scale is not None else ctx.law.fiducial
            return "value", self.index / 100.0 * abs(fiducial)
        return "deflection", self.index / 100.0


@dataclass(frozen=True, kw_only=True)
class DegreesOfArc:
    """± ``degrees`` of arc along the scale."""

    degrees: float
    kind = "degrees"

    def __post_init__(self) -> None:
        _check_amount(self, "degrees")

    def half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, float]:
        if not ctx.arc:
            raise ValueError("a tolerance in degrees needs the arc span of the scale")
        return "deflection", self.degrees / ctx.arc


@dataclass(frozen=True, kw_only=True)
class PercentOfLength:
    """± ``percent`` % of the scale length."""

    percent: float
    kind = "percent-of-length"

    def __post_init__(self) -> None:
        _check_amount(self, "percent")

    def half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, float]:
        return "deflection", self.percent / 100.0


@dataclass(frozen=True, kw_only=True)
class ValueStatement:
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

    def half_width(self, nominal: float, ctx: RangeContext) -> tuple[Domain, float]:
        width = abs(nominal) * self.reading / 100.0 + self.absolute
        if self.range:
            fiducial = ctx.full_scale if ctx.full_scale is not None else ctx.law.fiducial
            if fiducial is None:
                raise ValueError("percent of range needs the range's full-scale value")
            width += abs(fiducial) * self.range / 100.0
        if self.counts:
            if ctx.count is None:
                raise ValueError("a tolerance in counts needs the value of one count (resolution)")
            width += self.counts * ctx.count
        return "value", width


Statement = PercentOfFullScale | ClassIndex | DegreesOfArc | PercentOfLength | ValueStatement


# Made for every test point of a plan and never changed after; not frozen because a frozen
# dataclass takes twice as long to build, but hashable like one, as the frozen test point
# that holds it is.
@dataclass(kw_only=True, slots=True, unsafe_hash=True)
class Window:
    """The allowable window at one nominal value.

    ``high`` is ``math.inf`` when the window is unbounded above (an arc tolerance reaching the
    infinity end of a series ohms scale). ``domain`` and ``half_width`` say where the tolerance
    was stated: ``half_width`` is in the quantity's base unit for ``"value"``, and a fraction of
    scale length for ``"deflection"``.
    """

    nominal: float
    low: float
    high: float
    domain: Domain
    half_width: float

    def contains(self, reading: float) -> bool:
        """True when ``reading`` lies inside the window, limits included."""
        return self.low <= reading <= self.high

    @property
    def bounded(self) -> bool:
        """False when the upper limit is unbounded."""
        return math.isfinite(self.high)


def window(statement: Statement, nominal: float, ctx: RangeContext) -> Window:
    """The allowable window of ``statement`` at ``nominal`` on the range described by ``ctx``."""
    domain, half = statement.half_width(nominal, ctx)
    if half < 0 or not math.isfinite(half):
        raise ValueError(f"tolerance half-width must be finite and not negative, got {half}")
    if domain == "value":
        low, high = nominal - half, nominal + half
        if not isinstance(ctx.law, Linear):
            low = max(low, 0.0)  # a resistance cannot read below zero
        return Window(nominal=nominal, low=low, high=high, domain=domain, half_width=half)
    f0 = ctx.law.fraction(nominal)
    a, b = ctx.law.value(f0 - half), ctx.law.value(f0 + half)
    # value(fraction(x)) can miss x by an ulp; a window always holds its own nominal.
    low, high = min(a, b, nominal), max(a, b, nominal)
    return Window(nominal=nominal, low=low, high=high, domain=domain, half_width=half)


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
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
    if win.domain == "value":
        error = reading - win.nominal
    else:
        error = law.fraction(reading) - law.fraction(win.nominal)
    pct = 100.0 * error / win.half_width if win.half_width > 0 else None
    return Deviation(error=error, percent_of_tolerance=pct)
