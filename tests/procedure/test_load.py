"""Loading procedures: every problem reported as file:line: field: message, never a traceback."""

from __future__ import annotations

from pathlib import Path

import pytest

from verirun.cli import main
from verirun.errors import ProcedureError
from verirun.metrology import scales, tolerance
from verirun.procedure.load import load_procedure, load_procedure_text

DATA = Path(__file__).resolve().parents[1] / "data"

GOOD = (DATA / "valid-procedure.yaml").read_text(encoding="utf-8")


def write(tmp_path, text, name="proc.yaml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


class TestLoadProcedure:
    def test_good_file_resolves_to_si_floats(self, tmp_path):
        """Quantities with and without units become SI floats and the scale laws are built."""
        proc = load_procedure(write(tmp_path, GOOD))
        dcv, ohm, acv = proc.ranges
        assert dcv.points == ((2.0, None), (10.0, None))
        assert dcv.law == scales.Linear(high=10.0)
        assert ohm.law == scales.SeriesOhms(centre=10.0)
        assert ohm.arc == 90.0
        assert acv.points == ((5.0, 50.0), (5.0, 10000.0))
        assert acv.band_at(50.0).statement == tolerance.ValueStatement(reading=1.0)
        assert acv.band_at(10000.0).statement == tolerance.ValueStatement(reading=2.0)

    def test_hash_is_of_the_text_as_run(self, tmp_path):
        """The procedure hash is the SHA-256 of its exact text (checked with hashlib directly)."""
        import hashlib

        proc = load_procedure(write(tmp_path, GOOD))
        assert proc.sha256 == hashlib.sha256(GOOD.encode()).hexdigest()

    @pytest.mark.parametrize(
        "old, new, line, field, words",
        [
            (
                "full-scale: 10 V\n",
                "full-scale: 10 A\n",
                7,
                "ranges[1].full-scale",
                "expected volts",
            ),
            (
                "    points: [2 V, 10]",
                "    points: [2 V, 10, 12 V]",
                11,
                "ranges[1].points[3]",
                "beyond the full-scale",
            ),
            ("centre: 10 ohm", "centre: -10 ohm", 15, "ranges[2].centre", "positive"),
            (
                "accuracy: {degrees: 3}",
                "accuracy: {degrees: 3, percent-of-reading: 1}",
                17,
                "ranges[2].accuracy",
                "cannot be combined",
            ),
            (
                "accuracy: {percent-of-full-scale: 2}",
                "accuracy: {percent-of-fullscale: 2}",
                9,
                "ranges[1].accuracy.percent-of-fullscale",
                "unknown key",
            ),
            ("function: dc-voltage", "function: dc-volts", 6, "ranges[1].function", "dc-voltage"),
            (
                "frequency: 10 kHz}]",
                "frequency: 30 kHz}]",
                27,
                "ranges[3].points[2]",
                "no accuracy band",
            ),
            ("    arc: 90\n", "    arc: 400\n", 16, "ranges[2].arc", "full turn"),
            ("  - id: ohm\n", "  - id: dcv-10\n", 12, "ranges[2].id", "duplicate range id"),
            (
                "    scale: series-ohms\n",
                "",
                12,
                "ranges[2].scale",
                "required for a resistance range: write scale: series-ohms",
            ),
            (
                "    scale: series-ohms\n",
                "    scale: linear\n",
                15,
                "ranges[2].centre",
                "linear scale has no centre",
            ),
            (
                "    full-scale: 10 V\n    arc: 90 deg\n",
                "    arc: 90 deg\n",
                5,
                "ranges[1].full-scale",
                "required for a linear scale: write full-scale:",
            ),
            (
                "    centre: 10 ohm\n",
                "",
                12,
                "ranges[2].centre",
                "required for a series-ohms scale: write centre:",
            ),
            (
                "    resolution: 0.5 deg\n",
                "",
                12,
                "ranges[2].resolution",
                "required, but missing: the step the meter is read to",
            ),
            (
                "accuracy: {degrees: 3}",
                "accuracy: {degrees: 3 V}",
                17,
                "ranges[2].accuracy.degrees",
                "in degrees of arc (3 or 3 deg)",
            ),
            (
                "accuracy: {percent-of-full-scale: 2}",
                "accuracy: {percent-of-full-scale: 2 deg}",
                9,
                "ranges[1].accuracy.percent-of-full-scale",
                "in percent (2 or 2 %)",
            ),
        ],
    )
    def test_each_problem_names_file_line_and_field(self, tmp_path, old, new, line, field, words):
        """A mistake is reported as file:line: field: message with the line where it is written."""
        assert old in GOOD
        path = write(tmp_path, GOOD.replace(old, new, 1))
        with pytest.raises(ProcedureError) as info:
            load_procedure(path)
        problems = info.value.problems
        assert any(p.startswith(f"{path}:{line}: {field}: ") and words in p for p in problems), (
            problems
        )

    def test_every_problem_reported_at_once(self, tmp_path):
        """Several mistakes in one file are all reported, not just the first."""
        text = GOOD.replace("full-scale: 10 V\n", "full-scale: ten\n", 1).replace(
            "centre: 10 ohm", "centre: x"
        )
        with pytest.raises(ProcedureError) as info:
            load_procedure(write(tmp_path, text))
        assert len(info.value.problems) >= 2

    def test_yaml_syntax_error_has_a_line(self, tmp_path):
        """A YAML syntax error is reported with its line, not a parser traceback."""
        path = write(tmp_path, GOOD.replace("points: [10 ohm]", "points: [10 ohm"))
        with pytest.raises(ProcedureError, match=rf"^{path}:\d+: not valid YAML"):
            load_procedure(path)

    def test_duplicate_key_is_refused(self, tmp_path):
        """A key given twice is an error (plain YAML would silently keep the last)."""
        path = write(tmp_path, GOOD.replace("arc: 90 deg\n", "arc: 90 deg\n    arc: 100 deg\n", 1))
        with pytest.raises(ProcedureError, match=rf"{path}:9: ranges\[1\]\.arc: duplicate key"):
            load_procedure(path)

    def test_newer_format_is_refused(self, tmp_path):
        """A file of a newer format than this verirun reads is refused with a clear message."""
        path = write(tmp_path, GOOD.replace("format: 1", "format: 7"))
        with pytest.raises(ProcedureError, match=rf"{path}:1: format: .*newer"):
            load_procedure(path)

    def test_missing_file(self, tmp_path):
        """A missing file is named in the error."""
        with pytest.raises(ProcedureError, match="no such file"):
            load_procedure(tmp_path / "nope.yaml")

    def test_loads_from_text_as_stored(self):
        """The text stored in a run record loads to the same procedure as the file."""
        proc = load_procedure_text(GOOD, "stored")
        assert [r.id for r in proc.ranges] == ["dcv-10", "ohm", "acv"]


class TestCheckCommand:
    def test_malformed_procedure_exits_1_with_file_line(self, tmp_path, capsys):
        """`verirun check` on a malformed procedure prints file:line errors and exits 1."""
        path = write(tmp_path, GOOD.replace("centre: 10 ohm", "centre: 10 V"))
        assert main(["check", str(path)]) == 1
        out = capsys.readouterr().out
        assert f"{path}:15: ranges[2].centre: " in out
        assert "Traceback" not in out

    def test_good_procedure_exits_0(self, tmp_path, capsys, demo_procedure_path):
        """`verirun check` on a good procedure says ok and exits 0."""
        assert main(["check", str(demo_procedure_path)]) == 0
        assert "ok" in capsys.readouterr().out

    def test_not_a_mapping(self, tmp_path, capsys):
        """A file that is not a mapping of keys is refused with its name and line."""
        path = write(tmp_path, "- just\n- a list\n")
        assert main(["check", str(path)]) == 1
        assert f"{path}:1:" in capsys.readouterr().out


class TestMessagesNameWhatToWrite:
    def test_accuracy_terms_may_carry_their_units(self, tmp_path):
        """`degrees: 3 deg` and `percent-of-full-scale: 2 %` mean the same as the bare numbers
        (the README: quantities carry units)."""
        text = GOOD.replace("{degrees: 3}", "{degrees: 3 deg}").replace(
            "{percent-of-full-scale: 2}", "{percent-of-full-scale: 2 %}"
        )
        with_units = load_procedure(write(tmp_path, text))
        bare = load_procedure(write(tmp_path, GOOD, "bare.yaml"))
        assert [r.bands for r in with_units.ranges] == [r.bands for r in bare.ranges]

    def test_voltage_range_without_scale_is_linear(self, tmp_path):
        """A voltage or current range that does not say its scale is linear (as documented)."""
        proc = load_procedure(write(tmp_path, GOOD))
        assert proc.ranges[0].law == scales.Linear(high=10.0)

    def test_structure_and_range_problems_in_one_pass(self, tmp_path):
        """An unknown key in one range and a wrong unit in another are both reported at once."""
        text = GOOD.replace("    arc: 90 deg\n", "    arcs: 90 deg\n", 1).replace(
            "centre: 10 ohm", "centre: 10 V"
        )
        with pytest.raises(ProcedureError) as info:
            load_procedure(write(tmp_path, text))
        problems = info.value.problems
        assert any("ranges[1].arcs: unknown key" in p for p in problems), problems
        assert any("ranges[2].centre: '10 V' is in volts, expected ohms" in p for p in problems), (
            problems
        )
