"""What the operator sees and types: the step on screen, cautions, confirmations, readings.

The engine talks to a :class:`Console` through a handful of calls; :class:`QuietConsole` is the
same surface for tests and batch runs, answering confirmations as it is told.
"""

from __future__ import annotations

import os
import queue
import threading
from typing import TYPE_CHECKING

from rich.text import Text

from verirun.errors import RunAborted, UnitError
from verirun.metrology.summary import label
from verirun.pointer import pointer, shows_pointer
from verirun.readings import (
    COMMANDS,
    GROSS_TOLERANCES,
    MAX_ENTRY_LENGTH,
    Entry,
    OperatorSilent,
    parse_entry,
    reading_unit,
    tolerances_off,
)
from verirun.units import format_quantity

if TYPE_CHECKING:
    from verirun.evaluation import Result
    from verirun.procedure.plan import TestPoint

CAUTIONS = (
    "A calibrator can source voltages and currents that kill. Verify the meter under test is"
    " rated for every range you will apply, use leads and connectors rated for the voltage, and"
    " keep hands clear of live terminals while the output is on.",
    "verirun switches the output to standby between points, on every error and on Ctrl-C, but it"
    " cannot see your bench: if in doubt, switch the calibrator output off at the instrument.",
    "These cautions do not replace your local electrical-safety rules, the instrument makers'"
    " instructions or licensed practice; follow those where they ask for more.",
)


#: The colour of each statement on the console: conditional results stand apart from both ends.
VERDICT_COLOURS = {
    "pass": "green",
    "conditional-pass": "yellow",
    "conditional-fail": "dark_orange",
    "fail": "red",
    "skipped": "dim",
    "not-measured": "dim",
    "none": "dim",
}


def verdict_text(verdict: str) -> Text:
    """``verdict`` as bold coloured console text: ``CONDITIONAL PASS`` in bold yellow."""
    return Text(label(verdict), style=f"bold {VERDICT_COLOURS[verdict]}")


def _limits(point: "TestPoint") -> str:
    """The tolerance limits of ``point`` as the shared formatter prints them."""
    from verirun.evaluation import shown

    texts = shown(point)
    return f"{texts['low']} to {texts['high']}"


def result_text(point: "TestPoint", entry: Entry, result: "Result") -> tuple[str, str]:
    """The numbers of a result line, as :func:`verirun.evaluation.shown` prints them, and the
    verdict's label: ``("reading 0.8 V  limits 0.6 V to 0.8 V", "PASS")``. The limits that
    decide the verdict are all there: the acceptance limits under a guarded rule, and under the
    non-binary rule the limits ``w`` outside the tolerance (beyond them a result fails)."""
    from verirun.evaluation import shown

    texts = shown(point, result, entry.typed)
    line = f"reading {texts['reading']}  limits {texts['low']} to {texts['high']}"
    if point.rule.name != "simple":
        line += "  acceptance " + (
            f"{texts['accept_low']} to {texts['accept_high']}"
            if texts["accept_low"] is not None
            else "none"
        )
    if texts["outer_low"] is not None:
        line += f"  fail beyond {texts['outer_low']} and {texts['outer_high']}"
    return line, label(result.verdict)


# Every line shown is built as rich Text from literal pieces, never as markup: what an operator
# types and what a procedure says ("[/]", "[meter damaged]") is shown as it was written.
def _warning(text: str) -> Text:
    return Text.assemble(("warning:", "bold yellow"), " ", text)


def _danger(text: str, *, emphasis: bool = True) -> Text:
    return Text.assemble(
        (" DANGER ", "bold white on red"), " ", (text, "bold") if emphasis else text
    )


class LineReader:
    """Lines typed on a file descriptor, read by a thread of its own.

    A prompt can then stop waiting after a time limit while the read goes on: a line typed
    later is the answer to the next prompt. A line longer than ``max_length`` characters is
    cut to ``max_length + 1`` as it is read (so it is refused as too long without ever being
    held whole); the rest of it up to its newline is dropped.

    Parameters
    ----------
    fd
        The file descriptor to read (the standard input by default).
    max_length
        The longest line kept whole.
    """

    def __init__(self, fd: int = 0, *, max_length: int = MAX_ENTRY_LENGTH):
        self._fd = fd
        self._limit = max_length + 1
        self._lines: queue.Queue[str | None] = queue.Queue()
        self._thread: threading.Thread | None = None

    def get(self, within: float | None = None) -> str:
        """The next line (without its newline).

        Raises
        ------
        OperatorSilent
            If no line came within ``within`` seconds.
        EOFError
            If the input is closed.
        """
        if self._thread is None:
            self._thread = threading.Thread(target=self._read, name="verirun-input", daemon=True)
            self._thread.start()
        try:
            line = self._lines.get(timeout=within)
        except queue.Empty:
            raise OperatorSilent(within) from None
        if line is None:
            self._lines.put(None)  # closed for every later prompt too
            raise EOFError
        return line

    def _read(self) -> None:
        kept, size = [], 0
        while True:
            try:
                chunk = os.read(self._fd, 65536)
            except OSError:
                chunk = b""
            if not chunk:
                if kept:
                    self._lines.put(self._text(kept))
                self._lines.put(None)
                return
            while chunk:
                head, newline, chunk = chunk.partition(b"\n")
                if size < self._limit * 4:  # UTF-8 takes at most four bytes a character
                    kept.append(head[: self._limit * 4 - size])
                    size += len(kept[-1])
                if newline:
                    self._lines.put(self._text(kept))
                    kept, size = [], 0

    def _text(self, parts: list[bytes]) -> str:
        return b"".join(parts).decode("utf-8", errors="replace").rstrip("\r")[: self._limit]


class Console:
    """The operator's console, drawn with rich.

    Parameters
    ----------
    console
        The rich console to draw on.
    input_func
        Called with each prompt's text to get the operator's line (tests type through it; it may
        raise ``OperatorSilent`` or ``EOFError``). By default lines are read from the standard
        input by a :class:`LineReader`, so a reading prompt can time out.
    show_window
        Show the allowed window at each step (off by default: knowing it can bias a reading).
    """

    interactive = True

    def __init__(self, console=None, *, input_func=None, show_window: bool = False):
        from rich.console import Console as RichConsole

        self.rich = console or RichConsole(highlight=False)
        self._input = input_func
        self._lines = LineReader() if input_func is None else None
        #: Show the allowed window at each step (off by default: knowing it can bias a reading).
        self.show_window = show_window

    # --- messages -------------------------------------------------------------------------
    def say(self, text: str) -> None:
        """A plain line, shown as written."""
        self.rich.print(Text(text))

    def warn(self, text: str) -> None:
        """A warning line, made to stand out."""
        self.rich.print(_warning(text))

    def danger(self, text: str) -> None:
        """A line about the operator's safety."""
        self.rich.print(_danger(text))

    def cautions(self) -> None:
        """The safety cautions shown before any output goes on."""
        from rich.panel import Panel

        # Wrapped inside its box even where other output is not (soft_wrap would cut it off).
        self.rich.print(
            Panel(Text("\n\n".join(CAUTIONS)), title="Safety", border_style="red"), soft_wrap=False
        )

    def heading(self, text: str) -> None:
        """A section heading (run start, range change)."""
        self.rich.rule(Text(text, style="bold"))

    # --- questions ------------------------------------------------------------------------
    def ask(self, prompt: str | Text, *, within: float | None = None) -> str:
        """Ask for a line of text.

        Parameters
        ----------
        prompt
            Shown as written.
        within
            Seconds to wait for the answer; ``None`` waits for as long as it takes.

        Raises
        ------
        RunAborted
            If the input is closed (end of file): nobody is there to answer.
        OperatorSilent
            If nothing was typed within ``within`` seconds.
        """
        shown = prompt if isinstance(prompt, Text) else Text(prompt)
        try:
            if self._input is not None:
                return self._input(str(shown))
            self.rich.print(shown, end="")
            return self._lines.get(within)
        except EOFError:
            raise RunAborted(
                "the console input was closed, so nobody can answer; the output was put"
                " in standby and the run can be resumed"
            ) from None

    def confirm(self, question: str, *, word: str = "yes") -> bool:
        """Ask for an explicit confirmation: ``word`` (or its first letter) counts as yes."""
        answer = self.ask(
            Text.assemble(question, " Type ", (word, "bold"), " to go on, anything else to stop: ")
        )
        return answer.strip().lower() in (word, word[0])

    def confirm_hazard(self, question: str) -> str:
        """Ask before a hazardous switch-on: ``"yes"``, ``"skip"`` (skip the point) or
        ``"stop"``."""
        answer = self.ask(
            Text.assemble(
                question,
                " Type ",
                ("yes", "bold"),
                " (or y) to switch on, ",
                ("skip", "bold"),
                " to skip this point, anything else to stop the run: ",
            )
        )
        answer = answer.strip().lower()
        return "yes" if answer in ("yes", "y") else "skip" if answer == "skip" else "stop"

    def connect(self, point: "TestPoint") -> None:
        """Show the connection for a new range and wait for the operator (output is in standby).

        Only Enter goes on (or ``abort``): a reading typed here is not taken for one, and is
        refused so that it is not lost without a word.
        """
        rng = point.range
        self.heading(f"Range {point.range_text()}")
        self.rich.print(Text.assemble("Output is in ", ("standby", "bold"), "."))
        if rng.connect:
            self.say(f"Connect: {rng.connect}")
        while True:
            answer = self.ask(
                "Press Enter when the leads and the range selector are set (or abort): "
            ).strip()
            if not answer:
                return
            if answer.lower() == "abort":
                raise RunAborted(
                    "aborted by the operator before the range was connected; the output is in"
                    " standby and the run can be resumed"
                )
            self.rich.print(
                Text.assemble(
                    (
                        "  not taken: the output is in standby and nothing is applied yet,"
                        f" so {answer!r} is no reading",
                        "yellow",
                    ),
                    "; press Enter once the leads are set, then read the step",
                )
            )

    def step(self, point: "TestPoint") -> None:
        """Show the step about to be read: the stimulus, the unit and scale to read, and on an
        ohms or arc-specified scale where the pointer should stand."""
        unit, _ = reading_unit(point.range)
        self.rich.print(
            Text.assemble(
                "\n",
                (f"Step {point.index + 1} of {point.total}", "bold"),
                f"  range {point.range.id}  applied ",
                (point.stimulus_text(), "bold cyan"),
            )
        )
        self.say(
            f"  read in {unit}" + (f" on: {point.range.read_on}" if point.range.read_on else "")
        )
        if shows_pointer(point):
            where = pointer(point)
            self.say(
                f"  pointer expected at {where.text()}"
                + (f"; window {where.window_text()}" if self.show_window else "")
            )
        if self.show_window:
            self.say(f"  window {_limits(point)}")

    def result(self, point: "TestPoint", entry: Entry) -> None:
        """Show a reading's evaluation: its numbers and verdict."""
        from verirun.evaluation import evaluate

        result = evaluate(point, entry.value)
        line, _ = result_text(point, entry, result)
        pct = (
            f"{result.percent_of_tolerance:+.0f} % of tolerance"
            if result.percent_of_tolerance is not None
            else ""
        )
        self.rich.print(Text.assemble(f"  {line}  {pct}  ", verdict_text(result.verdict)))

    def take(self, point: "TestPoint", *, within: float | None = None) -> Entry:
        """Ask for the reading until it parses; commands are returned as entries.

        A reading more than :data:`GROSS_TOLERANCES` tolerances from the nominal is asked about
        before it is taken: ``yes`` (or the same reading typed again) keeps it; anything else is
        read as a new entry.

        Raises
        ------
        OperatorSilent
            If nothing was typed within ``within`` seconds of a prompt.
        """
        unit, _ = reading_unit(point.range)
        prompt = ask_reading = f"  reading in {unit} (or {', '.join(COMMANDS)}): "
        gross: Entry | None = None  # a far-off reading waiting to be confirmed
        replaced: list[str] = []  # far-off readings not kept: journaled with the one that is
        while True:
            typed = self.ask(prompt, within=within)
            if gross is not None and typed.strip().lower() in ("yes", "y"):
                gross.replaced = tuple(replaced)
                return gross
            try:
                entry = parse_entry(typed, point)
            except UnitError as exc:
                self.rich.print(
                    Text.assemble("  ", (str(exc), "yellow"), "; type the reading again")
                )
                if gross is not None:
                    replaced.append(gross.typed)
                gross, prompt = None, ask_reading
                continue
            off = tolerances_off(point, entry.value) if entry.kind == "reading" else None
            if (
                off is None
                or off <= GROSS_TOLERANCES
                or (gross is not None and entry.value == gross.value)
            ):
                if gross is not None and entry.value != gross.value:
                    replaced.append(gross.typed)
                entry.replaced = tuple(replaced)
                return entry
            if gross is not None:
                replaced.append(gross.typed)
            gross = entry
            prompt = Text.assemble(
                f"  {typed.strip()!r} is {off:.1f} tolerances from the nominal"
                f" {format_quantity(point.nominal, point.unit)}: type ",
                ("yes", "bold"),
                " to keep it, or type the reading again: ",
            )


class QuietConsole:
    """The console surface for tests and scripted runs: records what would be shown.

    Parameters
    ----------
    confirm_answers
        Answers to give to confirmations, in order; when exhausted, confirmations are refused.
    echo
        A rich console to print a short line per step to, or ``None`` for silence.
    keep
        Keep every line that would be shown in :attr:`lines` (for tests). Off, a silent console
        formats nothing, which keeps long scripted runs cheap.
    """

    interactive = False

    def __init__(self, confirm_answers: list[bool] | None = None, echo=None, keep: bool = False):
        self.lines: list[str] = []
        self._answers = list(confirm_answers or [])
        self.echo = echo
        self.keep = keep
        self._quiet = echo is None and not keep

    def _log(self, text: str) -> None:
        if self.keep:
            self.lines.append(text)

    def say(self, text: str) -> None:
        self._log(text)

    def warn(self, text: str) -> None:
        self._log("warning: " + text)
        if self.echo is not None:
            self.echo.print(_warning(text))

    def danger(self, text: str) -> None:
        self._log("DANGER: " + text)
        if self.echo is not None:
            self.echo.print(_danger(text, emphasis=False))

    def cautions(self) -> None:
        self._log("cautions shown")

    def heading(self, text: str) -> None:
        self._log(text)
        if self.echo is not None:
            self.echo.rule(Text(text))

    def ask(self, prompt, *, within: float | None = None) -> str:
        self._log(str(prompt))
        return ""

    def confirm(self, question: str, *, word: str = "yes") -> bool:
        answer = self._answers.pop(0) if self._answers else False
        self._log(f"{question} -> {answer}")
        return answer is True or answer == "yes"

    def confirm_hazard(self, question: str) -> str:
        answer = self._answers.pop(0) if self._answers else False
        self._log(f"{question} -> {answer}")
        return (
            "yes" if answer is True or answer == "yes" else "skip" if answer == "skip" else "stop"
        )

    def connect(self, point: "TestPoint") -> None:
        if self._quiet:
            return
        self.heading(f"Range {point.range_text()}")
        if point.range.connect:
            self._log(f"Connect: {point.range.connect}")

    def step(self, point: "TestPoint") -> None:
        if not self._quiet:
            self._log(
                f"Step {point.index + 1} of {point.total} {point.range.id} {point.stimulus_text()}"
            )

    def result(self, point: "TestPoint", entry: Entry) -> None:
        if self._quiet:
            return
        from verirun.evaluation import evaluate

        result = evaluate(point, entry.value)
        numbers, word = result_text(point, entry, result)
        line = (
            f"{point.index + 1:>3}/{point.total} {point.range.id:<9}"
            f" {point.stimulus_text():<15} {numbers}"
        )
        self._log(f"{line} {word}")
        if self.echo is not None:
            self.echo.print(Text.assemble(f"{line} ", verdict_text(result.verdict)))
