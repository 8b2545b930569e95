"""One rounding of U and one formatter: what is printed agrees everywhere and with the verdict."""

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import pytest

from verirun.cli import main
from verirun.console import QuietConsole, verdict_text
from verirun.evaluation import Site, evaluate, shown
from verirun.metrology import decision, scales, tolerance, uncertainty
from verirun.metrology.uncertainty import round_uncertainty
from verirun.readings import Entry
from verirun.units import format_limit, format_typed


class TestRoundUncertainty:
    @pytest.mark.parametrize(
        ("u", "text"),
        [
            (0.995, "1.0"),
            (9.95, "10"),
            (99.5, "100"),
            (0.01049, "0.010"),
            (0.0125, "0.012"),
            (0.2887, "0.29"),
            (1234.0, "1200"),
        ],
    )
    def test_two_significant_digits_in_decimal(self, u, text):
        """GUM 7.2.6: two significant digits, rounded in decimal as written (ties to even),
        significant trailing zeros kept; a carry keeps two digits and no exponent form."""
        assert f"{round_uncertainty(u):f}" == text

    @pytest.mark.parametrize(
        ("u_applied", "printed", "number"),
        [
            ("0.4975", "U (k = 2) = 1.0 V", 1.0),
            ("4.975", "U (k = 2) = 10 V", 10.0),
            ("0.005245", "U (k = 2) = 0.010 V", 0.010),
        ],
    )
    def test_window_command_uses_the_same_rounding(self, capsys, u_applied, printed, number):
        """``verirun window`` prints U as the one rounding gives it (GUM 7.2.6), in words and in
        JSON: 2 × 0.4975 = 0.995 is 1.0, not the binary %.2g's 0.99."""
        args = [
            "window",
            "--full-scale",
            "100V",
            "--percent-fs",
            "5",
            "--at",
            "50",
            "--u-applied",
            u_applied,
        ]
        assert main(args) == 0
        assert printed in capsys.readouterr().out
        assert main([*args, "--json"]) == 0
        out = json.loads(capsys.readouterr().out)
        assert out["U"] == number and out["text"]["U_spec"] == printed.split(" = ")[-1]

    def test_acceptance_is_worked_from_the_printed_u(self, capsys):
        """Guarded, w = U (ILAC-G8:09/2019 4.2.2): with U printed as 1.0 V the acceptance
        limits are 45 + 1.0 and 55 - 1.0, exactly."""
        assert (
            main(
                [
                    "window",
                    "--full-scale",
                    "100V",
                    "--percent-fs",
                    "5",
                    "--at",
                    "50",
                    "--u-applied",
                    "0.4975",
                    "--rule",
                    "guarded",
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        assert (out["accept_low"], out["accept_high"]) == (46.0, 54.0)
        assert (out["text"]["accept_low"], out["text"]["accept_high"]) == ("46 V", "54 V")


def _site(statement, nominal, law, unit, *, ctx=None, u=0.0, domain="value", rule="simple"):
    ctx = ctx or tolerance.RangeContext(law=law)
    win = tolerance.window(statement, nominal, ctx)
    terms = (
        [uncertainty.Term(name="u", standard_uncertainty=u, domain=domain, distribution="normal")]
        if u
        else []
    )
    bud = uncertainty.budget(terms=terms, nominal=nominal, law=law, domain=win.domain)
    return Site(window=win, law=law, unit=unit, budget=bud, rule=decision.rule_from_name(rule))


class TestPrintedRow:
    def test_reading_keeps_the_digits_typed(self):
        """A reading is shown with the digits the operator typed: 2.9 is not "2.900 Ω"
        (common practice, no source)."""
        assert format_typed("2.9", "Ω", 0) == "2.9 Ω"
        assert format_typed("2.900", "Ω", 0) == "2.900 Ω"
        assert format_typed("+4.7 kΩ", "Ω", 3) == "4.7 kΩ"

    def test_dmm_reading_just_below_a_lower_limit(self):
        """19 V ± (0.05 % of reading + 2 counts of 1 mV): TL = 19 - 0.0095 - 0.002 = 18.9885 V
        (by hand); a reading of 18.988 V fails and its lower limit is printed as 18.9885 V, not
        18.988 V."""
        law = scales.Linear(high=20.0)
        site = _site(
            tolerance.ValueStatement(reading=0.05, counts=2),
            19.0,
            law,
            "V",
            ctx=tolerance.RangeContext(law=law, count=0.001),
        )
        result = evaluate(site, 18.988)
        texts = shown(site, result, "18.988")
        assert result.verdict == "fail"
        assert texts["low"] == "18.9885 V" and texts["reading"] == "18.988 V"

    def test_limit_that_does_not_end_gets_the_digits_it_needs(self):
        """A limit that is no short decimal gets digits until the printed comparison with the
        printed reading tells the truth: an upper limit of 2/3 against 0.6667 prints 0.66667 (5
        significant digits); against 0.66667, which lies above 2/3 and would equal the limit
        rounded to 5 places, it prints 0.666667 (by hand)."""
        two_thirds = Fraction(2, 3)
        assert (
            format_limit(two_thirds, "V", 0, reading=Fraction("0.6667"), side="high", places=4)
            == "0.66667 V"
        )
        assert (
            format_limit(two_thirds, "V", 0, reading=Fraction("0.66667"), side="high", places=5)
            == "0.666667 V"
        )

    def test_ohms_reading_above_its_upper_limit(self):
        """Series ohms, Rc = 1 MΩ, 1° of a 90° arc at 2.7 MΩ (f = Rc / (Rc + Rx)): the upper
        limit is 1 × (1 - f) / f at f = 1/3.7 - 1/90, 2.8336... MΩ, not a short decimal; a
        reading printed 2.8337 MΩ fails and its limit is printed below it."""
        law = scales.SeriesOhms(centre=1e6)
        site = _site(
            tolerance.DegreesOfArc(degrees=1.0),
            2.7e6,
            law,
            "Ω",
            ctx=tolerance.RangeContext(law=law, arc=90.0),
            domain="deflection",
        )
        f = Fraction(10, 37) - Fraction(1, 90)
        upper = Fraction(10**6) * (1 - f) / f
        typed = "2.8337 MΩ"
        result = evaluate(site, 2.8337e6)
        texts = shown(site, result, typed)
        assert result.verdict == ("fail" if Fraction("2.8337e6") > upper else "pass")
        assert texts["reading"] == "2.8337 MΩ"
        printed = Fraction(texts["high"].split()[0]) * 10**6
        assert (Fraction("2.8337e6") <= printed) == (result.verdict == "pass")

    def test_zero_error_is_not_signed_and_one_prefix_per_row(self):
        """An error of zero is printed unsigned ("0.000 V", never "+0 mV"); the reading, its
        limits, its error and U share one prefix (common practice, no source)."""
        law = scales.Linear(high=20.0)
        site = _site(tolerance.PercentOfFullScale(percent=1.0), 10.0, law, "V", u=0.0145)
        texts = shown(site, evaluate(site, 10.0), "10.000")
        assert texts["error"] == "0.000 V"
        units = {texts[k].split()[-1] for k in ("reading", "low", "high", "error", "U_spec")}
        assert units == {"V"}
        texts = shown(site, evaluate(site, 9.8), "9800 mV")
        assert {texts[k].split()[-1] for k in ("reading", "low", "high", "error", "U_spec")} == {
            "mV"
        }
        assert texts["low"] == "9800 mV" and texts["U_spec"] == "29 mV"


class TestConsoleLines:
    @pytest.mark.parametrize("verdict", ["conditional-pass", "conditional-fail"])
    def test_conditional_results_are_never_empty_and_stand_apart(self, verdict):
        """The console names a conditional statement (ILAC-G8:09/2019 4.2.3) in a colour of
        its own, never an empty verdict."""
        law = scales.Linear(high=20.0)
        site = _site(
            tolerance.PercentOfFullScale(percent=1.0), 10.0, law, "V", u=0.05, rule="non-binary"
        )
        reading = "10.15" if verdict == "conditional-pass" else "10.25"
        result = evaluate(site, float(reading))
        assert result.verdict == verdict

        class Point:  # what the console line needs of a test point
            index, total, unit, rule = 0, 1, "V", site.rule
            window, budget = site.window, site.budget
            range = type("R", (), {"id": "dcv-20", "law": law, "full_scale": 20.0, "unit": "V"})()

            @staticmethod
            def stimulus_text():
                return "10 V DC"

        console = QuietConsole(keep=True)
        console.result(Point, Entry(kind="reading", typed=reading, value=float(reading)))
        (line,) = console.lines
        assert line.endswith(verdict.replace("-", " ").upper())
        assert "acceptance 10.1 V to 10.1 V" not in line and "fail beyond" in line
        markup = str(verdict_text(verdict).style)
        assert "green" not in markup and "red" not in markup


class TestReadingsAsWritten:
    @pytest.mark.parametrize(
        ("typed", "words"),
        [
            ("1.00000000000000000001", "significant digits"),  # more than a float carries exactly
            ("1e-400", "too small"),
        ],
    )
    def test_a_reading_the_decision_cannot_hold_exactly_is_refused(self, typed, words):
        """A reading with more digits than a double holds (IEEE 754 DBL_DIG = 15, from memory)
        would be decided on other digits than those printed: it is refused with the reason."""
        from verirun.errors import UnitError
        from verirun.procedure.load import load_procedure_text
        from verirun.procedure.plan import plan
        from verirun.readings import parse_entry

        text = (Path(__file__).resolve().parents[1] / "data" / "matrix-procedure.yaml").read_text()
        point = plan(load_procedure_text(text, "m.yaml"))[0]
        with pytest.raises(UnitError, match=words):
            parse_entry(typed, point)
        assert parse_entry("2.00000000000000", point).value == 2.0  # 15 digits are fine


def test_a_bare_number_is_shown_in_the_prompts_unit():
    """On a 50 mA range a bare 14.75 is read in mA, as the prompt says, and shown as
    "14.75 mA" with its limits under the same prefix (common practice, no source)."""
    from verirun.procedure.load import load_procedure_text
    from verirun.procedure.plan import plan
    from verirun.readings import parse_entry

    text = (Path(__file__).resolve().parents[1] / "data" / "matrix-procedure.yaml").read_text()
    text = text.replace(
        "ranges:\n",
        "ranges:\n  - id: dca-50m\n    function: dc-current\n    full-scale: 50 mA\n"
        "    accuracy: {percent-of-full-scale: 2}\n    resolution: 0.25 mA\n    points: [15 mA]\n",
        1,
    )
    point = plan(load_procedure_text(text, "m.yaml"))[0]
    entry = parse_entry("14.75", point)
    texts = shown(point, evaluate(point, entry.value), entry.typed)
    assert (texts["reading"], texts["low"], texts["high"]) == ("14.75 mA", "14 mA", "16 mA")
