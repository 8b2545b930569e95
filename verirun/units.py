"""Quantities at the edges: parse ``"4.7 kΩ"`` or ``"125 mA"`` into SI base units, format back.

Inside verirun every quantity is a plain float in SI base units (V, A, Ω, Hz) or a plain number
of degrees of arc or percent. Text with units exists only in files, on the console and on the
certificate, and crosses into floats here.

The grammar is deliberately small (one SI prefix, one unit symbol from :data:`UNITS`): a general
unit library costs more start-up time than the whole of ``verirun check``, and the tests check
this parser against one.
"""

from __future__ import annotations

import math
import re
from decimal import ROUND_HALF_EVEN, Decimal
from fractions import Fraction

from verirun.errors import UnitError

#: Unit symbols accepted in text, mapped to the dimension they measure.
UNITS: dict[str, str] = {
    "V": "V",
    "v": "V",
    "volt": "V",
    "volts": "V",
    "A": "A",
    "amp": "A",
    "amps": "A",
    "ampere": "A",
    "amperes": "A",
    "Ω": "Ω",
    "ohm": "Ω",
    "ohms": "Ω",
    "Ohm": "Ω",
    "Ohms": "Ω",
    "\u2126": "Ω",
    "Hz": "Hz",
    "hz": "Hz",
    "s": "s",
    "deg": "deg",
    "°": "deg",
    "degree": "deg",
    "degrees": "deg",
    "%": "%",
    "ppm": "ppm",
}

#: SI prefixes and their factors. ``u``, ``µ`` (micro sign) and ``μ`` (Greek mu) are all micro.
PREFIXES: dict[str, float] = {
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "µ": 1e-6,
    "μ": 1e-6,
    "m": 1e-3,
    "": 1.0,
    "k": 1e3,
    "M": 1e6,
    "G": 1e9,
}

#: Units that take no prefix.
_UNPREFIXED = {"deg", "%", "ppm"}

#: Names of dimensions for error messages.
DIMENSION_NAMES = {
    "V": "volts",
    "A": "amperes",
    "Ω": "ohms",
    "Hz": "hertz",
    "s": "seconds",
    "deg": "degrees of arc",
    "%": "percent",
    "ppm": "parts per million",
    "": "a plain number",
}

#: A number at the start of a text. Matched at one place only and with no quantifier inside
#: another, so the match takes time in proportion to the text (a pattern spanning spaces,
#: number and unit at once backtracked over every split of a long run of spaces).
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_DECIMAL_COMMA = re.compile(r"[+-]?\d+,\d")

#: The longest text read as a quantity, in characters; "-1.23456789012e-12 kohm" is 23.
MAX_QUANTITY_LENGTH = 100


def split_quantity(text: str) -> tuple[str, str] | None:
    """Split ``" 4.7 kΩ "`` into ``("4.7", "kΩ")`` (the unit ``""`` if none); ``None`` when
    the text is not a number followed by at most one word. Linear in the length of ``text``."""
    body = text.strip()
    match = _NUMBER.match(body)
    if match is None:
        return None
    unit = body[match.end() :].lstrip()
    if unit and (unit[0] in ".+-" or unit[0].isdecimal() or any(ch.isspace() for ch in unit)):
        return None
    return match.group(), unit


def _split_unit(symbol: str) -> tuple[float, str]:
    """Split ``"kΩ"`` into ``(1e3, "Ω")``, preferring a whole unit name over a prefix."""
    if symbol in UNITS:
        return 1.0, UNITS[symbol]
    for prefix, factor in PREFIXES.items():
        if prefix and symbol.startswith(prefix):
            rest = symbol[len(prefix) :]
            if rest in UNITS and UNITS[rest] not in _UNPREFIXED:
                return factor, UNITS[rest]
    raise UnitError(
        f"unknown unit {symbol!r} (use V, A, Ω or ohm, Hz, deg, % with an SI prefix"
        " such as m, k, M)"
    )


def parse_quantity(
    text: str | float | int, expect: str | None = None, *, bare_factor: float = 1.0
) -> tuple[float, str]:
    """Parse a number with an optional unit into ``(value in base units, dimension)``.

    Parameters
    ----------
    text
        ``"4.7 kΩ"``, ``"125mA"``, ``"2.5 deg"``, ``"10"``; a plain int or float passes through.
    expect
        The dimension the value must have (``"V"``, ``"A"``, ``"Ω"``, ``"Hz"``, ``"deg"``,
        ``"%"``). A bare number is taken to be in it, and so is a number with a prefix alone
        (``"1.06k"`` for 1.06 kΩ when ``expect`` is ``"Ω"``).
    bare_factor
        What a bare number is multiplied by: ``1e-3`` when it is typed in mA on a range whose
        prompt shows mA.

    Returns
    -------
    tuple
        The value in SI base units and its dimension (``""`` for a bare number with no
        ``expect``).

    Raises
    ------
    UnitError
        With the reason in plain words: not a number, decimal comma, unknown unit, wrong unit,
        not finite.
    """
    if isinstance(text, bool):
        raise UnitError(f"expected a number, got {text!r}")
    if isinstance(text, (int, float)):
        try:
            value = float(text)
        except OverflowError:
            raise UnitError(f"{text!r} is too large a number") from None
        value *= bare_factor
        dimension = expect or ""
    else:
        if not isinstance(text, str):
            raise UnitError(f"expected a number with an optional unit, got {type(text).__name__}")
        if len(text) > MAX_QUANTITY_LENGTH:
            raise UnitError(
                f"too long for a number with a unit ({len(text)} characters, at most"
                f" {MAX_QUANTITY_LENGTH})"
            )
        if _DECIMAL_COMMA.match(text.strip()):
            raise UnitError(f"{text.strip()!r}: use a decimal point, not a comma")
        parts = split_quantity(text)
        if parts is None:
            if not text.strip():
                raise UnitError("empty: type a number")
            raise UnitError(f"{text.strip()!r} is not a number with an optional unit")
        value = float(parts[0])
        symbol = parts[1]
        if (
            symbol
            and expect
            and expect not in _UNPREFIXED
            and symbol in PREFIXES
            and symbol not in UNITS
        ):
            value *= PREFIXES[symbol]  # a prefix alone: the expected unit is understood
            dimension = expect
        elif symbol:
            factor, dimension = _split_unit(symbol)
            value *= factor
        else:
            value *= bare_factor
            dimension = expect or ""
    if not math.isfinite(value):
        raise UnitError(f"{text!r} is not a finite number")
    if expect is not None and dimension != expect:
        raise UnitError(
            f"{str(text).strip()!r} is in {DIMENSION_NAMES.get(dimension, dimension)},"
            f" expected {DIMENSION_NAMES.get(expect, expect)}"
        )
    return value, dimension


def parse_value(text: str | float | int, expect: str) -> float:
    """Parse a quantity that must be in dimension ``expect``; return its value in base units."""
    return parse_quantity(text, expect)[0]


_ENGINEERING = [
    (1e9, "G"),
    (1e6, "M"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "µ"),
    (1e-9, "n"),
    (1e-12, "p"),
]


def format_quantity(value: float | None, unit: str, digits: int = 6) -> str:
    """Format a base-unit value with an SI prefix: ``format_quantity(0.125, "A") == "125 mA"``.

    ``None`` and infinity format as ``"∞"``; ``digits`` is the number of significant digits kept.
    """
    if value is None or math.isinf(value):
        return "∞" if value is None or value > 0 else "-∞"
    if not unit:
        return f"{value:.{digits}g}"
    if unit in _UNPREFIXED or value == 0:
        return f"{value:.{digits}g} {unit}".strip() if unit != "%" else f"{value:.{digits}g} %"
    magnitude = abs(value)
    for factor, prefix in _ENGINEERING:
        if magnitude >= factor * 0.9999999995:
            break
    return f"{_significant(value / factor, digits)} {prefix}{unit}"


def _significant(number: float, digits: int) -> str:
    """``number`` to ``digits`` significant digits, never in exponent form (320, not 3.2e+02)."""
    text = f"{number:.{digits}g}"
    if "e" not in text:
        return text
    return f"{float(text):.0f}"


def in_band(frequency: float | None, low_hz: float | None, high_hz: float | None) -> bool:
    """True when ``frequency`` lies in the band ``low_hz`` .. ``high_hz``, ends included.

    A band with no lower end (``None``) holds at every frequency, DC included.
    """
    if low_hz is None:
        return True
    return frequency is not None and low_hz <= frequency <= high_hz


def prefix_for(value: float) -> tuple[float, str]:
    """The SI prefix a value of this size is shown with: ``prefix_for(0.05) == (1e-3, "m")``."""
    magnitude = abs(value)
    for factor, prefix in _ENGINEERING:
        if magnitude >= factor * 0.9999999995:
            return factor, prefix
    return _ENGINEERING[-1]


# --- Numbers as written, on one row of output ------------------------------------------------
#
# A row (a console result line, a certificate row, the window command's output) shows a reading,
# its limits and its uncertainty under one SI prefix. The reading is shown with the digits the
# operator typed; each limit with enough digits that the reading shown, compared with the limit
# shown, gives the verdict shown; U as rounded by the one rounding function (GUM 7.2.6).

_PREFIX_EXPONENTS = {
    "p": -12,
    "n": -9,
    "u": -6,
    "µ": -6,
    "μ": -6,
    "m": -3,
    "": 0,
    "k": 3,
    "M": 6,
    "G": 9,
}
_PREFIX_NAMES = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}


def typed_decimal(text: str, expect: str, *, bare_factor: float = 1.0) -> tuple[Decimal, int]:
    """The number an operator typed, exactly as typed, and the power of ten of its prefix.

    ``typed_decimal("2.900 kΩ", "Ω") == (Decimal("2.900"), 3)``: trailing zeros are kept, as the
    operator wrote them. A prefix alone (``"1.06k"``) counts as that prefix; a bare number is in
    the unit whose factor is ``bare_factor`` (as :func:`parse_quantity` reads it). The text is
    checked by :func:`parse_quantity` first.

    Raises
    ------
    UnitError
        If ``text`` is not a quantity in ``expect``.
    """
    parse_quantity(text, expect, bare_factor=bare_factor)  # the reasons for refusing, in one place
    number_text, symbol = split_quantity(text)
    number = Decimal(number_text)
    if not symbol:
        return number, round(math.log10(bare_factor))
    if symbol in UNITS:
        return number, 0
    if symbol in _PREFIX_EXPONENTS:
        return number, _PREFIX_EXPONENTS[symbol]
    for prefix, power in _PREFIX_EXPONENTS.items():
        if prefix and symbol.startswith(prefix) and symbol[len(prefix) :] in UNITS:
            return number, power
    return number, 0


def row_exponent(unit: str, *values: float | None) -> int:
    """The power of ten of the SI prefix a row is shown under: the engineering prefix of the
    largest finite magnitude among ``values`` (0 when there is none, or for a unit that takes
    no prefix)."""
    if unit in _UNPREFIXED or not unit:
        return 0
    finite = [abs(v) for v in values if v is not None and math.isfinite(v) and v != 0]
    if not finite:
        return 0
    magnitude = max(finite)
    for factor, prefix in _ENGINEERING:
        if magnitude >= factor * 0.9999999995:
            return _PREFIX_EXPONENTS[prefix]
    return -12


def unit_text(unit: str, exponent: int) -> str:
    """``"mV"`` for ``("V", -3)``; ``"% of length"`` and ``"deg"`` as they are."""
    return f"{_PREFIX_NAMES[exponent]}{unit}"


def _scaled(value: Decimal | Fraction, exponent: int) -> Decimal | Fraction:
    if isinstance(value, Decimal):
        return value.scaleb(-exponent)
    if exponent == 0:
        return value
    return value / 10**exponent if exponent > 0 else value * 10**-exponent


def _plain_decimal(d: Decimal) -> str:
    text = f"{d:f}"
    return text[1:] if text.startswith("-") and d == 0 else text  # never "-0"


def format_typed(text: str, unit: str, exponent: int, *, bare_factor: float = 1.0) -> str:
    """The reading ``text`` as typed, under the row's prefix ``10**exponent``: its digits kept,
    a leading ``+`` dropped (``"2.9"`` on an ohms row is ``"2.9 Ω"``, never ``"2.900 Ω"``); a
    bare number is in the unit of ``bare_factor``."""
    number, power = typed_decimal(text, unit, bare_factor=bare_factor)
    shown = number.scaleb(power - exponent)
    return f"{_plain_decimal(shown)} {unit_text(unit, exponent)}".rstrip()


def _decimal_of(q: Fraction, places: int) -> Decimal:
    d = (
        Decimal(q.numerator) / Decimal(q.denominator)
        if q.denominator != 1
        else Decimal(q.numerator)
    )
    return d.quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_EVEN)


def _terminating_places(q: Fraction) -> int | None:
    """The decimal places of ``q`` when its decimal expansion ends within 20 places."""
    den = q.denominator
    twos = fives = 0
    while den % 2 == 0:
        den //= 2
        twos += 1
    while den % 5 == 0:
        den //= 5
        fives += 1
    places = max(twos, fives)
    return places if den == 1 and places <= 20 else None


def format_limit(
    limit,
    unit: str,
    exponent: int,
    *,
    reading: Fraction | None = None,
    side: str = "low",
    places: int = 0,
    digits: int = 5,
) -> str:
    """A limit in base units, exact (a :class:`~fractions.Fraction`, or ``±inf``), under the
    row's prefix, with enough digits for the printed comparison to tell the truth.

    The limit is shown exactly, with its own digits, when its decimal ends within
    ``places + 4`` places (``places``: the decimals the reading is shown with); otherwise to
    ``digits`` significant digits and at least ``places`` places. Then, with a ``reading``, digits
    are added until the reading shown compared with the limit shown (``reading >= limit`` for a
    lower limit, ``reading <= limit`` for an upper, limits included) gives the same answer as the
    exact comparison.
    """
    if isinstance(limit, float):
        if math.isinf(limit):
            return "∞" if limit > 0 else "-∞"
        limit = Fraction(limit)
    q = _scaled(limit, exponent)
    exact = _terminating_places(q)
    if q == 0:
        wanted = places
    else:
        magnitude = Decimal(q.numerator) / Decimal(q.denominator)
        wanted = max(places, digits - 1 - magnitude.adjusted())
    if exact is not None and exact <= max(places, 0) + 4:
        wanted = exact  # an exact limit is shown exactly, with its own digits
    wanted = max(wanted, 0)
    truth = None
    r = None
    if reading is not None:
        r = _scaled(reading, exponent)
        truth = r >= q if side == "low" else r <= q
    while True:
        shown = _decimal_of(q, wanted)
        if (
            truth is None
            or (r >= Fraction(shown) if side == "low" else r <= Fraction(shown)) == truth
        ):
            break
        wanted += 1
    return f"{_plain_decimal(shown)} {unit_text(unit, exponent)}".rstrip()
