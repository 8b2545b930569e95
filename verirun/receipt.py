"""The item on receipt: its date (never after the calibration, never in the future) and its
condition, in the words of whoever received it; never a default sentence."""

from __future__ import annotations

import datetime as dt

from verirun.errors import UnitError
from verirun.text import refusal


def check_received(received: str | None, *, today: dt.date | None = None) -> str | None:
    """``received`` (an ISO date, or ``None``: not recorded, and said so on the certificate) if it
    is not after ``today``, the date of a run starting now (UTC).

    Raises
    ------
    UnitError
        If the date is after the calibration, that is in the future.
    """
    if received is None:
        return None
    today = today or dt.datetime.now(dt.timezone.utc).date()
    if dt.date.fromisoformat(received) > today:
        raise UnitError(
            f"--received: {received} is after the date of calibration ({today.isoformat()}, today"
            " in UTC) and in the future; an item is received before it is calibrated"
        )
    return received


def ask_condition(given: str | None, console, *, needed: bool) -> str | None:
    """The condition of the item on receipt: as given, else asked at the console until answered.

    Raises
    ------
    UnitError
        If it was given empty, or if it is ``needed`` (a run at a real bench) and neither given
        nor askable (a scripted run).
    """
    if given is not None:
        if not given.strip():
            raise UnitError("--condition: empty; say in words how the item was on receipt")
        return given.strip()
    if getattr(console, "interactive", False):
        while True:
            text = console.ask("Condition of the item on receipt (in your words): ").strip()
            why = (
                refusal(text) if text else "the condition on receipt is recorded on the certificate"
            )
            if why is None:
                return text
            console.warn(f"not taken: {why}; type it again")
    if needed:
        raise UnitError(
            "--condition: a run at a real bench records the condition of the item on receipt;"
            " give it with --condition TEXT (a scripted run cannot ask for it)"
        )
    return None
