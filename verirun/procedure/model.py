"""Validated models of a procedure file.

The structure is checked by pydantic (unknown keys refused, every model frozen); quantities are
kept as written (``"10 V"``) and turned into SI floats by :mod:`verirun.procedure.load`, which
knows each range's function and so the unit each quantity must carry.
"""

from __future__ import annotations

import math
from typing import Annotated, Literal, Union

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    StrictFloat,
    StrictInt,
    StrictStr,
    field_validator,
)

from verirun.functions import FunctionName


def _finite(value: int | float) -> float:
    try:
        number = float(value)
    except OverflowError:
        raise ValueError("the number is too large") from None
    if not math.isfinite(number):
        raise ValueError(f"must be a finite number, got {value!r}")
    return number


#: A plain finite number (an int too large for a float, NaN and infinity are refused).
Number = Annotated[Union[StrictInt, StrictFloat], AfterValidator(_finite)]
QuantityText = Union[StrictStr, StrictInt, StrictFloat]

Function = FunctionName

ScaleName = Literal["linear", "series-ohms", "shunt-ohms"]


def _hyphens(name: str) -> str:
    return name.replace("_", "-")


class Strict(BaseModel):
    """Base of every file model: frozen, unknown keys refused, keys written with hyphens."""

    model_config = ConfigDict(
        extra="forbid", frozen=True, alias_generator=_hyphens, populate_by_name=False
    )


class Accuracy(Strict):
    """One accuracy statement. Give exactly one of the arc or full-scale forms, or any sum of the
    value forms (percent of reading, percent of range, counts, absolute)."""

    # Written as a plain number or with its unit ("2 %", "3 deg"); parsed by the loader.
    percent_of_full_scale: QuantityText | None = None
    class_index: QuantityText | None = Field(default=None, alias="class")
    degrees: QuantityText | None = None
    percent_of_length: QuantityText | None = None
    percent_of_reading: QuantityText | None = None
    percent_of_range: QuantityText | None = None
    counts: QuantityText | None = None
    absolute: QuantityText | None = None
    #: For a band of an AC range: lowest and highest frequency it applies to.
    from_: QuantityText | None = Field(default=None, alias="from")
    to: QuantityText | None = None


class ExtraTerm(Strict):
    """An extra contribution to every point's uncertainty budget on a range.

    ``limit`` is the half-width of the contribution, in the range's unit or in degrees of arc;
    a normal limit needs the confidence ``level`` it is stated at.
    """

    name: StrictStr
    limit: QuantityText
    distribution: Literal["normal", "rectangular", "triangular"] = "rectangular"
    level: QuantityText | None = None


class Point(Strict):
    """A test point written out in full: the nominal value and, for AC, its frequency."""

    at: QuantityText
    frequency: QuantityText | None = None


class Range(Strict):
    """One range of the meter under test."""

    id: StrictStr
    function: Function
    #: Linear when not given, except on a resistance range, which must say its scale.
    scale: ScaleName | None = None
    full_scale: QuantityText | None = None
    #: The value at the left stop of a linear scale: 0 by default; minus the full-scale value
    #: for a DC range with a negative point (a zero-centre meter, a DMM of either polarity).
    lower_end: QuantityText | None = None
    centre: QuantityText | None = None
    battery: QuantityText | None = None
    arc: QuantityText | None = None
    accuracy: Accuracy | list[Accuracy]
    resolution: QuantityText | None = None
    minor_division: QuantityText | None = None
    read_to: Number | None = None
    uncertainty: list[ExtraTerm] = []
    frequency: QuantityText | None = None
    read_on: StrictStr | None = None
    connect: StrictStr | None = None
    points: list[QuantityText | Point] = Field(min_length=1)

    @field_validator("id")
    @classmethod
    def _id_is_plain(cls, value: str) -> str:
        if not value or not all(c.isalnum() or c in "-_." for c in value):
            raise ValueError(f"{value!r}: use letters, digits, '-', '_' or '.' only")
        return value


class Identity(Strict):
    """What the procedure is: its id, title and revision."""

    id: StrictStr
    title: StrictStr
    revision: StrictStr | StrictInt


class Meter(Strict):
    """The kind of meter the procedure verifies."""

    kind: StrictStr
    maker: StrictStr | None = None
    model: StrictStr | None = None


class Decision(Strict):
    """The decision rule, stated before the run (ISO/IEC 17025 7.1.3).

    ``guard-ratio`` is r in w = r U for the guarded and non-binary rules; ``risk-target`` the
    largest specific probability of false accept the risk rule allows (``2 %``).
    """

    rule: Literal["simple", "guarded", "non-binary", "risk"] = "simple"
    guard_ratio: Number | None = None
    risk_target: QuantityText | None = None


class ProcedureFile(Strict):
    """A whole procedure file."""

    format: StrictInt
    procedure: Identity
    meter: Meter
    decision: Decision = Decision()
    ranges: list[Range] = Field(min_length=1)
