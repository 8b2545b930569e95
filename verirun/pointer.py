"""Where the pointer of an analog meter should stand at a test point, in words the operator reads.

A scale's law gives the deflection as a fraction of the scale length (0 at the pointer's rest,
the left end; 1 at full deflection); with the arc of the scale that is an angle from the left
end. On a series-ohms scale the left end is infinity and the right end zero ohms, so a small
resistance stands far to the right.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from verirun.procedure.plan import TestPoint
from verirun.units import format_quantity


@dataclass(frozen=True, kw_only=True, slots=True)
class Pointer:
    """The expected pointer position at a point, and the window in the same terms."""

    fraction: float  # of the scale length from the left end
    degrees: float | None  # from the left end (None: the arc is not given)
    marking: str  # the scale mark the pointer should stand on
    window_fractions: tuple[float, float]
    window_degrees: tuple[float, float] | None

    def text(self) -> str:
        """``"50.0° from the left end, on the 12 Ω mark"``."""
        where = (
            f"{self.degrees:.1f}° from the left end"
            if self.degrees is not None
            else f"{100 * self.fraction:.1f} % of the scale length from the left end"
        )
        return f"{where}, on the {self.marking} mark"

    def window_text(self) -> str:
        """The allowed window along the scale: ``"47.5° to 52.5°"``."""
        low, high = self.window_degrees or tuple(100 * f for f in self.window_fractions)
        sign = "°" if self.window_degrees is not None else " %"
        return f"{low:.1f}{sign} to {high:.1f}{sign} from the left end"


def pointer(point: TestPoint) -> Pointer:
    """Where the pointer should stand at ``point`` (and its window) on the range's scale."""
    law = point.range.law
    arc = point.range.arc
    fraction = law.fraction(point.nominal)
    ends = sorted(_clip(law.fraction(v)) for v in (point.window.low, point.window.high))
    return Pointer(
        fraction=fraction,
        degrees=fraction * arc if arc else None,
        marking=format_quantity(point.nominal, point.unit),
        window_fractions=(ends[0], ends[1]),
        window_degrees=(ends[0] * arc, ends[1] * arc) if arc else None,
    )


def _clip(fraction: float) -> float:
    return 0.0 if math.isnan(fraction) else min(max(fraction, 0.0), 1.0)


def shows_pointer(point: TestPoint) -> bool:
    """True for the points whose prompt shows the pointer position: ohms scales and tolerances
    stated along the arc (degrees or percent of scale length)."""
    return point.range.law.name != "linear" or point.window.domain != "value"
