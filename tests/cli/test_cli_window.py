"""`verirun window`: one window from the command line, in SI base units."""

from __future__ import annotations

import json

import pytest

from verirun.cli import main


def window_json(capsys, *args):
    assert main(["window", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


class TestWindowCommand:
    def test_series_ohms_degrees(self, capsys):
        """Rc = 10 ohm at centre, 3 degrees of a 90 degree arc -> 8.75 .. 11.4286 ohm
        (derived from f = Rc/(Rc+Rx): f = 0.5 ± 1/30)."""
        out = window_json(
            capsys,
            "--scale",
            "series-ohms",
            "--centre",
            "10",
            "--arc",
            "90",
            "--degrees",
            "3",
            "--at",
            "10",
        )
        assert out["nominal"] == 10
        assert out["low"] == pytest.approx(8.75)
        assert out["high"] == pytest.approx(10 * (1 - 14 / 30) / (14 / 30))  # 11.428571...

    def test_unbounded_upper_limit_is_null(self, capsys):
        """Once f - df <= 0 the series-ohms window is unbounded above: high is null
        (derived from f = Rc/(Rc+Rx): at 1 kohm on the trade's worked 12 ohm centre, 100 degree
        range, common practice, no source: f = 0.0119 < 0.025)."""
        out = window_json(
            capsys,
            "--scale",
            "series-ohms",
            "--centre",
            "12ohm",
            "--arc",
            "100",
            "--degrees",
            "2.5",
            "--at",
            "1kohm",
        )
        assert out["high"] is None
        assert out["low"] == pytest.approx(12 * (1 - (12 / 1012 + 0.025)) / (12 / 1012 + 0.025))

    def test_linear_percent_of_full_scale_with_units(self, capsys):
        """2 % of a 50 mA full scale at 25 mA -> 23.75 .. 26.25 mA (percent of full scale)."""
        out = window_json(capsys, "--full-scale", "50mA", "--percent-fs", "2.5", "--at", "25 mA")
        assert out["low"] == pytest.approx(0.02375) and out["high"] == pytest.approx(0.02625)
        assert out["unit"] == "A"

    def test_percent_of_reading(self, capsys):
        """1 % of reading at 5 V -> 4.95 .. 5.05 V (percent of reading)."""
        out = window_json(capsys, "--full-scale", "10", "--percent-reading", "1", "--at", "5")
        assert (out["low"], out["high"]) == (pytest.approx(4.95), pytest.approx(5.05))

    def test_percent_of_length_on_shunt_ohms(self, capsys):
        """Shunt ohms, Rc = 50 ohm, 2 % of length at 50 ohm: f = 0.5 ± 0.02 -> Rc f/(1-f)
        (derived from f = Rx/(Rx+Rc))."""
        out = window_json(
            capsys, "--scale", "shunt-ohms", "--centre", "50", "--percent-length", "2", "--at", "50"
        )
        assert out["low"] == pytest.approx(50 * 0.48 / 0.52)
        assert out["high"] == pytest.approx(50 * 0.52 / 0.48)

    def test_pointer_current_check_value(self, capsys):
        """A 1.5 V, 12 ohm centre range on a 100 degree arc has 125 mA full-scale current, so
        2.5 degrees is 3.125 mA of pointer current; the window's ends, mapped through
        Rx = E/I - Rc, are the nominal's current ± 3.125 mA (common practice, no source)."""
        out = window_json(
            capsys,
            "--scale",
            "series-ohms",
            "--centre",
            "12",
            "--arc",
            "100",
            "--degrees",
            "2.5",
            "--at",
            "12",
        )
        emf, rc = 1.5, 12.0
        i_nominal = emf / (rc + 12.0)  # 62.5 mA at centre scale
        assert out["low"] == pytest.approx(emf / (i_nominal + 0.003125) - rc)
        assert out["high"] == pytest.approx(emf / (i_nominal - 0.003125) - rc)

    @pytest.mark.parametrize(
        "args, words",
        [
            (["--scale", "series-ohms", "--degrees", "3", "--at", "10"], "--centre"),
            (["--full-scale", "10 V", "--percent-fs", "2", "--at", "5 mA"], "expected"),
            (["--full-scale", "10,5", "--percent-fs", "2", "--at", "5"], "decimal point"),
            (["--scale", "series-ohms", "--centre", "10", "--degrees", "3", "--at", "10"], "arc"),
            (["--full-scale", "10", "--percent-fs", "-2", "--at", "5"], "not negative"),
            (["--full-scale", "10", "--percent-fs", "nan", "--at", "5"], "finite"),
            (
                ["--full-scale", "10", "--percent-fs", "2", "--at", "5", "--reading", "1e400"],
                "finite",
            ),
        ],
    )
    def test_bad_input_is_one_clear_line(self, capsys, args, words):
        """A wrong or missing option gives one clear error line and exit 1, no traceback."""
        assert main(["window", *args]) == 1
        err = capsys.readouterr().err
        assert words in err and "Traceback" not in err


class TestWindowMessages:
    @pytest.mark.parametrize(
        "args, words",
        [
            (
                ["--percent-fs", "2", "--at", "5"],
                "--full-scale: required for a linear scale: give the value at the right end",
            ),
            (
                ["--scale", "series-ohms", "--degrees", "3", "--at", "10"],
                "--centre: required for a series-ohms scale: give",
            ),
        ],
    )
    def test_missing_option_names_itself_and_an_example(self, capsys, args, words):
        """A missing --full-scale or --centre is named with what to give (exit 1, no traceback)."""
        assert main(["window", *args]) == 1
        assert words in capsys.readouterr().err
