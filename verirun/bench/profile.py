"""Driver profiles: how one calibrator model is spoken to, written as data.

A profile maps each operation of the driver (identify, reset, source a value, switch the output,
read the error queue) to the command text a calibrator understands, and states the output limits
the driver enforces before anything is sent. A bare name loads a profile shipped in
``verirun/bench/profiles/``; anything else is a path to a profile file.
"""

from __future__ import annotations

import functools
import math
import numbers
import string
from importlib.resources import as_file, files
from pathlib import Path
from typing import Annotated, Any

from pydantic import AfterValidator, BaseModel, BeforeValidator, ConfigDict, Field, model_validator

from verirun import yamlfile
from verirun.errors import BenchError, ProcedureError
from verirun.functions import NAMES, unit_of
from verirun.text import refusal

#: Profile format this verirun reads; a newer file is refused rather than half-understood.
PROFILE_FORMAT = 1

#: The functions a calibrator can source (see :mod:`verirun.functions`).
FUNCTIONS = NAMES


def _text(value: Any) -> Any:
    # YAML reads unquoted ON, OFF, yes, no as booleans: say so instead of "not a string".
    if isinstance(value, bool):
        raise ValueError(
            f"expected command text, got {value!r}: YAML reads unquoted ON, OFF, yes and no"
            " as true/false, so put the text in quotes"
        )
    if not isinstance(value, str):
        raise ValueError(f"expected command text, got {value!r}")
    if not value.strip():
        raise ValueError("must not be empty")
    # Sent as one message: a line break inside would reach the instrument as two commands.
    if (why := refusal(value)) is not None:
        raise ValueError(f"command text {why}")
    if value != value.strip():
        raise ValueError(
            f"{value!r} starts or ends with spaces, which the link or the instrument may"
            " drop; write the text without them"
        )
    return value


def _number(value: Any) -> Any:
    if isinstance(value, bool):
        raise ValueError(f"expected a number, got {value!r}")
    return value


def _template(value: str) -> str:
    try:
        fields = [
            (name, spec, conv)
            for _, name, spec, conv in string.Formatter().parse(value)
            if name is not None
        ]
    except ValueError as exc:
        raise ValueError(
            f"not a valid command template ({exc}); write braces as {{{{ and }}}}"
        ) from None
    if fields != [("value", "", None)]:
        raise ValueError(
            "must hold the placeholder {value} exactly once, with no format of its own"
            " (values are always sent in full precision)"
        )
    return value


Text = Annotated[str, BeforeValidator(_text)]
Template = Annotated[str, BeforeValidator(_text), AfterValidator(_template)]
Number = Annotated[float, BeforeValidator(_number), Field(allow_inf_nan=False)]


class _Frozen(BaseModel):
    model_config = ConfigDict(
        frozen=True, extra="forbid", alias_generator=lambda name: name.replace("_", "-")
    )


class Setting(_Frozen):
    """One settable quantity: the command that sets it and the range the calibrator accepts."""

    command: Template
    min: Number
    max: Number

    @model_validator(mode="after")
    def _ordered(self) -> "Setting":
        if self.min > self.max:
            raise ValueError(f"min ({self.min!r}) is above max ({self.max!r})")
        return self


class DcFunction(_Frozen):
    """A function sourced at a level only (DC quantities, resistance)."""

    select: tuple[Text, ...] = ()
    level: Setting


class AcFunction(DcFunction):
    """A function sourced at a level (rms) and a frequency."""

    frequency: Setting


class Functions(_Frozen):
    """The functions this calibrator sources; one left out is refused by the driver."""

    dc_voltage: DcFunction | None = Field(None, alias="dc-voltage")
    dc_current: DcFunction | None = Field(None, alias="dc-current")
    ac_voltage: AcFunction | None = Field(None, alias="ac-voltage")
    ac_current: AcFunction | None = Field(None, alias="ac-current")
    resistance: DcFunction | None = None

    @model_validator(mode="after")
    def _some(self) -> "Functions":
        if all(getattr(self, name.replace("-", "_")) is None for name in FUNCTIONS):
            raise ValueError(f"name at least one function ({', '.join(FUNCTIONS)})")
        return self


class Link(_Frozen):
    """How messages are framed on the VISA link."""

    read_termination: str
    write_termination: str
    timeout_ms: Annotated[int, BeforeValidator(_number), Field(gt=0)]


class Commands(_Frozen):
    """Fixed commands, sent exactly as written."""

    identify: Text
    reset: Text
    clear_status: Text
    output_on: Text
    output_off: Text


class OutputState(_Frozen):
    """The query that reads the output state back, and the replies that mean on and off."""

    query: Text
    on_replies: tuple[Text, ...]
    off_replies: tuple[Text, ...]

    @model_validator(mode="after")
    def _distinct(self) -> "OutputState":
        # Checked here, not with min_length, so a bad item is not also reported as a missing one.
        if not (self.on_replies and self.off_replies):
            raise ValueError("list at least one reply meaning on and one meaning off")
        # Compared without regard to case: an instrument that answers "on" where "ON" was
        # expected must not be read as off.
        on = {reply.casefold() for reply in self.on_replies}
        both = sorted(reply for reply in self.off_replies if reply.casefold() in on)
        if both:
            raise ValueError(f"replies {both} are listed as meaning both on and off")
        wrong = [(reply, "off", "on") for reply in self.off_replies if _scpi_boolean(reply) is True]
        wrong += [
            (reply, "on", "off") for reply in self.on_replies if _scpi_boolean(reply) is False
        ]
        if wrong:
            reply, listed, means = wrong[0]
            raise ValueError(
                f"reply {reply!r} is listed as meaning {listed}, but as SCPI boolean data"
                f" (ON, OFF or a number) it means {means}"
            )
        return self


def _scpi_boolean(reply: str) -> bool | None:
    """What ``reply`` means as SCPI boolean data (SCPI-99 vol. 1, 7.3: ON and OFF, or a number,
    non-zero meaning on), or ``None`` if it is not boolean data."""
    word = reply.strip().upper()
    if word in ("ON", "OFF"):
        return word == "ON"
    try:
        number = float(word)
    except ValueError:
        return None
    return None if math.isnan(number) else round(number) != 0


class ErrorQueue(_Frozen):
    """The query that takes one entry off the error queue; ``empty_code`` means the queue is
    empty."""

    query: Text
    empty_code: int = 0
    max_reads: int = Field(20, gt=0)


class DriverProfile(_Frozen):
    """Everything the driver needs to know about one calibrator model.

    Load it with :func:`load_profile`; the model refuses unknown keys so a misspelt key is
    reported instead of silently ignored.
    """

    format: int
    name: Text
    description: str = ""
    link: Link
    commands: Commands
    output_state: OutputState
    error_queue: ErrorQueue
    functions: Functions

    def function(self, name: str) -> DcFunction | AcFunction:
        """Return the settings of function ``name``.

        Raises
        ------
        BenchError
            If ``name`` is not a function verirun knows, or this calibrator does not source it.
        """
        if name not in FUNCTIONS:
            raise BenchError(f"unknown function {name!r}; the functions are {', '.join(FUNCTIONS)}")
        found = getattr(self.functions, name.replace("-", "_"))
        if found is None:
            raise BenchError(f"the calibrator profile {self.name!r} does not source {name}")
        return found

    def source_commands(
        self, function: str, value: float, frequency: float | None = None
    ) -> list[str]:
        """Check a stimulus against this profile's limits and return the commands that set it.

        Nothing is clipped or rounded: a value outside the limits is refused, and values are
        written with Python's shortest exact representation of the float.

        Parameters
        ----------
        function
            One of :data:`FUNCTIONS`.
        value
            The level in SI base units (V, A, Ω; rms for AC).
        frequency
            The frequency in Hz; required for AC functions and refused for the others.

        Raises
        ------
        BenchError
            Naming the value and the limit it breaks.
        """
        settings = self.function(function)
        unit = unit_of(function)
        level = _checked(f"{function} value", value, settings.level, unit)
        commands = list(settings.select)
        if isinstance(settings, AcFunction):
            if frequency is None:
                raise BenchError(
                    f"{function} needs a frequency ({settings.frequency.min!r} Hz to"
                    f" {settings.frequency.max!r} Hz); nothing was sent"
                )
            hertz = _checked(f"{function} frequency", frequency, settings.frequency, "Hz")
            # Frequency before level, so the new level never appears at the previous frequency.
            commands.append(settings.frequency.command.format(value=repr(hertz)))
        elif frequency is not None:
            raise BenchError(
                f"{function} takes no frequency, got {frequency!r} Hz; nothing was sent"
            )
        commands.append(settings.level.command.format(value=repr(level)))
        return commands


def _checked(what: str, value: Any, setting: Setting, unit: str) -> float:
    if type(value) is float:  # the usual case, and the cheapest check of all
        if math.isfinite(value) and setting.min <= value <= setting.max:
            return value
    elif isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise BenchError(f"{what} must be a number, got {value!r}; nothing was sent")
    number = float(value)
    if not math.isfinite(number):
        raise BenchError(f"{what} must be a finite number, got {number!r}; nothing was sent")
    if number != value:  # e.g. a huge int that a float cannot hold exactly
        raise BenchError(
            f"{what} {value!r} cannot be sent exactly as a floating-point number; nothing was sent"
        )
    if number > setting.max:
        raise BenchError(
            f"{what} {number!r} {unit} is above the calibrator limit {setting.max!r} {unit};"
            " nothing was sent"
        )
    if number < setting.min:
        raise BenchError(
            f"{what} {number!r} {unit} is below the calibrator limit {setting.min!r} {unit};"
            " nothing was sent"
        )
    return number


def packaged_profiles() -> list[str]:
    """Names of the profiles shipped with verirun."""
    folder = files("verirun.bench") / "profiles"
    return sorted(entry.name[:-5] for entry in folder.iterdir() if entry.name.endswith(".yaml"))


def load_profile(name_or_path: str | Path) -> DriverProfile:
    """Load a driver profile by packaged name (``"scpi-generic"``) or from a file path.

    Raises
    ------
    ProcedureError
        If there is no such profile, or the file is invalid; every problem is reported as
        ``file:line: field: message``.
    """
    text = str(name_or_path)
    if (
        isinstance(name_or_path, Path)
        or "/" in text
        or "\\" in text
        or text.endswith((".yaml", ".yml"))
    ):
        return _load(Path(name_or_path))
    packaged = files("verirun.bench") / "profiles" / f"{text}.yaml"
    if not packaged.is_file():
        raise ProcedureError(
            f"no packaged driver profile named {text!r} (there are:"
            f" {', '.join(packaged_profiles())}); give a path to a profile file instead"
        )
    with as_file(packaged) as path:
        return _load(path)


def _load(path: Path) -> DriverProfile:
    return _parse(yamlfile.read_text(path), str(path))


# A run loads its bench's profile as it starts; parsing and checking the same text again was
# about 1.2 ms, a sixth of verirun's own time in a 10-point dry run (benchmarks/engine_cpu.py).
# The profile is a frozen model of nothing but its text, so the text read each time is the key.
@functools.lru_cache(maxsize=8)
def _parse(text: str, source: str) -> DriverProfile:
    located = yamlfile.load_text(text, source)
    yamlfile.check_format(located, PROFILE_FORMAT, "driver profile")
    return yamlfile.validate(DriverProfile, located)
