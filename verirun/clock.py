"""Clocks the engine can be given: the wall clock, or a virtual one for dry runs and tests."""

from __future__ import annotations

import datetime as dt
import time


class SystemClock:
    """The real time (UTC) and real waiting."""

    def now(self) -> dt.datetime:
        """The current time, timezone-aware, in UTC."""
        return dt.datetime.now(dt.timezone.utc)

    def sleep(self, seconds: float) -> None:
        """Wait for ``seconds`` (settling of the calibrator output)."""
        if seconds > 0:
            time.sleep(seconds)


class VirtualClock:
    """A clock that only moves when told to: ``sleep`` advances it without waiting.

    Parameters
    ----------
    start
        The time it starts at (UTC).
    tick
        Seconds it advances on each call of :meth:`now`, so successive documents differ.
    """

    def __init__(self, start: dt.datetime, tick: float = 1.0):
        self._now = start
        self._tick = dt.timedelta(seconds=tick)

    def now(self) -> dt.datetime:
        value = self._now
        self._now += self._tick
        return value

    def sleep(self, seconds: float) -> None:
        self._now += dt.timedelta(seconds=seconds)


def iso(moment: dt.datetime) -> str:
    """ISO 8601 text of a time, in UTC, to the second."""
    if moment.tzinfo is not dt.timezone.utc:
        moment = moment.astimezone(dt.timezone.utc)
    return moment.isoformat(timespec="seconds")[:-6] + "Z"  # "+00:00" written as "Z"
