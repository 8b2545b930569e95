"""Environmental conditions of a run: laboratory temperature and relative humidity at the start."""

from __future__ import annotations

import math
import re

from verirun.errors import UnitError

_TEMPERATURE = re.compile(r"^\s*([+-]?\d+(?:\.\d+)?)\s*(?:°\s*C|°C|C|degC)?\s*$")
_HUMIDITY = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*(?:%\s*(?:RH|rh)?|RH|rh)?\s*$")


def parse_temperature(text: str, field: str = "temperature") -> float:
    """A laboratory temperature in °C (``"23.1"``, ``"23.1 °C"``), plausible for a lab
    (-10 to 50)."""
    match = _TEMPERATURE.match(text)
    if match is None:
        raise UnitError(
            f"{field}: {text.strip()!r} is not a temperature in °C (e.g. 23.1 or 23.1 °C)"
        )
    value = float(match[1])
    if not -10.0 <= value <= 50.0:
        raise UnitError(f"{field}: {value:g} °C is not a laboratory temperature (-10 °C to 50 °C)")
    return value


def parse_humidity(text: str, field: str = "humidity") -> float:
    """A relative humidity in percent (``"45"``, ``"45 %"``, ``"45 %RH"``), 0 to 100."""
    match = _HUMIDITY.match(text)
    if match is None:
        raise UnitError(
            f"{field}: {text.strip()!r} is not a relative humidity in % (e.g. 45 or 45 %)"
        )
    value = float(match[1])
    if not (math.isfinite(value) and 0.0 <= value <= 100.0):
        raise UnitError(f"{field}: {value:g} % is not a relative humidity (0 % to 100 %)")
    return value


def ask_conditions(console, *, have: dict) -> dict:
    """Ask the operator for the conditions not yet known, re-asking until each parses."""
    env = dict(have)
    for key, question, parse in (
        ("temperature_c", "Laboratory temperature now, in °C: ", parse_temperature),
        ("humidity_pct", "Relative humidity now, in %: ", parse_humidity),
    ):
        while key not in env:
            try:
                env[key] = parse(console.ask(question))
            except UnitError as exc:
                console.say(f"  {exc}; type it again")
    return env
