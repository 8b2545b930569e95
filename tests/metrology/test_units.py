"""Quantities at the edges, checked against a general-purpose unit library (pint)."""

from __future__ import annotations

import math

import pint
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from verirun.errors import UnitError
from verirun.units import format_quantity, parse_quantity, parse_value

UREG = pint.UnitRegistry()
PINT_NAMES = {"V": "volt", "A": "ampere", "Ω": "ohm", "Hz": "hertz"}
PINT_PREFIXES = {
    "p": "pico",
    "n": "nano",
    "u": "micro",
    "m": "milli",
    "": "",
    "k": "kilo",
    "M": "mega",
    "G": "giga",
}


class TestParseQuantity:
    @settings(max_examples=200, deadline=None)
    @given(
        mantissa=st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False),
        prefix=st.sampled_from(sorted(PINT_PREFIXES)),
        unit=st.sampled_from(sorted(PINT_NAMES)),
    )
    def test_agrees_with_pint(self, mantissa, prefix, unit):
        """Any number with an SI prefix and unit parses to the same base-unit value as pint
        gives."""
        text = f"{mantissa!r} {prefix}{unit}"
        expected = (
            UREG.Quantity(mantissa, PINT_PREFIXES[prefix] + PINT_NAMES[unit])
            .to_base_units()
            .magnitude
        )
        value, dimension = parse_quantity(text)
        assert dimension == unit
        assert math.isclose(value, expected, rel_tol=1e-12, abs_tol=1e-300)

    def test_symbols_and_names(self):
        """Ω, the ohm sign, 'ohm' and 'ohms', and µ, μ and u are all accepted (SI Brochure
        9th ed.)."""
        assert parse_value("4.7 kΩ", "Ω") == pytest.approx(4700.0)
        assert parse_value("4.7 k\u2126", "Ω") == pytest.approx(4700.0)
        assert parse_value("1.2kohm", "Ω") == pytest.approx(1200.0)
        assert parse_value("12 ohms", "Ω") == 12.0
        for micro in ("µ", "μ", "u"):
            assert parse_value(f"5 {micro}V", "V") == pytest.approx(5e-6)

    def test_milli_and_mega_are_case_sensitive(self):
        """'m' is milli and 'M' is mega (SI Brochure 9th ed., table 7)."""
        assert parse_value("3 mohm", "Ω") == pytest.approx(3e-3)
        assert parse_value("3 Mohm", "Ω") == pytest.approx(3e6)

    def test_bare_number_takes_expected_unit(self):
        """A number without a unit is taken in the unit expected."""
        assert parse_quantity("125", "A") == (125.0, "A")

    @pytest.mark.parametrize(
        "text, reason",
        [
            ("5,2", "decimal point"),
            ("abc", "not a number"),
            ("", "empty"),
            ("5 mA", "expected volts"),
            ("1 kdeg", "unknown unit"),
            ("nan", "not a number"),
            ("1e999", "finite"),
        ],
    )
    def test_refuses_with_reason(self, text, reason):
        """Bad text is refused with the reason in plain words."""
        with pytest.raises(UnitError, match=reason):
            parse_quantity(text, "V")


class TestFormatQuantity:
    def test_engineering_prefixes(self):
        """Values are shown with the SI prefix that keeps 1 <= mantissa < 1000."""
        assert format_quantity(0.125, "A") == "125 mA"
        assert format_quantity(4700.0, "Ω") == "4.7 kΩ"
        assert format_quantity(1e-6, "V") == "1 µV"

    def test_unbounded(self):
        """An unbounded limit is shown as infinity."""
        assert format_quantity(math.inf, "Ω") == "∞"
        assert format_quantity(None, "Ω") == "∞"

    def test_no_exponent_form(self):
        """Few significant digits never turn into exponent form."""
        assert format_quantity(320.0, "Ω", 2) == "320 Ω"


class TestFunctionsTable:
    def test_the_literal_names_are_the_table(self):
        """The names a model accepts are exactly the functions of the one table."""
        from typing import get_args

        from verirun.functions import FUNCTIONS, FunctionName

        assert set(get_args(FunctionName)) == set(FUNCTIONS)

    def test_units_and_alternation(self):
        """Volt and ampere for the voltage and current functions, ohm for resistance (SI
        Brochure, 9th ed., tables 2 and 4); AC functions are the alternating ones."""
        from verirun.functions import FUNCTIONS

        assert {n: (f.unit, f.alternating) for n, f in FUNCTIONS.items()} == {
            "dc-voltage": ("V", False),
            "dc-current": ("A", False),
            "ac-voltage": ("V", True),
            "ac-current": ("A", True),
            "resistance": ("Ω", False),
        }
