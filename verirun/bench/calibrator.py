"""The calibrator driver: one operation per method, spoken through a driver profile over VISA.

The driver checks every stimulus against the profile's limits before sending anything, sends
values in full precision, and reads the instrument's error queue after every setting so that a
rejected command stops the run where it happened instead of several points later.
"""

from __future__ import annotations

import re
import sys
import threading
from pathlib import Path
from typing import Any

from verirun.bench.profile import DriverProfile, load_profile
from verirun.errors import BenchError

# SCPI error queue entry: a signed integer code, a comma, then a (usually quoted) description.
_ERROR_ENTRY = re.compile(r"\s*([+-]?\d+)\s*(?:,\s*(.*?))?\s*$", re.DOTALL)


class Calibrator:
    """A programmable calibrator, driven through a :class:`DriverProfile`.

    Parameters
    ----------
    resource
        An open pyvisa message-based resource, or any object with ``write(str)``,
        ``query(str) -> str`` and ``close()``. Its terminations and timeout are left as they are;
        :meth:`open` sets them from the profile.
    profile
        A loaded profile, or a packaged profile name or file path for :func:`load_profile`.
    """

    def __init__(self, resource: Any, profile: DriverProfile | str | Path):
        self._resource = resource
        self._profile = profile if isinstance(profile, DriverProfile) else load_profile(profile)
        # One lock for every exchange: a setting and its error-queue check must not interleave
        # with another thread's commands, or errors would be blamed on the wrong command.
        self._lock = threading.RLock()
        self._manager: Any = None
        self._closed = False
        # Exact replies to the error-queue query already parsed as "queue empty".
        self._empty_replies: set[str] = set()

    @classmethod
    def open(
        cls,
        visa_library: str,
        resource_name: str,
        profile: DriverProfile | str | Path,
        *,
        timeout_ms: int | None = None,
    ) -> "Calibrator":
        """Open ``resource_name`` through the VISA library ``visa_library``.

        Parameters
        ----------
        visa_library
            Passed straight to ``pyvisa.ResourceManager``: ``""`` for the system default,
            ``"@py"``, or ``"<file>@sim"`` for a simulated device.
        resource_name
            The VISA resource name, e.g. ``"GPIB0::4::INSTR"``.
        profile
            A loaded profile, or a packaged profile name or file path.
        timeout_ms
            Overrides the profile's timeout.

        Raises
        ------
        BenchError
            If the library cannot be loaded or the resource cannot be opened.
        """
        profile = profile if isinstance(profile, DriverProfile) else load_profile(profile)
        timeout = profile.link.timeout_ms if timeout_ms is None else timeout_ms
        if isinstance(timeout, bool) or not isinstance(timeout, int) or timeout <= 0:
            raise BenchError(
                f"timeout_ms must be a positive whole number of milliseconds, got {timeout!r}"
            )
        # here, not at the top: it costs ~0.1 s that commands which never open a bench skip
        import pyvisa

        try:
            manager = pyvisa.ResourceManager(visa_library)
        except (pyvisa.errors.Error, OSError, ValueError) as exc:
            raise BenchError(
                f"cannot load the VISA library {visa_library!r}: {_first_line(exc)}"
            ) from exc
        try:
            resource = manager.open_resource(
                resource_name,
                read_termination=profile.link.read_termination,
                write_termination=profile.link.write_termination,
                timeout=timeout,
            )
        except (pyvisa.errors.Error, OSError, ValueError) as exc:
            raise BenchError(
                f"cannot open the calibrator at {resource_name!r}: {_first_line(exc)}"
            ) from exc
        calibrator = cls(resource, profile)
        # Keep the manager alive with the resource; closing it would close every resource it opened.
        calibrator._manager = manager
        return calibrator

    @property
    def profile(self) -> DriverProfile:
        """The driver profile in use."""
        return self._profile

    @property
    def resource(self) -> Any:
        """The underlying VISA resource (for diagnostics; bypasses every check)."""
        return self._resource

    def identify(self) -> str:
        """Measure the instrument's identity string (maker, model, serial, firmware)."""
        command = self._profile.commands.identify
        with self._lock:
            answer = self._query(command).strip()
        if not answer:
            raise BenchError(
                "the calibrator sent an empty identity", command=command, answer=answer
            )
        return answer

    def reset(self) -> None:
        """Return the calibrator to its reset state and empty its status and error queue.

        Errors queued before the reset are discarded: they belong to whatever drove the
        instrument before this run.
        """
        with self._lock:
            self._write(self._profile.commands.reset)
            self._write(self._profile.commands.clear_status)
            self._drain()

    def source(self, function: str, value: float, frequency: float | None = None) -> None:
        """Control the stimulus: set ``function`` to ``value`` (and ``frequency`` for AC).

        Parameters
        ----------
        function
            ``"dc-voltage"``, ``"dc-current"``, ``"ac-voltage"``, ``"ac-current"`` or
            ``"resistance"``.
        value
            Level in V, A or Ω (rms for AC), sent exactly, never clipped.
        frequency
            Frequency in Hz, required for AC and refused otherwise.

        Raises
        ------
        BenchError
            If the stimulus breaks the profile's limits (nothing is sent), or the calibrator
            reports an error after one of the commands (the rest are not sent).
        """
        commands = self._profile.source_commands(function, value, frequency)
        with self._lock:
            for command in commands:
                self._setting(command)

    def output_on(self) -> None:
        """Switch the output on (operate)."""
        self._setting(self._profile.commands.output_on)

    def standby(self) -> None:
        """Switch the output to standby (off); confirm with :meth:`output_is_on`."""
        self._setting(self._profile.commands.output_off)

    def output_is_on(self) -> bool:
        """Measure the output state, as read back from the instrument.

        Raises
        ------
        BenchError
            If the reply is neither an "on" nor an "off" reply of the profile.
        """
        state = self._profile.output_state
        with self._lock:
            answer = self._query(state.query).strip()
        if answer in state.on_replies:
            return True
        if answer in state.off_replies:
            return False
        raise BenchError(
            "the calibrator's reply to the output-state query is neither on"
            f" ({', '.join(state.on_replies)}) nor off ({', '.join(state.off_replies)})",
            command=state.query,
            answer=answer,
        )

    def errors(self) -> list[tuple[int, str]]:
        """Empty the instrument's error queue and return its entries, oldest first.

        Raises
        ------
        BenchError
            If a reply is not an error entry, or the queue is still not empty after the
            profile's ``max_reads`` queries.
        """
        return [(code, text) for code, text, _ in self._drain()]

    def close(self) -> None:
        """Close the VISA resource; closing twice does nothing."""
        with self._lock:
            if self._closed:
                return
            self._closed = True
            try:
                self._resource.close()
            except Exception as exc:
                self._raise_link_problem(exc, None)
                raise

    def __enter__(self) -> "Calibrator":
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    # --- exchanges -----------------------------------------------------------------------------

    def _setting(self, command: str) -> None:
        with self._lock:  # a setting and its error-queue check, as one
            self._write(command)
            entries = self._drain()
        if entries:
            found = "; ".join(f"{code} {text}" if text else str(code) for code, text, _ in entries)
            raise BenchError(
                f"the calibrator reported an error after the command: {found}",
                command=command,
                answer="; ".join(raw for _, _, raw in entries),
            )

    def _drain(self) -> list[tuple[int, str, str]]:
        queue = self._profile.error_queue
        entries: list[tuple[int, str, str]] = []
        with self._lock:
            # Bounded: an instrument that never reports "empty" must not hang the run.
            for _ in range(queue.max_reads):
                raw = self._query(queue.query).strip()
                if raw in self._empty_replies:  # the usual answer, already parsed once
                    return entries
                match = _ERROR_ENTRY.fullmatch(raw)
                if match is None:
                    raise BenchError(
                        "the calibrator's reply to the error-queue query is not an error"
                        " entry (code,description)",
                        command=queue.query,
                        answer=raw,
                    )
                code = int(match.group(1))
                if code == queue.empty_code:
                    if len(self._empty_replies) < 8:
                        self._empty_replies.add(raw)
                    return entries
                entries.append((code, (match.group(2) or "").strip().strip('"'), raw))
        raise BenchError(
            f"the error queue was still not empty after {queue.max_reads} reads",
            command=queue.query,
            answer="; ".join(raw for _, _, raw in entries[-3:]),
        )

    # _write and _query are called with the lock held.

    def _write(self, command: str) -> None:
        try:
            self._resource.write(command)
        except Exception as exc:
            self._raise_link_problem(exc, command)
            raise

    def _query(self, command: str) -> str:
        try:
            return self._resource.query(command)
        except Exception as exc:
            self._raise_link_problem(exc, command)
            raise

    def _raise_link_problem(self, exc: Exception, command: str | None) -> None:
        """Raise a BenchError in plain words if ``exc`` is a VISA or OS failure of the link;
        return (so the caller re-raises ``exc`` as it is) if it is anything else."""
        problem = _link_problem(exc, getattr(self._resource, "timeout", None))
        if problem is not None:
            raise BenchError(problem, command=command) from exc


def _link_problem(exc: Exception, timeout: Any) -> str | None:
    """Say in plain words what a VISA or OS error means; ``None`` if it is neither."""
    pyvisa = sys.modules.get("pyvisa")  # only set if a VISA library was ever opened
    if pyvisa is not None and isinstance(exc, pyvisa.errors.VisaIOError):
        if exc.error_code == pyvisa.constants.StatusCode.error_timeout:
            within = f" within {timeout:g} ms" if isinstance(timeout, (int, float)) else ""
            return (
                f"no answer from the calibrator{within}: check that it is on, connected,"
                " and set to the profile's terminations"
            )
        return f"the VISA link failed: {exc.description} ({exc.abbreviation})"
    if pyvisa is not None and isinstance(exc, pyvisa.errors.InvalidSession):
        return "the VISA session is closed"
    if isinstance(exc, OSError):
        return f"the connection to the calibrator was lost: {exc.strerror or exc}"
    return None


def _first_line(exc: BaseException) -> str:
    # Some backends put a whole traceback into the message; a person needs only its first line.
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text.split(" 'Traceback")[0][:200]
