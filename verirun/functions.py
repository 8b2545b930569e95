"""The measurement functions verirun knows: one table, shared by procedures, bench files, driver
profiles and the hazardous-live check.

Each function is what a calibrator sources and a meter's range measures: its name as files
write it, the unit of its values (SI base unit), whether it alternates (and so has a frequency),
and its name in words for certificates and consoles.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal


@dataclass(frozen=True, slots=True)
class MeasurementFunction:
    """One measurement function: ``dc-voltage`` is in V, not alternating, "DC voltage"."""

    name: str
    unit: str
    alternating: bool
    words: str

    @property
    def is_voltage(self) -> bool:
        """Whether its values are voltages (what a hazardous-live threshold applies to)."""
        return self.unit == "V"


#: Every function, by its name as files write it.
FUNCTIONS: dict[str, MeasurementFunction] = {
    f.name: f
    for f in (
        MeasurementFunction("dc-voltage", "V", False, "DC voltage"),
        MeasurementFunction("dc-current", "A", False, "DC current"),
        MeasurementFunction("ac-voltage", "V", True, "AC voltage"),
        MeasurementFunction("ac-current", "A", True, "AC current"),
        MeasurementFunction("resistance", "Ω", False, "resistance"),
    )
}

#: The names, for validating models (a test checks it agrees with :data:`FUNCTIONS`).
FunctionName = Literal["dc-voltage", "dc-current", "ac-voltage", "ac-current", "resistance"]

#: The names in their order, for messages.
NAMES: tuple[str, ...] = tuple(FUNCTIONS)


def unit_of(name: str) -> str:
    """The unit of the values of function ``name``: ``unit_of("ac-current") == "A"``."""
    return FUNCTIONS[name].unit


def words_for(name: str) -> str:
    """Function ``name`` in words: ``words_for("dc-voltage") == "DC voltage"``."""
    return FUNCTIONS[name].words


def is_alternating(name: str) -> bool:
    """Whether function ``name`` alternates (its points have a frequency)."""
    return FUNCTIONS[name].alternating
