"""What the operator sees and types: the step on screen, cautions, confirmations, readings.

The engine talks to a :class:`Console` through a handful of calls; :class:`QuietConsole` is the
same surface for tests and batch runs, answering confirmations as it is told.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.markup import escape

from verirun.errors import RunAborted, UnitError
from verirun.metrology.summary import label
from verirun.pointer import pointer, shows_pointer
from verirun.readings import COMMANDS, GROSS_TOLERANCES, Entry, parse_entry, reading_unit, tolerances_off
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
VERDICT_COLOURS = {"pass": "green", "conditional-pass": "yellow", "conditional-fail": "dark_orange",
                   "fail": "red", "skipped": "dim", "not-measured": "dim", "none": "dim"}


def verdict_markup(verdict: str) -> str:
    """``verdict`` as bold coloured console markup: ``[bold yellow]CONDITIONAL PASS[/]``."""
    return f"[bold {VERDICT_COLOURS[verdict]}]{label(verdict)}[/]"


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
        line += ("  acceptance " + (f"{texts['accept_low']} to {texts['accept_high']}"
                                    if texts["accept_low"] is not None else "none"))
    if texts["outer_low"] is not None:
        line += f"  fail beyond {texts['outer_low']} and {texts['outer_high']}"
    return line, label(result.verdict)


class Console:
    """The operator's console, drawn with rich."""

    interactive = True

    def __init__(self, console=None, *, input_func=None, show_window: bool = False):
        from rich.console import Console as RichConsole

        self.rich = console or RichConsole(highlight=False)
        self._input = input_func or (lambda prompt: self.rich.input(prompt))
        #: Show the allowed window at each step (off by default: knowing it can bias a reading).
        self.show_window = show_window

    # --- messages -------------------------------------------------------------------------
    def say(self, text: str) -> None:
        """A plain line."""
        self.rich.print(text)

    def warn(self, text: str) -> None:
        """A warning line, made to stand out."""
        self.rich.print(f"[bold yellow]warning:[/] {text}")

    def danger(self, text: str) -> None:
        """A line about the operator's safety."""
        self.rich.print(f"[bold white on red] DANGER [/] [bold]{text}[/]")

    def cautions(self) -> None:
        """The safety cautions shown before any output goes on."""
        from rich.panel import Panel

        # Wrapped inside its box even where other output is not (soft_wrap would cut it off).
        self.rich.print(Panel("\n\n".join(CAUTIONS), title="Safety", border_style="red"), soft_wrap=False)

    def heading(self, text: str) -> None:
        """A section heading (run start, range change)."""
        self.rich.rule(f"[bold]{text}")

    # --- questions ------------------------------------------------------------------------
    def ask(self, prompt: str) -> str:
        """Ask for a line of text.

        Raises
        ------
        RunAborted
            If the input is closed (end of file): nobody is there to answer.
        """
        try:
            return self._input(prompt)
        except EOFError:
            raise RunAborted("the console input was closed, so nobody can answer; the output was put"
                             " in standby and the run can be resumed") from None

    def confirm(self, question: str, *, word: str = "yes") -> bool:
        """Ask for an explicit confirmation: ``word`` (or its first letter) counts as yes."""
        answer = self.ask(f"{question} Type [bold]{word}[/] to go on, anything else to stop: ")
        return answer.strip().lower() in (word, word[0])

    def confirm_hazard(self, question: str) -> str:
        """Ask before a hazardous switch-on: ``"yes"``, ``"skip"`` (skip the point) or ``"stop"``."""
        answer = self.ask(f"{question} Type [bold]yes[/] (or y) to switch on, [bold]skip[/] to skip this"
                          " point, anything else to stop the run: ").strip().lower()
        return "yes" if answer in ("yes", "y") else "skip" if answer == "skip" else "stop"

    def connect(self, point: "TestPoint") -> None:
        """Show the connection for a new range and wait for the operator (output is in standby).

        Only Enter goes on (or ``abort``): a reading typed here is not taken for one, and is
        refused so that it is not lost without a word.
        """
        rng = point.range
        self.heading(f"Range {point.range_text()}")
        self.say("Output is in [bold]standby[/].")
        if rng.connect:
            self.say(f"Connect: {rng.connect}")
        while True:
            answer = self.ask("Press Enter when the leads and the range selector are set (or abort): ").strip()
            if not answer:
                return
            if answer.lower() == "abort":
                raise RunAborted("aborted by the operator before the range was connected; the output is in"
                                 " standby and the run can be resumed")
            self.say(f"  [yellow]not taken: the output is in standby and nothing is applied yet, so"
                     f" {escape(repr(answer))} is no reading[/]; press Enter once the leads are set, then read"
                     " the step")

    def step(self, point: "TestPoint") -> None:
        """Show the step about to be read: the stimulus, the unit and scale to read, and on an
        ohms or arc-specified scale where the pointer should stand."""
        unit, _ = reading_unit(point.range)
        self.say(f"\n[bold]Step {point.index + 1} of {point.total}[/]  range {point.range.id}"
                 f"  applied [bold cyan]{point.stimulus_text()}[/]")
        self.say(f"  read in {unit}" + (f" on: {escape(point.range.read_on)}" if point.range.read_on else ""))
        if shows_pointer(point):
            where = pointer(point)
            self.say(f"  pointer expected at {where.text()}"
                     + (f"; window {where.window_text()}" if self.show_window else ""))
        if self.show_window:
            self.say(f"  window {_limits(point)}")

    def result(self, point: "TestPoint", entry: Entry, result: "Result") -> None:
        """Show the verdict of a reading."""
        line, _ = result_text(point, entry, result)
        pct = f"{result.percent_of_tolerance:+.0f} % of tolerance" if result.percent_of_tolerance is not None else ""
        self.say(f"  {escape(line)}  {pct}  {verdict_markup(result.verdict)}")

    def take(self, point: "TestPoint") -> Entry:
        """Ask for the reading until it parses; commands are returned as entries.

        A reading more than :data:`GROSS_TOLERANCES` tolerances from the nominal is asked about
        before it is taken: ``yes`` (or the same reading typed again) keeps it; anything else is
        read as a new entry.
        """
        unit, _ = reading_unit(point.range)
        prompt = ask_reading = f"  reading in {unit} (or {', '.join(COMMANDS)}): "
        gross: Entry | None = None  # a far-off reading waiting to be confirmed
        replaced: list[str] = []    # far-off readings not kept: journaled with the one that is
        while True:
            typed = self.ask(prompt)
            if gross is not None and typed.strip().lower() in ("yes", "y"):
                gross.replaced = tuple(replaced)
                return gross
            try:
                entry = parse_entry(typed, point)
            except UnitError as exc:
                self.say(f"  [yellow]{exc}[/]; type the reading again")
                if gross is not None:
                    replaced.append(gross.typed)
                gross, prompt = None, ask_reading
                continue
            off = tolerances_off(point, entry.value) if entry.kind == "reading" else None
            if off is None or off <= GROSS_TOLERANCES or (gross is not None and entry.value == gross.value):
                if gross is not None and entry.value != gross.value:
                    replaced.append(gross.typed)
                entry.replaced = tuple(replaced)
                return entry
            if gross is not None:
                replaced.append(gross.typed)
            gross = entry
            prompt = (f"  {escape(repr(typed.strip()))} is {off:.1f} tolerances from the nominal"
                      f" {format_quantity(point.nominal, point.unit)}: type [bold]yes[/] to keep it,"
                      " or type the reading again: ")


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
            self.echo.print(f"[bold yellow]warning:[/] {text}")

    def danger(self, text: str) -> None:
        self._log("DANGER: " + text)
        if self.echo is not None:
            self.echo.print(f"[bold white on red] DANGER [/] {text}")

    def cautions(self) -> None:
        self._log("cautions shown")

    def heading(self, text: str) -> None:
        self._log(text)
        if self.echo is not None:
            self.echo.rule(text)

    def ask(self, prompt: str) -> str:
        self._log(prompt)
        return ""

    def confirm(self, question: str, *, word: str = "yes") -> bool:
        answer = self._answers.pop(0) if self._answers else False
        self._log(f"{question} -> {answer}")
        return answer is True or answer == "yes"

    def confirm_hazard(self, question: str) -> str:
        answer = self._answers.pop(0) if self._answers else False
        self._log(f"{question} -> {answer}")
        return "yes" if answer is True or answer == "yes" else "skip" if answer == "skip" else "stop"

    def connect(self, point: "TestPoint") -> None:
        if self._quiet:
            return
        self.heading(f"Range {point.range_text()}")
        if point.range.connect:
            self._log(f"Connect: {point.range.connect}")

    def step(self, point: "TestPoint") -> None:
        if not self._quiet:
            self._log(f"Step {point.index + 1} of {point.total} {point.range.id} {point.stimulus_text()}")

    def result(self, point: "TestPoint", entry: Entry, result: "Result") -> None:
        if self._quiet:
            return
        numbers, word = result_text(point, entry, result)
        line = f"{point.index + 1:>3}/{point.total} {point.range.id:<9} {point.stimulus_text():<15} {numbers}"
        self._log(f"{line} {word}")
        if self.echo is not None:
            self.echo.print(f"{escape(line)} {verdict_markup(result.verdict)}")
