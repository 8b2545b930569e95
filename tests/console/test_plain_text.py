"""Control and bidirectional-control characters: refused where text comes in, never on a
certificate."""

from __future__ import annotations

import re
import unicodedata
from pathlib import Path

import pytest

from verirun.certificate.render import render_html
from verirun.cli import main
from verirun.errors import ProcedureError
from verirun.lab import load_lab
from verirun.procedure.load import load_procedure_text
from verirun.readings import ScriptedReadings
from verirun.record.documents import validate_record
from verirun.text import BIDI_CONTROLS, LAYOUT, refusal, shown

EDGE = Path(__file__).resolve().parents[1] / "data" / "edge"
PROCEDURE, BENCH, READINGS, LAB = (
    EDGE / name for name in ("dcv-small.yaml", "bench.yaml", "readings.csv", "lab.yaml")
)

#: The bidirectional embedding, override and isolate controls (Unicode UAX #9, table 1: LRE, RLE,
#: PDF, LRO, RLO, LRI, RLI, FSI, PDI).
UAX9_CONTROLS = [0x202A, 0x202B, 0x202C, 0x202D, 0x202E, 0x2066, 0x2067, 0x2068, 0x2069]
#: Characters no certificate holds: C0 controls but TAB, LF and CR, DEL, C1 controls, and the above.
FORBIDDEN = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def short_run_args(tmp_path, *extra):
    procedure = tmp_path / "p.yaml"
    procedure.write_text(PROCEDURE.read_text().split("  - id: dcv-100")[0])
    return [
        "run",
        str(procedure),
        "--bench",
        str(BENCH),
        "--readings",
        str(EDGE / "readings-dcv10.csv"),
        "--simulate",
        "--lab",
        str(LAB),
        "--runs",
        str(tmp_path / "runs"),
        "--reports",
        str(tmp_path / "reports"),
        *extra,
    ]


class TestTheRule:
    def test_bidi_controls_are_those_of_uax9(self):
        """The bidirectional controls refused are the nine of UAX #9 table 1."""
        assert sorted(map(ord, BIDI_CONTROLS)) == UAX9_CONTROLS

    def test_what_is_replaced_is_category_cc_and_the_bidi_controls(self):
        """shown() replaces exactly the characters of Unicode category Cc (but tab and line
        breaks) and the bidirectional controls, over the whole code space."""
        for code in range(0x110000):
            char = chr(code)
            expected = char not in LAYOUT and (
                unicodedata.category(char) == "Cc" or char in BIDI_CONTROLS
            )
            assert (shown(char) != char) == expected, hex(code)

    @pytest.mark.parametrize(
        "text", ["Müller & Söhne", "شركة القياس", "שם\u200e-12", "A\u061cB", "SN 12/34"]
    )
    def test_plain_text_of_any_script_passes(self, text):
        """Right-to-left names and the bidirectional marks (LRM, ALM) are plain text."""
        assert refusal(text) is None


class TestCommandLine:
    @pytest.mark.parametrize(
        "option, value, code",
        [
            ("--serial", "SN-1\u202e01", "U+202E"),
            ("--serial", "SN-1\u2067x\u2069", "U+2067, U+2069"),
            ("--customer", "ACME\x1b[31m", "U+001B"),
            ("--customer", "ACME\x07", "U+0007"),
            ("--operator", "op\nDANGER", "U+000A"),
            ("--customer-address", "Road\x85 1", "U+0085"),
        ],
    )
    def test_a_control_in_an_option_is_refused_naming_it(
        self, tmp_path, capsys, option, value, code
    ):
        """An option holding a control or bidirectional control ends with exit 1 and a message
        naming the option and the character; nothing is run."""
        args = short_run_args(tmp_path, "--serial", "SN", "--customer", "C")
        args += [option, value]
        assert main(args) == 1
        err = capsys.readouterr().err
        assert err.startswith(f"error: {option}: holds ") and code in err
        assert not (tmp_path / "runs").exists()

    def test_amend_reason(self, tmp_path, capsys):
        """The reason of an amendment is checked the same way."""
        assert (
            main(
                [
                    "amend",
                    str(tmp_path),
                    "--point",
                    "1",
                    "--reading",
                    "2",
                    "--reason",
                    "typo\x1b]0;x\x07",
                ]
            )
            == 1
        )
        assert "error: --reason: holds a control character" in capsys.readouterr().err


class TestFiles:
    @pytest.mark.parametrize(
        "title, code",
        [
            ('"Edge \\u202Etest"', "U+202E"),
            ('"Edge \\e[2J"', "U+001B"),
            ('"Edge \\a"', "U+0007"),
            ('"Edge \\x9b"', "U+009B"),
        ],
    )
    def test_a_control_in_a_procedure_is_refused_at_its_line(self, title, code):
        """An escaped control or bidi control in a procedure's text is refused at
        file:line: field."""
        text = PROCEDURE.read_text().replace(
            "title: Edge test procedure, small DC voltage meter", f"title: {title}"
        )
        with pytest.raises(ProcedureError) as err:
            load_procedure_text(text, "p.yaml")
        assert any(
            line.startswith("p.yaml:6: procedure.title: holds ") and code in line
            for line in err.value.problems
        )

    def test_a_control_in_the_lab_profile(self, tmp_path):
        """The lab profile is refused the same way."""
        lab = tmp_path / "lab.yaml"
        lab.write_text(
            LAB.read_text().replace("name: Edge Test Laboratory", 'name: "Edge\\u2066 Lab"')
        )
        with pytest.raises(
            ProcedureError, match=r"lab.yaml:4: lab.name: holds a bidirectional control"
        ):
            load_lab(lab)

    def test_a_multi_line_text_keeps_its_line_breaks(self):
        """Line breaks and tabs in a file's text are layout, not refused."""
        text = PROCEDURE.read_text().replace(
            "title: Edge test procedure, small DC voltage meter",
            'title: "Edge test\\n\\tprocedure"',
        )
        assert load_procedure_text(text, "p.yaml").file.procedure.title == "Edge test\n\tprocedure"

    def test_a_control_in_a_scripted_reading(self, tmp_path):
        """A readings file row holding a control is refused at its line."""
        from verirun.bench.config import load_bench
        from verirun.procedure.plan import plan

        csv = tmp_path / "r.csv"
        csv.write_text("range,at,reading\ndcv-10,2 V,note \x1b[2Jhidden\n", encoding="utf-8")
        point = plan(load_procedure_text(PROCEDURE.read_text(), "p.yaml"), load_bench(BENCH))[0]
        with pytest.raises(
            ProcedureError,
            match=r"r.csv:2: reading: the line holds a control character \(U\+001B\)",
        ):
            ScriptedReadings(csv).take(point)


class TestCertificate:
    def test_controls_in_stored_data_never_reach_the_certificate(self, tmp_path, capsys):
        """A record holding ESC, BEL, C1 and bidi controls (stored before they were refused, or
        written by hand) renders a certificate without any of them; the text around is kept."""
        assert main(short_run_args(tmp_path, "--serial", "SN-7", "--customer", "ACME")) == 0
        import json

        record = json.loads(next((tmp_path / "runs").glob("*/record.json")).read_text())
        record["customer"]["name"] = "ACME\x1b[31m\x07 Ltd\u202e12\x9b"
        record["item"]["serial"] = "SN-\u2067 7\u2069"
        html = render_html(validate_record(record))
        assert FORBIDDEN.search(html) is None
        assert "ACME\ufffd[31m\ufffd Ltd\ufffd12\ufffd" in html and "SN-\ufffd 7\ufffd" in html

    def test_a_right_to_left_customer_is_shown(self, tmp_path):
        """A customer name in a right-to-left script is accepted and shown as written."""
        assert main(short_run_args(tmp_path, "--serial", "SN-8", "--customer", "شركة القياس")) == 0
        html = next((tmp_path / "reports").glob("*.html")).read_text(encoding="utf-8")
        assert "شركة القياس" in html and FORBIDDEN.search(html) is None
