"""Uncertainty of one test point: terms, the budget that combines them, and GUM rounding.

A term is a standard uncertainty in one of two domains: ``"value"`` (the quantity's base unit:
volts, amperes, ohms) or ``"deflection"`` (a fraction of the scale length). A budget is combined
in the domain where the point's tolerance is stated, so that the uncertainty and the tolerance
are compared like with like; value-domain terms are carried into the deflection domain through
the scale law's derivative ``df/dx`` at the nominal, and back again for reporting.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from decimal import ROUND_CEILING, ROUND_HALF_EVEN, Decimal
from statistics import NormalDist
from typing import Literal

from verirun.metrology.scales import ScaleLaw
from verirun.metrology.tolerance import Domain

Distribution = Literal["normal", "rectangular", "triangular"]

_SQRT3 = math.sqrt(3.0)
_SQRT6 = math.sqrt(6.0)


def _check_finite(name: str, value: float, *, positive: bool = False) -> None:
    if not math.isfinite(value) or value < 0 or (positive and value == 0):
        wanted = "a positive finite number" if positive else "a finite number, not negative"
        raise ValueError(f"{name} must be {wanted}, got {value!r}")


@functools.lru_cache(maxsize=64)
def coverage_factor(level: float) -> float:
    """Coverage factor of a normal distribution for a two-sided coverage ``level``.

    ``k = Φ⁻¹((1 + level) / 2)``: 1.960 at 0.95, 2.576 at 0.99.

    Raises
    ------
    ValueError
        If ``level`` is not strictly between 0 and 1.
    """
    if not 0.0 < level < 1.0:
        raise ValueError(f"a confidence level must lie strictly between 0 and 1, got {level!r}")
    return NormalDist().inv_cdf(0.5 + level / 2.0)


def standard_from_limit(
    limit: float, *, distribution: Distribution, level: float | None = None
) -> float:
    """Standard uncertainty from a half-width ``limit`` of a stated distribution.

    ``normal`` divides by the coverage factor of ``level``; ``rectangular`` by sqrt 3 and
    ``triangular`` by sqrt 6 (GUM 4.3.7 and 4.3.9), where ``limit`` is the half-width.

    Raises
    ------
    ValueError
        If ``limit`` is negative or not finite, or a normal limit has no ``level``.
    """
    _check_finite("an uncertainty limit", limit)
    if distribution == "normal":
        if level is None:
            raise ValueError("a normal limit needs the confidence level it was stated at")
        return limit / coverage_factor(level)
    if distribution == "rectangular":
        return limit / _SQRT3
    if distribution == "triangular":
        return limit / _SQRT6
    raise ValueError(
        f"unknown distribution {distribution!r} (use normal, rectangular or triangular)"
    )


@dataclass(frozen=True, kw_only=True, slots=True)
class Term:
    """One named contribution to a budget.

    Parameters
    ----------
    name
        What the contribution is (``"calibrator"``, ``"readability"``), as printed in a budget.
    standard_uncertainty
        ``u(x_i)``, in the base unit for ``domain="value"`` or a fraction of scale length for
        ``domain="deflection"``.
    domain
        Where ``standard_uncertainty`` is expressed.
    distribution
        The distribution it was evaluated from (for the record; it is already a standard
        uncertainty).
    sensitivity
        Sensitivity coefficient ``c_i`` applied before any change of domain.
    """

    name: str
    standard_uncertainty: float
    domain: Domain
    distribution: Distribution
    sensitivity: float = 1.0

    def __post_init__(self) -> None:
        _check_finite(f"the standard uncertainty of {self.name!r}", self.standard_uncertainty)
        if not math.isfinite(self.sensitivity):
            raise ValueError(
                f"the sensitivity of {self.name!r} must be finite, got {self.sensitivity!r}"
            )
        if self.domain not in ("value", "deflection"):
            raise ValueError(
                f"the domain of {self.name!r} must be 'value' or 'deflection', got {self.domain!r}"
            )


@dataclass(frozen=True, kw_only=True)
class CalibratorSpec:
    """A calibrator's accuracy: ± (``output_ppm`` of output + ``range_ppm`` of range + ``floor``).

    Parameters
    ----------
    output_ppm, range_ppm
        Parts per million of the output value and of the range value.
    floor
        The absolute term, in the quantity's base unit.
    level
        The confidence level the specification is stated at (``0.99``, ``0.95``), read as a
        normal distribution; or ``"limits"`` for bounds with no stated level, read as a
        rectangular distribution.
    """

    output_ppm: float = 0.0
    range_ppm: float = 0.0
    floor: float = 0.0
    level: float | Literal["limits"]

    def __post_init__(self) -> None:
        for name in ("output_ppm", "range_ppm", "floor"):
            _check_finite(name, getattr(self, name))
        if self.level != "limits":
            coverage_factor(self.level)  # validates the level

    @classmethod
    def from_percent(
        cls,
        *,
        output_percent: float = 0.0,
        range_percent: float = 0.0,
        floor: float = 0.0,
        level: float | Literal["limits"],
    ) -> CalibratorSpec:
        """The same specification stated in percent (1 % = 10 000 ppm)."""
        return cls(
            output_ppm=output_percent * 1e4, range_ppm=range_percent * 1e4, floor=floor, level=level
        )

    def limit(self, *, output: float, range_value: float = 0.0) -> float:
        """The specification's half-width at ``output`` on a range of ``range_value``."""
        return (
            abs(output) * self.output_ppm + abs(range_value) * self.range_ppm
        ) * 1e-6 + self.floor

    def standard_uncertainty(self, *, output: float, range_value: float = 0.0) -> float:
        """Standard uncertainty of the applied value: the limit over ``k`` or over sqrt 3."""
        limit = self.limit(output=output, range_value=range_value)
        if self.level == "limits":
            return standard_from_limit(limit, distribution="rectangular")
        return standard_from_limit(limit, distribution="normal", level=self.level)

    def term(self, *, output: float, range_value: float = 0.0, name: str = "calibrator") -> Term:
        """The calibrator's contribution at ``output``, in the value domain."""
        return Term(
            name=name,
            domain="value",
            standard_uncertainty=self.standard_uncertainty(output=output, range_value=range_value),
            distribution="rectangular" if self.level == "limits" else "normal",
        )


def resolution_uncertainty(resolution: float) -> float:
    """Standard uncertainty of a reading quantised to ``resolution``: ``res / (2 sqrt 3)``.

    The value lies anywhere within half a step either side of the shown one, a rectangular
    distribution of half-width ``res / 2`` (GUM F.2.2.1).
    """
    _check_finite("a resolution", resolution)
    return resolution / (2.0 * _SQRT3)


def readability_term(
    *,
    division: float,
    fraction: float = 1.0,
    unit: Literal["value", "degrees", "length"] = "value",
    arc: float | None = None,
    name: str = "readability",
) -> Term:
    """The resolution of a reading as a rectangular term.

    Parameters
    ----------
    division
        The step a reading is resolved to: a digit of a digital display, or a minor division
        of an analog scale.
    fraction
        The part of ``division`` the operator can resolve (``0.2`` for a fifth of a division).
    unit
        What ``division`` is measured in: the quantity's base unit (``"value"``), degrees of
        arc (``"degrees"``, needs ``arc``) or a fraction of scale length (``"length"``).
        Degrees and length give a deflection-domain term, which suits an ohms scale whose
        divisions are not evenly spaced in ohms.
    arc
        Arc span of the scale in degrees, for ``unit="degrees"``.
    name
        The term's name.

    Raises
    ------
    ValueError
        If ``unit`` is ``"degrees"`` without a positive ``arc``, or the numbers are invalid.
    """
    _check_finite("a division", division)
    _check_finite("a fraction of a division", fraction, positive=True)
    resolution = division * fraction
    if unit == "value":
        return Term(
            name=name,
            domain="value",
            distribution="rectangular",
            standard_uncertainty=resolution_uncertainty(resolution),
        )
    if unit == "degrees":
        if arc is None or not (math.isfinite(arc) and arc > 0):
            raise ValueError(
                f"a resolution in degrees needs the positive arc span of the scale, got {arc!r}"
            )
        resolution /= arc
    elif unit != "length":
        raise ValueError(f"unknown resolution unit {unit!r} (use value, degrees or length)")
    return Term(
        name=name,
        domain="deflection",
        distribution="rectangular",
        standard_uncertainty=resolution_uncertainty(resolution),
    )


@dataclass(frozen=True, kw_only=True, slots=True)
class Budget:
    """The combined uncertainty of one point, in the domain its tolerance is stated in.

    ``contributions[i]`` is ``|c_i| u(x_i)`` of ``terms[i]`` after mapping into ``domain``.
    ``combined`` is their root-sum-square, ``expanded = k × combined``. ``expanded_value`` is
    ``expanded`` carried into the value domain at ``nominal`` by ``1 / |df/dx|`` (a linearised
    figure for reporting; on an ohms scale the true interval is not symmetric in ohms), and is
    ``math.inf`` where the slope is zero (the infinity end of an ohms scale).
    """

    nominal: float
    domain: Domain
    terms: tuple[Term, ...]
    contributions: tuple[float, ...]
    combined: float
    k: float
    expanded: float
    expanded_value: float
    slope: float = field(repr=False)

    def validate(self, law: ScaleLaw, *, per_unit: float = 1.0, seed: int = 1, ndig: int = 2):
        """Validate this budget's GUM result by Monte Carlo (JCGM 101:2008 7.9 and 8.2); see
        :func:`verirun.metrology.montecarlo.validate`."""
        from verirun.metrology.montecarlo import validate

        return validate(self, law, per_unit=per_unit, seed=seed, ndig=ndig)


def _to_domain(term: Term, domain: Domain, slope: float) -> float:
    u = abs(term.sensitivity) * term.standard_uncertainty
    if term.domain == domain or u == 0.0:
        return u
    if domain == "deflection":  # value → fraction of scale length
        return u * slope
    return u / slope if slope > 0 else math.inf  # fraction of scale length → value


def budget(
    *,
    terms: list[Term] | tuple[Term, ...],
    nominal: float,
    law: ScaleLaw,
    domain: Domain,
    k: float = 2.0,
) -> Budget:
    """Combine ``terms`` at ``nominal`` in ``domain`` and expand with coverage factor ``k``.

    Parameters
    ----------
    terms
        The contributions, each in its own domain.
    nominal
        The value the point is verified at (the slope of ``law`` is taken there).
    law
        The range's scale law.
    domain
        The domain the tolerance is stated in (``Window.domain``).
    k
        Coverage factor; 2 gives about 95 % coverage for a normal combined distribution.

    Returns
    -------
    Budget

    Raises
    ------
    ValueError
        If ``domain`` or ``k`` is invalid.
    """
    if domain not in ("value", "deflection"):
        raise ValueError(f"a budget's domain must be 'value' or 'deflection', got {domain!r}")
    _check_finite("the coverage factor k", k, positive=True)
    slope = abs(law.slope(nominal))
    contributions = tuple([_to_domain(t, domain, slope) for t in terms])
    combined = math.sqrt(math.fsum([c * c for c in contributions]))
    expanded = k * combined
    if domain == "value" or expanded == 0.0:
        expanded_value = expanded
    else:
        expanded_value = expanded / slope if slope > 0 else math.inf
    return Budget(
        nominal=nominal,
        domain=domain,
        terms=tuple(terms),
        contributions=contributions,
        combined=combined,
        k=k,
        expanded=expanded,
        expanded_value=expanded_value,
        slope=slope,
    )


@dataclass(frozen=True, kw_only=True)
class Rounded:
    """A result and its uncertainty rounded for reporting.

    ``decimals`` is the decimal place both are rounded to (digits after the point; negative for
    tens, hundreds...). The ``*_text`` fields keep trailing zeros that a float would drop.
    """

    value: float
    uncertainty: float
    decimals: int
    value_text: str
    uncertainty_text: str


def round_uncertainty(
    uncertainty: float, *, digits: int = 2, mode: Literal["nearest", "up"] = "nearest"
) -> Decimal:
    """An uncertainty rounded for reporting: ``digits`` significant digits, in decimal.

    GUM 7.2.6: quote an uncertainty to at most two significant digits. The number is rounded as
    written in decimal (the shortest repr of the float), ties to the even digit
    (``mode="nearest"``) or upward (``"up"``, which GUM 7.2.6 allows); a carry into a new digit
    keeps ``digits`` significant digits (0.995 gives 1.0, 9.95 gives 10, 99.5 gives 100) and
    significant trailing zeros are kept (0.01049 gives 0.010). This is the one rounding of U:
    the console, ``verirun window``, the record and the certificate all print it, and guard
    bands are worked from it.

    Raises
    ------
    ValueError
        If ``uncertainty`` is not positive and finite, or ``digits < 1``.
    """
    _check_finite("an uncertainty to round", uncertainty, positive=True)
    if digits < 1:
        raise ValueError(f"significant digits must be at least 1, got {digits!r}")
    if mode not in ("nearest", "up"):
        raise ValueError(f"unknown rounding mode {mode!r} (use nearest or up)")
    how = ROUND_CEILING if mode == "up" else ROUND_HALF_EVEN
    u = Decimal(repr(float(uncertainty)))
    decimals = digits - 1 - u.adjusted()
    u_r = u.quantize(Decimal(1).scaleb(-decimals), rounding=how)
    if u_r.adjusted() > u.adjusted():  # carried into a new digit (0.0996 → 0.100): drop one
        decimals -= 1
        u_r = u_r.quantize(Decimal(1).scaleb(-decimals), rounding=how)
    return u_r


def round_result(
    *, value: float, uncertainty: float, digits: int = 2, mode: Literal["nearest", "up"] = "nearest"
) -> Rounded:
    """Round an uncertainty to ``digits`` significant digits and the value to the same place.

    GUM 7.2.6: quote an uncertainty to at most two significant digits and round the estimate
    consistently with it. The uncertainty is rounded by :func:`round_uncertainty`; the value to
    the same decimal place, ties to even, as written in decimal (the shortest repr of the
    float), so 0.0125 rounds as 0.0125, not as its binary neighbour.

    Raises
    ------
    ValueError
        If ``uncertainty`` is not positive and finite, ``value`` is not finite, or ``digits < 1``.
    """
    if not math.isfinite(value):
        raise ValueError(f"a value to round must be finite, got {value!r}")
    u_r = round_uncertainty(uncertainty, digits=digits, mode=mode)
    decimals = -u_r.as_tuple().exponent
    v_r = Decimal(repr(value)).quantize(Decimal(1).scaleb(-decimals), rounding=ROUND_HALF_EVEN)
    return Rounded(
        value=float(v_r),
        uncertainty=float(u_r),
        decimals=decimals,
        value_text=_plain(v_r),
        uncertainty_text=_plain(u_r),
    )


def _plain(d: Decimal) -> str:
    # Fixed-point text, never exponent form, so a certificate shows "270" rather than "2.7E+2".
    return f"{d:f}"
