"""The errors a user can cause, each of which the CLI turns into one clear line.

Everything verirun raises on purpose derives from :class:`VerirunError`; anything else reaching
the CLI is a bug and is reported as one.
"""

from __future__ import annotations


class VerirunError(Exception):
    """Root of every error verirun raises for a person to read."""

    exit_code = 1


class UnitError(VerirunError, ValueError):
    """A quantity could not be parsed, or carries the wrong unit."""


class ProcedureError(VerirunError, ValueError):
    """A procedure, bench or profile file is invalid.

    Parameters
    ----------
    problems
        One line per problem, each already formatted as ``file:line: field: message``.
    """

    def __init__(self, problems: list[str] | str):
        if isinstance(problems, str):
            problems = [problems]
        self.problems = list(problems)
        super().__init__("\n".join(self.problems))


class BenchError(VerirunError, RuntimeError):
    """The calibrator or the VISA link did something the run cannot go on with.

    Parameters
    ----------
    message
        What happened, in plain words.
    step
        The step of the run (e.g. ``"point 3 of 12 (dcv-10 at 5 V)"``), when known.
    command
        The command sent, when known.
    answer
        What the instrument answered, when known.
    """

    exit_code = 3

    def __init__(
        self,
        message: str,
        *,
        step: str | None = None,
        command: str | None = None,
        answer: str | None = None,
    ):
        self.message = message
        self.step = step
        self.command = command
        self.answer = answer
        super().__init__(self._text())

    def _text(self) -> str:
        parts = [self.message]
        if self.command is not None:
            parts.append(f"command {self.command!r}")
        if self.answer is not None:
            parts.append(f"instrument answered {self.answer!r}")
        text = "; ".join(parts)
        return f"{self.step}: {text}" if self.step else text

    def at_step(self, step: str) -> "BenchError":
        """Return the same error, naming the step of the run it happened in."""
        return type(self)(self.message, step=step, command=self.command, answer=self.answer)


class SafetyError(BenchError):
    """The output could not be verified off: the operator must switch it off by hand."""

    exit_code = 4


class RecordError(VerirunError, ValueError):
    """A journal or run record is unreadable, inconsistent or tampered with."""


class RunAborted(VerirunError):
    """The operator stopped the run; it can be resumed."""

    exit_code = 2


class StorageError(VerirunError):
    """A file of a run or report folder could not be written (a full disk, a read-only folder, a
    path that is a file): a fault of the bench, resumable once it is fixed."""

    exit_code = 3


class BusyError(VerirunError):
    """Another verirun process holds the run folder or the calibrator."""

    exit_code = 5
