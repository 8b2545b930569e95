"""Scale laws: how a meter's pointer deflection relates to the quantity it measures.

A deflection is expressed as the *fraction* ``f`` of the scale length (0 at the left stop, 1 at
full deflection). Multiply by the arc span in degrees for degrees of arc.

- :class:`Linear`: ``f = (x - low) / (high - low)``.
- :class:`SeriesOhms`: series-type ohmmeter, ``f = Rc / (Rc + Rx)``; full deflection at 0 Ω,
  none at infinity, half-scale at ``Rx = Rc`` (the centre-scale value, equal to the internal
  resistance of the range).
- :class:`ShuntOhms`: shunt-type ohmmeter, ``f = Rx / (Rx + Rc)``; no deflection at 0 Ω, full at
  infinity, half-scale at ``Rx = Rc``.

Each law maps value to fraction, fraction to value (returning ``math.inf`` past the infinity
end, ``0.0`` past the zero end of an ohms scale) and gives ``df/dx`` for carrying an uncertainty
from the value domain into the deflection domain.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from verirun.metrology.exact import Exact, as_written


@dataclass(frozen=True, kw_only=True, slots=True)
class Linear:
    """A linear scale from ``low`` (left stop) to ``high`` (full deflection)."""

    high: float
    low: float = 0.0

    def __post_init__(self) -> None:
        if not (math.isfinite(self.low) and math.isfinite(self.high)) or self.high == self.low:
            raise ValueError(
                f"linear scale needs two different finite ends, got {self.low}..{self.high}"
            )

    name = "linear"

    def fraction(self, value: float) -> float:
        """Deflection fraction at ``value``."""
        return (value - self.low) / (self.high - self.low)

    def value(self, fraction: float) -> float:
        """Value shown at deflection ``fraction`` (not limited to the scale's ends)."""
        return self.low + fraction * (self.high - self.low)

    def slope(self, value: float) -> float:
        """``df/dx`` at ``value``: fraction of scale length per unit of the quantity."""
        return 1.0 / (self.high - self.low)

    def exact_fraction(self, value: Exact) -> Exact:
        """:meth:`fraction` in exact arithmetic of the numbers as written."""
        if isinstance(value, float):  # an infinity
            return value if self.high > self.low else -value
        low = as_written(self.low)
        return (value - low) / (as_written(self.high) - low)

    def exact_value(self, fraction: Exact) -> Exact:
        """:meth:`value` in exact arithmetic."""
        if isinstance(fraction, float):
            return fraction if self.high > self.low else -fraction
        low = as_written(self.low)
        return low + fraction * (as_written(self.high) - low)

    @property
    def fiducial(self) -> float:
        """The fiducial value for errors stated as a percentage of full scale: the span."""
        return abs(self.high - self.low)


@dataclass(frozen=True, kw_only=True, slots=True)
class SeriesOhms:
    """Series-type ohms scale with centre-scale value ``centre`` (ohms)."""

    centre: float

    def __post_init__(self) -> None:
        if not (math.isfinite(self.centre) and self.centre > 0):
            raise ValueError(f"centre-scale value must be a positive resistance, got {self.centre}")

    name = "series-ohms"

    def fraction(self, value: float) -> float:
        """Deflection fraction at resistance ``value``: ``Rc / (Rc + Rx)``."""
        if math.isinf(value):
            return 0.0
        return self.centre / (self.centre + value)

    def value(self, fraction: float) -> float:
        """Resistance at deflection ``fraction``; ``inf`` at or below 0, ``0`` at or above 1."""
        if fraction <= 0.0:
            return math.inf
        if fraction >= 1.0:
            return 0.0
        return self.centre * (1.0 - fraction) / fraction

    def slope(self, value: float) -> float:
        """``df/dRx = -Rc / (Rc + Rx)^2`` (negative: more resistance, less deflection)."""
        return -self.centre / (self.centre + value) ** 2

    def exact_fraction(self, value: Exact) -> Exact:
        """:meth:`fraction` in exact rational arithmetic of the numbers as written."""
        if isinstance(value, float):  # infinity: no deflection
            return 0
        centre = as_written(self.centre)
        return centre / (centre + value)

    def exact_value(self, fraction: Exact) -> Exact:
        """:meth:`value` in exact rational arithmetic; ``inf`` at or below 0, ``0`` at or
        above 1."""
        if fraction <= 0:
            return math.inf
        if fraction >= 1:
            return 0
        return as_written(self.centre) * (1 - fraction) / fraction

    @property
    def fiducial(self) -> None:
        """An ohms scale has no fiducial value in ohms; its errors are stated along the arc."""
        return None


@dataclass(frozen=True, kw_only=True, slots=True)
class ShuntOhms:
    """Shunt-type ohms scale with centre-scale value ``centre`` (ohms)."""

    centre: float

    def __post_init__(self) -> None:
        if not (math.isfinite(self.centre) and self.centre > 0):
            raise ValueError(f"centre-scale value must be a positive resistance, got {self.centre}")

    name = "shunt-ohms"

    def fraction(self, value: float) -> float:
        """Deflection fraction at resistance ``value``: ``Rx / (Rx + Rc)``."""
        if math.isinf(value):
            return 1.0
        return value / (value + self.centre)

    def value(self, fraction: float) -> float:
        """Resistance at deflection ``fraction``; ``0`` at or below 0, ``inf`` at or above 1."""
        if fraction <= 0.0:
            return 0.0
        if fraction >= 1.0:
            return math.inf
        return self.centre * fraction / (1.0 - fraction)

    def slope(self, value: float) -> float:
        """``df/dRx = Rc / (Rc + Rx)^2``."""
        return self.centre / (self.centre + value) ** 2

    def exact_fraction(self, value: Exact) -> Exact:
        """:meth:`fraction` in exact rational arithmetic of the numbers as written."""
        if isinstance(value, float):  # infinity: full deflection
            return 1
        return value / (value + as_written(self.centre))

    def exact_value(self, fraction: Exact) -> Exact:
        """:meth:`value` in exact rational arithmetic; ``0`` at or below 0, ``inf`` at or
        above 1."""
        if fraction <= 0:
            return 0
        if fraction >= 1:
            return math.inf
        return as_written(self.centre) * fraction / (1 - fraction)

    @property
    def fiducial(self) -> None:
        """An ohms scale has no fiducial value in ohms; its errors are stated along the arc."""
        return None


ScaleLaw = Linear | SeriesOhms | ShuntOhms


def make_law(
    name: str, *, full_scale: float | None = None, low: float = 0.0, centre: float | None = None
) -> ScaleLaw:
    """Build a scale law from its name (``linear``, ``series-ohms``, ``shunt-ohms``).

    Raises
    ------
    ValueError
        If the name is unknown or a parameter the law needs is missing.
    """
    if name == "linear":
        if full_scale is None:
            raise ValueError("a linear scale needs its full-scale value")
        return Linear(low=low, high=full_scale)
    if name in ("series-ohms", "shunt-ohms"):
        if centre is None:
            raise ValueError(f"a {name} scale needs its centre-scale value")
        return SeriesOhms(centre=centre) if name == "series-ohms" else ShuntOhms(centre=centre)
    raise ValueError(f"unknown scale law {name!r} (use linear, series-ohms or shunt-ohms)")


# The circuit of a series ohmmeter: a cell of EMF E in series with the internal resistance Rc,
# the movement and the unknown Rx. With the test leads shorted the movement carries the
# full-deflection current E / Rc; the deflection fraction is then I / I_full = Rc / (Rc + Rx).


def series_full_scale_current(emf: float, centre: float) -> float:
    """Pointer current at full deflection (leads shorted): ``I = E / Rc``."""
    return emf / centre


def series_pointer_current(emf: float, centre: float, resistance: float) -> float:
    """Pointer current with ``resistance`` across the leads: ``I = E / (Rc + Rx)``."""
    return emf / (centre + resistance)


def series_resistance_from_current(emf: float, centre: float, current: float) -> float:
    """Unknown resistance that draws ``current``: ``Rx = E / I - Rc``."""
    return emf / current - centre
