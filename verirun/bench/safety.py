"""Keeping the calibrator output safe: a guard around every use of it, and the hazard rule.

A calibrator can source lethal voltage. :func:`output_guard` makes standby structural: whatever
ends the block, the output is switched to standby and read back, and if that cannot be confirmed
the operator is told to switch it off by hand.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

from verirun.errors import BenchError, SafetyError
from verirun.functions import FUNCTIONS, NAMES
from verirun.interrupts import deferred_signals

if TYPE_CHECKING:
    from verirun.bench.calibrator import Calibrator

_BY_HAND = "switch the calibrator output off by hand before touching the connections"


class output_guard:  # noqa: N801 - used as a function: ``with output_guard(cal):``
    """Leave the output in standby, verified by read-back, however the block ends.

    Parameters
    ----------
    calibrator
        The calibrator whose output the block may switch on.

    Raises
    ------
    SafetyError
        If standby cannot be sent or the read-back fails or still reads "on". When the block
        itself raised (including ``KeyboardInterrupt``), that exception is the SafetyError's
        ``__context__``; the standby failure, if any, is its ``__cause__``.
    """

    # A class rather than a generator: its exit is handed the block's exception as it is, and
    # decides in plain code whether that exception or a SafetyError is the one that propagates.
    __slots__ = ("calibrator",)

    def __init__(self, calibrator: "Calibrator"):
        self.calibrator = calibrator

    def __enter__(self) -> "Calibrator":
        return self.calibrator

    def __exit__(self, kind, exc, traceback) -> bool:
        if isinstance(exc, SafetyError):
            # An inner guard already found the output state unknown and said where; trying
            # again here must not replace that message with one that names no step.
            try:
                _make_safe(self.calibrator)
            except SafetyError:
                raise exc from exc.__cause__
            return False
        # Raising here keeps the block's exception (if any) as the SafetyError's __context__.
        _make_safe(self.calibrator)
        return False


def _make_safe(calibrator: "Calibrator") -> None:
    """Standby and read-back as one critical section (see :mod:`verirun.interrupts`).

    A signal arriving now must not cut the standby or its read-back short: that would leave the
    output state unknown when it could have been made known. A signal noted meanwhile acts when
    the read-back is done; if that ends in a SafetyError, the interrupt it would raise is dropped
    so that the operator still reads why the output state is unknown (the run stops either way).
    """
    with deferred_signals():
        _standby_and_check(calibrator)


def _standby_and_check(calibrator: "Calibrator") -> None:
    failure: BaseException | None = None
    still_on = False
    try:
        calibrator.standby()
        still_on = calibrator.output_is_on()
    # An interrupt raised from within standby leaves the state as unknown as any other failure.
    except (Exception, KeyboardInterrupt) as exc:
        failure = exc
    if failure is not None:
        command = failure.command if isinstance(failure, BenchError) else None
        answer = failure.answer if isinstance(failure, BenchError) else None
        raise SafetyError(
            f"output state unknown: {_BY_HAND} (standby failed: {_reason(failure)})",
            command=command,
            answer=answer,
        ) from failure
    if still_on:
        raise SafetyError(
            f"output still reads on after standby: {_BY_HAND}",
            command=calibrator.profile.output_state.query,
        )


def _reason(exc: BaseException) -> str:
    if isinstance(exc, BenchError):
        return exc.message
    if isinstance(exc, KeyboardInterrupt):
        return "interrupted"
    return str(exc) or type(exc).__name__


@dataclass(frozen=True)
class HazardLimits:
    """Levels above which a voltage is hazardous live to touch.

    The defaults are the hazardous-live levels of IEC 61010-1 for normal conditions.

    Parameters
    ----------
    dc_volts
        DC voltage limit, V.
    ac_rms_volts
        AC voltage limit, V rms.
    ac_peak_volts
        AC voltage limit, V peak.
    """

    dc_volts: float = 60.0
    ac_rms_volts: float = 30.0
    ac_peak_volts: float = 42.4

    def __post_init__(self) -> None:
        for name in ("dc_volts", "ac_rms_volts", "ac_peak_volts"):
            value = getattr(self, name)
            if (
                isinstance(value, bool)
                or not isinstance(value, (int, float))
                or not (math.isfinite(value) and value > 0)
            ):
                raise ValueError(
                    f"HazardLimits.{name} must be a positive finite number of volts, got {value!r}"
                )


def is_hazardous(function: str, value: float, limits: HazardLimits = HazardLimits()) -> bool:
    """Tell whether sourcing ``value`` on ``function`` makes the terminals hazardous live.

    Only voltage functions can be; a value at or above a limit is hazardous (the operator
    confirms before the output goes on at the threshold itself, erring on the safe side). An AC
    value is an rms sine level and is checked both as rms and as its peak, ``rms * sqrt(2)``. A
    value that is not a finite number is treated as hazardous, since nothing is known about it.

    Raises
    ------
    ValueError
        If ``function`` is not one of the functions verirun knows.
    """
    if function not in FUNCTIONS:
        raise ValueError(f"unknown function {function!r}; the functions are {', '.join(NAMES)}")
    if not FUNCTIONS[function].is_voltage:
        return False
    size = abs(float(value))
    if not math.isfinite(size):
        return True
    if not FUNCTIONS[function].alternating:
        return size >= limits.dc_volts
    return size >= limits.ac_rms_volts or size * math.sqrt(2) >= limits.ac_peak_volts
