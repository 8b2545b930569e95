"""A record of an earlier record format verifies on what its journal fixes, every verdict
included."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

from runkit import simulated_run_args

from verirun.record.verify import problems

STORED = Path(__file__).resolve().parents[1] / "data" / "stored-runs" / "format1-guarded"


def _copy(tmp_path: Path) -> Path:
    run = tmp_path / "run"
    shutil.copytree(STORED, run)
    return run


def _edit(run: Path, change) -> None:
    path = run / "record.json"
    record = json.loads(path.read_text(encoding="utf-8"))
    change(record)
    path.write_text(json.dumps(record), encoding="utf-8")


class TestEarlierFormat:
    def test_stored_record_of_format_1_verifies(self, tmp_path):
        """The stored format-1 run verifies: its figures are its version's, its results the
        journal's (common practice, no source)."""
        assert problems(_copy(tmp_path)) == []

    def test_an_edited_verdict_shows(self, tmp_path):
        """Changing a verdict in a format-1 record is found, whatever version reads it."""
        run = _copy(tmp_path)
        _edit(
            run,
            lambda r: r["points"][0].update(
                verdict="fail" if r["points"][0]["verdict"] == "pass" else "pass"
            ),
        )
        (problem,) = problems(run)
        assert "differs from what its journal records" in problem and "points" in problem

    def test_an_edited_count_shows(self, tmp_path):
        """Changing a count of the summary in a format-1 record is found."""
        run = _copy(tmp_path)
        _edit(run, lambda r: r["summary"].update({"pass": r["summary"]["pass"] + 1}))
        (problem,) = problems(run)
        assert "summary" in problem


class TestCurrentFormat:
    def test_an_edited_figure_shows(self, tmp_path):
        """In a record of the current format every figure is checked: an edited U is found."""
        import csv

        from verirun.cli import main

        data = Path(__file__).resolve().parents[1] / "data"
        readings = tmp_path / "r.csv"
        with open(readings, "w", newline="") as fh:
            csv.writer(fh).writerows(
                [
                    ["range", "at", "reading"],
                    ["dcv-20", "2 V", "2"],
                    ["dcv-20", "5 V", "5"],
                    ["dcv-20", "10 V", "10"],
                    ["dcv-20", "15 V", "15"],
                    ["dcv-20", "19 V", "19"],
                    ["dcv-2", "-1.9 V", "skip not today"],
                    ["dcv-2", "-1 V", "skip not today"],
                    ["dcv-2", "190 mV", "skip not today"],
                    ["dcv-2", "1 V", "skip not today"],
                    ["dcv-2", "1.9 V", "skip not today"],
                    *[["ohm-s", f"{r} ohm", str(r)] for r in (1, 5, 10, 30, 90)],
                    *[["ohm-p", f"{r} ohm", str(r)] for r in (5, 25, 50, 100, 400)],
                ]
            )
        assert (
            main(
                simulated_run_args(
                    tmp_path,
                    data / "matrix-procedure.yaml",
                    data / "matrix-bench.yaml",
                    readings,
                    serial="F-1",
                    reports="rep",
                )
            )
            == 0
        )
        (run,) = (tmp_path / "runs").iterdir()
        assert problems(run) == []
        _edit(run, lambda r: r["points"][0].update(U_spec=r["points"][0]["U_spec"] * 2))
        (problem,) = problems(run)
        assert "points" in problem
