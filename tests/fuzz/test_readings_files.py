"""Hostile readings files: each is checked against the plan, and every problem is `file:line`.

Whatever the bytes of a readings CSV, reading it either raises ProcedureError whose lines each
start with the file's name, or gives a reader whose check returns such lines (or none); any
other exception is a bug. Examples are derandomized so the run is the same every time.
"""

from __future__ import annotations

from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from verirun.errors import ProcedureError
from verirun.procedure.load import load_procedure
from verirun.procedure.plan import plan
from verirun.readings import ScriptedReadings

DATA = Path(__file__).resolve().parent.parent / "data"
GOOD = (DATA / "bench-meter-readings.csv").read_text(encoding="utf-8")
POINTS = plan(load_procedure(DATA / "bench-meter.yaml"))
FUZZ = settings(
    max_examples=60,
    derandomize=True,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)

#: Pieces a hostile or careless file is made of.
PIECES = st.sampled_from(
    [
        ",",
        ";",
        '"',
        "\n",
        "\r\n",
        " ",
        "\t",
        "10,4",
        "1e308",
        "nan",
        "inf",
        "-0",
        "5 V",
        "5V",
        "5 mA",
        "[bold]",
        "\u202e",
        "\x00",
        "\ufeff",
        "dcv-10",
        "ohm-x1",
        "abort",
        "undo",
        "skip",
        "note",
        "repeat",
        "1.06k",
        "µ",
        "Ω",
        "9" * 400,
    ]
)


def outcome(tmp_path, data: bytes) -> list[str]:
    path = tmp_path / "r.csv"
    path.write_bytes(data)
    try:
        return ScriptedReadings(path).check(POINTS)
    except ProcedureError as exc:
        return exc.problems


def assert_located(tmp_path, problems: list[str]) -> None:
    for line in problems:
        assert line.startswith(f"{tmp_path / 'r.csv'}"), line


class TestHostileReadingsFiles:
    @FUZZ
    @given(data=st.binary(max_size=400))
    def test_random_bytes(self, tmp_path_factory, data):
        """Random bytes: problems with the file's name, never a traceback."""
        tmp_path = tmp_path_factory.mktemp("r")
        assert_located(tmp_path, outcome(tmp_path, data))

    @FUZZ
    @given(cuts=st.lists(st.tuples(st.integers(0, len(GOOD)), PIECES), max_size=6))
    def test_mutations_of_a_good_file(self, tmp_path_factory, cuts):
        """The good file with hostile pieces inserted: problems with file and line, or none."""
        tmp_path = tmp_path_factory.mktemp("r")
        text = GOOD
        for at, piece in sorted(cuts, reverse=True):
            text = text[:at] + piece + text[at:]
        problems = outcome(tmp_path, text.encode("utf-8", "surrogatepass"))
        assert_located(tmp_path, problems)

    @FUZZ
    @given(rows=st.lists(st.lists(PIECES, min_size=0, max_size=5).map(",".join), max_size=12))
    def test_rows_of_pieces(self, tmp_path_factory, rows):
        """A header then rows made of pieces: every problem located, every line number real."""
        tmp_path = tmp_path_factory.mktemp("r")
        text = "range,at,reading\n" + "\n".join(rows) + "\n"
        problems = outcome(tmp_path, text.encode("utf-8"))
        assert_located(tmp_path, problems)
