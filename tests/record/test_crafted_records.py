"""Crafted journals and records are reported (file:line where it applies), never a crash; one
bad folder does not stop `verirun runs`; a record's dates never run backwards; the standard's
due date is checked at every point."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from runkit import (
    BENCH,
    READINGS,
    cli,
    documents,
    only_run,
    readings_file,
    rechained,
    record,
    run_args,
)

from verirun.clock import VirtualClock
from verirun.conduct import resume
from verirun.console import QuietConsole
from verirun.errors import BenchError
from verirun.readings import ScriptedReadings
from verirun.record.journal import never_started_text
from verirun.record.verify import problems


def journal_line(run_dir, number: int) -> str:
    return (run_dir / "journal.jsonl").read_text(encoding="utf-8").splitlines()[number - 1]


def replace_line(run_dir, number: int, text: str) -> None:
    path = run_dir / "journal.jsonl"
    lines = path.read_text(encoding="utf-8").splitlines()
    lines[number - 1] = text
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


# Each crafted second line (the first observation) and what the report must say about it.
CRAFTED = {
    "NaN reading": (
        lambda line: line.replace('"reading":2.05', '"reading":NaN'),
        "NaN is not a number",
    ),
    "text for a number": (
        lambda line: line.replace('"reading":2.05', '"reading":"2.05"'),
        "field reading: Input should be a valid number",
    ),
    "missing key": (
        lambda line: line.replace(',"typed":"2.05"', ""),
        "field typed: Field required",
    ),
    "duplicate key": (
        lambda line: line.replace('"reading":2.05', '"reading":2.05,"reading":2.5'),
        "appears twice",
    ),
    "deep nesting": (
        lambda line: line.replace('"typed":"2.05"', '"typed":' + "[" * 100000 + "]" * 100000),
        "nested too deep",
    ),
    "an array": (lambda line: "[1, 2, 3]", "not a JSON object"),
    "unknown kind": (
        lambda line: line.replace('"kind":"observation"', '"kind":"verdict"'),
        "unknown document kind",
    ),
    "a boolean seq": (
        lambda line: line.replace('"seq":', '"seq":true,"x":'),
        "field seq: Input should be a valid integer",
    ),
}


class TestCraftedJournals:
    @pytest.mark.parametrize("case", sorted(CRAFTED))
    def test_verify_and_resume_report_the_line(self, tmp_path, case, capsys):
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        number = next(i for i, d in enumerate(documents(run_dir), 1) if d["kind"] == "observation")
        craft, expected = CRAFTED[case]
        replace_line(run_dir, number, craft(journal_line(run_dir, number)))
        found = problems(run_dir)
        assert any(f"journal.jsonl:{number}:" in p and expected in p for p in found), found
        capsys.readouterr()
        assert cli("verify", run_dir) == 1
        assert cli("resume", run_dir, "--readings", READINGS) == 1
        assert expected in capsys.readouterr().err
        assert cli("certify", run_dir, "--reports", tmp_path / "again") == 1

    @pytest.mark.parametrize(
        "field, value",
        [("item", "[]"), ("operator", "7"), ("bench", '{"text": 1}'), ("procedure", "null")],
    )
    def test_a_crafted_start_is_reported(self, tmp_path, field, value, capsys):
        """A start document with a field of the wrong shape (its chain rebuilt to match)."""
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        docs = documents(run_dir)
        docs[0] = {**docs[0], field: json.loads(value)}
        (run_dir / "journal.jsonl").write_text(rechained(docs), encoding="utf-8")
        capsys.readouterr()
        assert cli("verify", run_dir) == 1
        assert "journal.jsonl:1: " in capsys.readouterr().out
        assert cli("resume", run_dir, "--readings", READINGS) == 1

    def test_a_chain_whole_journal_that_does_not_fit_together(self, tmp_path, capsys):
        """Documents each well-formed but naming a step the procedure does not have."""
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        docs = documents(run_dir)
        docs = [{**d, "index": 40} if d["kind"] == "observation" else d for d in docs]
        (run_dir / "journal.jsonl").write_text(rechained(docs), encoding="utf-8")
        (run_dir / "record.json").unlink()
        assert any("which the procedure does not have" in p for p in problems(run_dir))


class TestCraftedRecords:
    @pytest.mark.parametrize(
        "text",
        [
            '{"record_format": 2, "run": NaN}',
            '{"record_format": "2"}',
            '{"record_format": 2, "record_format": 1}',
            "[" * 50000,
            '{"record_format": true}',
            "\udcff",
        ],
    )
    def test_verify_reports_a_crafted_record(self, tmp_path, text, capsys):
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        (run_dir / "record.json").write_text(text, encoding="utf-8", errors="surrogateescape")
        capsys.readouterr()
        assert cli("verify", run_dir) == 1
        assert "record.json" in capsys.readouterr().out


class TestListingSkipsABadFolder:
    @pytest.mark.parametrize(
        "bad",
        [
            '{"record_format": 2, "run": []}',
            '{"record_format": 2, "run": {"status": "complete"}, "item": 3}',
            "nonsense",
        ],
    )
    def test_the_other_runs_are_listed_and_the_bad_one_named(self, tmp_path, bad, capsys):
        assert cli(*run_args(tmp_path, serial="GOOD-1")) == 0
        assert cli(*run_args(tmp_path, serial="GOOD-2")) == 0
        broken = tmp_path / "runs" / "20260101-000000-BAD-00000000"
        broken.mkdir()
        (broken / "record.json").write_text(bad, encoding="utf-8")
        capsys.readouterr()
        assert cli("runs", "--runs", tmp_path / "runs", "--json") == 0
        out, err = capsys.readouterr()
        assert sorted(row["item"] for row in json.loads(out)) == ["GOOD-1", "GOOD-2"]
        assert f"skipped {broken}" in err

    def test_a_folder_where_no_run_began_is_named(self, tmp_path, capsys):
        """A folder left by an earlier version with an empty journal (the run stopped before its
        start) is named as such, with what to do."""
        assert cli(*run_args(tmp_path, serial="GOOD-1")) == 0
        empty = tmp_path / "runs" / "20260101-000000-EMPTY-00000000"
        empty.mkdir()
        (empty / "journal.jsonl").write_text("")
        capsys.readouterr()
        assert cli("runs", "--runs", tmp_path / "runs") == 0
        assert never_started_text(empty) in capsys.readouterr().err  # as verify and resume say
        assert cli("resume", empty, "--readings", READINGS) == 1
        assert never_started_text(empty) in capsys.readouterr().err


class JumpingClock(VirtualClock):
    """A virtual clock set back by an hour after ``after`` readings of it."""

    def __init__(self, start, after: int):
        super().__init__(start)
        self.calls, self.after = 0, after

    def now(self):
        self.calls += 1
        if self.calls == self.after:
            self.sleep(-3600 * 5)
        return super().now()


class TestDates:
    def test_a_clock_set_back_is_journaled_and_dates_never_run_backwards(self, make_run):
        """The clock goes back five hours mid-run across midnight (2026-12-01 00:00:30 back to
        2026-11-30 19:00): every document keeps a time no earlier than the one before, the jump is
        journaled, and the issue date is not before the calibration date."""
        start = dt.datetime(2026, 12, 1, 0, 0, 20, tzinfo=dt.timezone.utc)
        finished = make_run(item="CLK-1", operator="tester", clock=JumpingClock(start, after=8))
        times = [d["time"] for d in documents(finished.run_dir)]
        assert times == sorted(times)
        jumps = [d for d in documents(finished.run_dir) if d.get("clock_went_back")]
        assert len(jumps) == 1 and jumps[0]["clock_went_back"].startswith("2026-11-30T19:")
        rec = finished.record
        assert rec.run.ended[:10] >= rec.run.started[:10] == "2026-12-01"
        # the jump is the run's internal log, not a note for the customer
        assert any("clock went back" in n.text for n in rec.run_log)
        assert not any("clock went back" in n.text for n in rec.notes)
        assert problems(finished.run_dir) == []

    def test_a_standard_falling_due_at_midnight_stops_the_run_resumable(self, tmp_path, make_run):
        """A run begun at 23:59:50 with a standard due that day stops at the first point after
        midnight (the output in standby), cannot resume on the same bench file, and resumes on
        one naming the renewed calibration; the record says so."""
        bench_path = tmp_path / "bench.yaml"
        bench_path.write_text(
            BENCH.read_text().replace("calibration-due: 2099-12-31", "calibration-due: 2026-12-01")
        )
        clock = VirtualClock(dt.datetime(2026, 12, 1, 23, 59, 50, tzinfo=dt.timezone.utc), tick=2)
        with pytest.raises(BenchError) as caught:
            make_run(bench=bench_path, item="CLK-1", operator="tester", clock=clock)
        assert "fell due for calibration on 2026-12-01" in str(caught.value)
        run_dir = caught.value.run_dir
        docs = documents(run_dir)
        assert docs[-1]["kind"] == "stop" and docs[-1]["status"] == "failed"
        measured = sum(d["kind"] == "observation" for d in docs)
        assert 0 < measured < 5
        with pytest.raises(Exception, match="overdue|due for calibration"):
            resume(
                run_dir=run_dir,
                procedure_path=None,
                bench_path=None,
                readings=ScriptedReadings(READINGS),
                console=QuietConsole(),
                reports_dir=tmp_path / "reports",
                clock=clock,
            )
        renewed = tmp_path / "renewed.yaml"
        renewed.write_text(
            bench_path.read_text()
            .replace("calibration-due: 2026-12-01", "calibration-due: 2027-12-01")
            .replace("certificate: TH-CC-2026-0117", "certificate: TH-CC-2026-0999")
        )
        finished = resume(
            run_dir=run_dir,
            procedure_path=None,
            bench_path=renewed,
            readings=ScriptedReadings(READINGS),
            console=QuietConsole(),
            reports_dir=tmp_path / "reports",
            clock=clock,
        )
        assert finished.record.run.status == "complete"
        assert any(
            "renewed" in n.text and "TH-CC-2026-0999" in n.text for n in finished.record.notes
        )
        assert problems(run_dir) == []

    def test_a_bench_changed_in_more_than_the_standard_s_calibration_is_refused(self, tmp_path):
        readings = readings_file(tmp_path, [("dcv-10", "2 V", "abort")])
        assert cli(*run_args(tmp_path, readings=readings)) == 2
        run_dir = only_run(tmp_path / "runs")
        changed = tmp_path / "changed.yaml"
        changed.write_text(BENCH.read_text().replace("output: 15 ppm", "output: 1 ppm"))
        assert cli("resume", run_dir, "--bench", changed, "--readings", READINGS) == 1
        assert record(run_dir)["run"]["status"] == "aborted"
