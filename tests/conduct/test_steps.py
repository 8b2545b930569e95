"""A step is a step: repeated test points are each measured, journaled, kept and shown; a
point's label is its value as written; stored runs of the first record format still verify."""

from __future__ import annotations

import json
import shutil

import pytest
from bs4 import BeautifulSoup
from runkit import (
    STORED,
    cli,
    documents,
    only_run,
    procedure_with,
    readings_file,
    rechained,
    record,
    run_args,
)

from verirun.procedure.load import load_procedure
from verirun.procedure.plan import plan
from verirun.record.verify import problems

# Windows: 2 % of 10 V full scale is ±0.2 V at every dcv-10 point (IEC 60051-1 class index as a
# percentage of the fiducial value); 2 % of 50 µA is ±1 µA.
CURRENT_ROWS = [("dca-50u", "10 uA", "10 uA"), ("dca-50u", "50 uA", "49.5 uA")]


def html_of(tmp_path) -> BeautifulSoup:
    (path,) = [p for p in (tmp_path / "reports").glob("*.html")]
    return BeautifulSoup(path.read_text(encoding="utf-8"), "html.parser")


class TestRepeatedPoints:
    def test_the_same_value_written_twice_is_two_steps_and_a_fail_stays(self, tmp_path, capsys):
        """`2 V` and `2000 mV` are two steps: both readings are journaled, kept in the record and
        printed on the certificate, and the FAIL of the second (2.5 V outside 1.8..2.2 V) is the
        run's verdict."""
        procedure = procedure_with(tmp_path, "2 V, 2000 mV, 10 V")
        readings = readings_file(
            tmp_path,
            [
                ("dcv-10", "2 V", "2.05"),
                ("dcv-10", "2 V", "2.5"),
                ("dcv-10", "10 V", "10.1"),
                *CURRENT_ROWS,
            ],
        )
        assert cli(*run_args(tmp_path, procedure, readings)) == 0
        run_dir = only_run(tmp_path / "runs")
        rec = record(run_dir)
        assert [(r["index"], r["key"], r["verdict"]) for r in rec["points"][:3]] == [
            (0, "dcv-10@2V", "pass"),
            (1, "dcv-10@2000mV", "fail"),
            (2, "dcv-10@10V", "pass"),
        ]
        assert rec["summary"]["overall"] == "fail" and rec["summary"]["points"] == 5
        assert [d["index"] for d in documents(run_dir) if d["kind"] == "observation"] == [
            0,
            1,
            2,
            3,
            4,
        ]
        rows = html_of(tmp_path).select('tr[data-key^="dcv-10@"]')
        assert [row["data-step"] for row in rows] == ["1", "2", "3"]
        assert rows[1].find("td").get_text() == "2" and "2.5" in rows[1].get_text()
        assert problems(run_dir) == []

    def test_up_scale_then_down_scale_resumed_measures_every_step(self, tmp_path):
        """A procedure read up-scale then down-scale (2, 4 ... 10 ... 4, 2 V, common practice for
        analog meters, no source) aborted at step 6 and resumed measures steps 6 to 9 and closes
        with all nine; none is taken for the up-scale step of the same value."""
        procedure = procedure_with(tmp_path, "2 V, 4 V, 6 V, 8 V, 10 V, 8 V, 6 V, 4 V, 2 V")
        up = [("dcv-10", f"{v} V", f"{v}.1") for v in (2, 4, 6, 8, 10)]
        down = [("dcv-10", f"{v} V", f"{v}.05") for v in (8, 6, 4, 2)]
        first = readings_file(
            tmp_path, up + [("dcv-10", "8 V", "abort")] + CURRENT_ROWS, "first.csv"
        )
        assert cli(*run_args(tmp_path, procedure, first)) == 2
        run_dir = only_run(tmp_path / "runs")
        assert record(run_dir)["summary"]["not-measured"] == 6
        rest = readings_file(tmp_path, down + CURRENT_ROWS, "rest.csv")
        assert cli("resume", run_dir, "--readings", rest, "--reports", tmp_path / "reports") == 0
        rec = record(run_dir)
        assert rec["run"]["status"] == "complete" and rec["summary"]["not-measured"] == 0
        assert [r["typed"] for r in rec["points"][:9]] == [
            "2.1",
            "4.1",
            "6.1",
            "8.1",
            "10.1",
            "8.05",
            "6.05",
            "4.05",
            "2.05",
        ]
        assert problems(run_dir) == []

    def test_a_second_entry_for_a_step_does_not_verify(self, tmp_path):
        """An observation appended for a step that has one already (an edit: the engine
        journals one confirmed entry per step) is a verification failure, not a silent
        replacement of the earlier one."""
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        docs = documents(run_dir)
        first = next(d for d in docs if d["kind"] == "observation")
        stop = docs[-1]
        forged = rechained(docs[:-1] + [{**first, "typed": "2.5", "reading": 2.5}, stop])
        (run_dir / "journal.jsonl").write_text(forged, encoding="utf-8")
        (run_dir / "record.json").unlink()  # the forger removes what would give the edit away
        found = problems(run_dir)
        assert any("a second entry for step 1" in p for p in found)
        assert cli("verify", run_dir) == 1


class TestLabels:
    def test_labels_are_the_values_as_written(self, data_dir):
        """A 10 µA point is labelled `dca-50u@10uA`, not by the float 9.999999999999999e-06 that
        10 × 10⁻⁶ is in binary (IEEE 754 double, from memory)."""
        points = plan(load_procedure(data_dir / "steps" / "procedure.yaml"))
        assert [p.key for p in points] == [
            "dcv-10@2V",
            "dcv-10@6V",
            "dcv-10@10V",
            "dca-50u@10uA",
            "dca-50u@50uA",
        ]
        assert [p.step for p in points] == [1, 2, 3, 4, 5]

    @pytest.mark.parametrize(
        "which", ["dca-50u@10uA", "dca-50u@10 uA", "dca-50u@1e-05", "dca-50u@0.01mA", "4", "step 4"]
    )
    def test_amend_finds_a_step_as_a_technician_names_it(self, tmp_path, which, capsys):
        """The 10 µA step is found by its label as written, with a space, in plain amperes, in
        another prefix, or by its step number."""
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        assert (
            cli(
                "amend",
                run_dir,
                "--point",
                which,
                "--reading",
                "10.5 uA",
                "--reason",
                "mistyped",
                "--reports",
                tmp_path / "reports",
            )
            == 0
        )
        row = record(run_dir)["points"][3]
        assert row["typed"] == "10.5 uA" and row["correction"]["previous_typed"] == "10 uA"
        assert problems(run_dir) == []

    def test_amend_refuses_a_label_that_names_two_steps(self, tmp_path, capsys):
        """A label shared by two steps is refused, naming both step numbers to choose from."""
        procedure = procedure_with(tmp_path, "2 V, 10 V, 2 V")
        readings = readings_file(
            tmp_path,
            [
                ("dcv-10", "2 V", "2"),
                ("dcv-10", "10 V", "10"),
                ("dcv-10", "2 V", "2.1"),
                *CURRENT_ROWS,
            ],
        )
        assert cli(*run_args(tmp_path, procedure, readings)) == 0
        capsys.readouterr()
        run_dir = only_run(tmp_path / "runs")
        assert cli("amend", run_dir, "--point", "dcv-10@2V", "--reading", "2", "--reason", "x") == 1
        assert "at steps 1, 3" in capsys.readouterr().err
        assert (
            cli(
                "amend",
                run_dir,
                "--point",
                "3",
                "--reading",
                "2",
                "--reason",
                "x",
                "--reports",
                tmp_path / "reports",
            )
            == 0
        )
        assert record(run_dir)["points"][2]["typed"] == "2"


class TestStoredRunsOfTheFirstFormat:
    """Runs stored by verirun before steps were the identity (record format 1, points labelled
    by float repr) verify, certify and resume as they are; nothing needs upgrading."""

    def test_an_amended_run_verifies_and_certifies(self, tmp_path, capsys):
        run_dir = tmp_path / "format1-amended"
        shutil.copytree(STORED / "format1-amended", run_dir)
        assert problems(run_dir) == []
        assert cli("certify", run_dir, "--reports", tmp_path / "reports") == 0
        assert (
            json.loads((run_dir / "record.json").read_text())["points"][3]["key"]
            == "dca-50u@9.999999999999999e-06"
        )
        assert (
            cli(
                "amend",
                run_dir,
                "--point",
                "dca-50u@10uA",
                "--reading",
                "10.2 uA",
                "--reason",
                "x",
                "--reports",
                tmp_path / "reports",
            )
            == 0
        )
        assert problems(run_dir) == []
        assert record(run_dir)["record_format"] == 1 and record(run_dir)["run"]["revision"] == 3

    def test_an_aborted_run_resumes_in_its_own_format(self, tmp_path):
        run_dir = tmp_path / "format1-aborted"
        shutil.copytree(STORED / "format1-aborted", run_dir)
        assert problems(run_dir) == []
        readings = readings_file(tmp_path, CURRENT_ROWS)
        assert (
            cli("resume", run_dir, "--readings", readings, "--reports", tmp_path / "reports") == 0
        )
        labels = [d["point"] for d in documents(run_dir) if d["kind"] == "observation"]
        assert labels[-2:] == ["dca-50u@9.999999999999999e-06", "dca-50u@4.9999999999999996e-05"]
        assert record(run_dir)["run"]["status"] == "complete" and problems(run_dir) == []


class TestUndoOnARepeatedValue:
    def test_undo_withdraws_the_step_not_every_step_of_that_value(self, tmp_path, make_run):
        """`2 V` then `2000 mV`: undo (typed at the next range's first reading) withdraws step 2
        alone; measured again it is kept beside step 1's reading, which stays."""
        import io

        from rich.console import Console as RichConsole
        from runkit import sim_resources

        from verirun.console import Console

        typed = iter(["", "2.05", "2.5", "", "undo", "", "2.1", "", "10", "49.5"])
        console = Console(
            RichConsole(file=io.StringIO(), width=200), input_func=lambda prompt: next(typed)
        )
        finished = make_run(
            procedure=procedure_with(tmp_path, "2 V, 2000 mV"),
            readings=None,
            console=console,
            item="U-1",
            calibrator=sim_resources(tmp_path)[0],
        )
        rows = finished.record.points
        assert [(r.index, r.typed, r.verdict) for r in rows[:2]] == [
            (0, "2.05", "pass"),
            (1, "2.1", "pass"),
        ]
        assert finished.record.summary.not_measured == 0
        withdrawn = [d for d in documents(finished.run_dir) if d["kind"] == "withdrawal"]
        assert [(d["index"], d["typed"]) for d in withdrawn] == [(1, "2.5")]
        assert problems(finished.run_dir) == []
