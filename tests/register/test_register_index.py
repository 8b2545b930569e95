"""Rebuilding the register from run folders, listing runs from it, standards kept in it, and
what comes due."""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import pytest
import sqlalchemy as sa

from verirun.cli import main
from verirun.errors import ProcedureError
from verirun.record.journal import dumps
from verirun.register.schema import records, runs

DATA = Path(__file__).resolve().parent.parent / "data" / "register"
KEYS = (
    "run",
    "item",
    "procedure",
    "revision",
    "date",
    "verdict",
    "status",
    "uid",
    "record_revision",
    "certificate",
    "customer",
    "simulated",
    "as_found_run",
    "as_left_run",
)


def _runs_json(capsys, *argv) -> list[dict]:
    capsys.readouterr()
    assert main(["runs", *argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


class TestRebuild:
    def test_rebuild_indexes_folders_and_reports_the_one_that_does_not_verify(
        self, tmp_path, closed_run, capsys, monkeypatch
    ):
        """Runs made with no register are indexed; an edited record is named and left out; a
        second rebuild stores nothing twice."""
        monkeypatch.delenv("VERIRUN_REGISTER", raising=False)
        folder = tmp_path / "runs"
        made = [closed_run(folder, serial=f"R-{n}") for n in range(3)]
        assert (
            main(
                [
                    "amend",
                    str(made[0].run_dir),
                    "--point",
                    "1",
                    "--reading",
                    "2.01",
                    "--reason",
                    "typo",
                    "--reports",
                    str(tmp_path / "reports"),
                ]
            )
            == 0
        )
        edited = made[2].run_dir / "record.json"
        edited.write_text(edited.read_text().replace('"R-2"', '"R-9"'))
        name = str(tmp_path / "register.db")
        assert main(["register", "rebuild", str(folder), "--register", name]) == 1
        out = capsys.readouterr().out
        assert f"{made[2].run_dir}: DOES NOT VERIFY" in out
        assert (
            "3 run folders read, 3 records stored, 1 do not verify" in out
        )  # R-0 twice (r1 and r2), R-1
        assert main(["register", "rebuild", str(folder), "--register", name]) == 1
        assert "0 records stored" in capsys.readouterr().out

    def test_rebuild_leaves_a_run_waiting_in_its_outbox_to_sync(
        self, register, tmp_path, closed_run, capsys, monkeypatch
    ):
        """A run closed with the register down is not indexed by its number-less record: rebuild
        says it waits, and sync numbers and stores it."""
        monkeypatch.setenv("VERIRUN_REGISTER", str(tmp_path / "gone" / "register.db"))
        closed_run(tmp_path / "runs")
        monkeypatch.undo()
        monkeypatch.setenv(
            "VERIRUN_REGISTER",
            str(register.engine.url.database)
            if register.dialect == "sqlite"
            else register.engine.url.render_as_string(False),
        )
        assert main(["register", "rebuild", str(tmp_path / "runs")]) == 0
        assert "1 wait in an outbox" in capsys.readouterr().out
        assert _runs_json(capsys) == []
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert [r["certificate"] for r in _runs_json(capsys)] == ["RTL-2026-00001"]

    def test_runs_from_the_register_are_the_runs_of_the_folder_scan(
        self, register, tmp_path, closed_run, capsys, monkeypatch
    ):
        """The same rows, filters included, whether read from the register or the folders."""
        folder = tmp_path / "runs"
        made = [
            closed_run(
                folder, serial=f"L-{n % 2}", when=dt.datetime(2026, 4, day, tzinfo=dt.timezone.utc)
            )
            for n, day in enumerate((1, 5, 9))
        ]
        closed_run(
            folder,
            serial="L-0",
            readings=("2.00", "5.00", "8.01"),
            as_left_of=made[0].run_dir,
            when=dt.datetime(2026, 4, 2, tzinfo=dt.timezone.utc),
        )
        for argv in ((), ("--item", " l-0"), ("--since", "2026-04-05"), ("--until", "2026-04-05")):
            from_register = _runs_json(capsys, *argv)
            monkeypatch.delenv("VERIRUN_REGISTER")
            scanned = _runs_json(capsys, "--runs", str(folder), *argv)
            monkeypatch.setenv(
                "VERIRUN_REGISTER",
                str(register.engine.url.database or "")
                if register.dialect == "sqlite"
                else register.engine.url.render_as_string(False),
            )
            assert [{k: r[k] for k in KEYS} for r in from_register] == [
                {k: r[k] for k in KEYS} for r in scanned
            ]
            assert from_register  # every filter above matches something
        assert [r["date"] for r in _runs_json(capsys, "--until", "2026-04-05")] == [
            "2026-04-01",
            "2026-04-02",
            "2026-04-05",
        ]
        first, left = _runs_json(capsys, "--item", "L-0")[:2]
        assert (first["as_left_run"], left["as_found_run"]) == (left["run"], first["run"])


class TestStandards:
    def test_a_calibrator_named_by_asset_takes_its_certificate_and_accuracy_from_the_register(
        self, register, tmp_path, closed_run
    ):
        """The run's record shows the register's certificate and due date; its uncertainty is
        that of the register's accuracy line, the same as with the full bench file."""
        assert (
            main(
                [
                    "register",
                    "standard",
                    "--from-bench",
                    str(DATA / "bench.yaml"),
                    "--certificate",
                    "RT-CC-0002",
                    "--due",
                    "2098-06-30",
                ]
            )
            == 0
        )
        by_asset = closed_run(tmp_path / "runs", bench="bench-by-asset.yaml")
        full = closed_run(tmp_path / "runs", bench="bench.yaml")
        calibrator = by_asset.record.bench.calibrator
        assert (calibrator.certificate, calibrator.calibration_due) == ("RT-CC-0002", "2098-06-30")
        assert [p.U for p in by_asset.record.points] == [p.U for p in full.record.points]
        assert "# from the lab register" in by_asset.record.bench.text
        assert main(["verify", str(by_asset.run_dir)]) == 0

    def test_an_overdue_standard_in_the_register_blocks_the_run(
        self, register, tmp_path, closed_run
    ):
        """A later revision with a past due date is the one used, and the run does not start."""
        assert main(["register", "standard", "--from-bench", str(DATA / "bench.yaml")]) == 0
        assert (
            main(
                [
                    "register",
                    "standard",
                    "--from-bench",
                    str(DATA / "bench.yaml"),
                    "--due",
                    "2020-01-31",
                ]
            )
            == 0
        )
        with pytest.raises(ProcedureError, match="due for calibration on 2020-01-31"):
            closed_run(tmp_path / "runs", bench="bench-by-asset.yaml")
        assert not (tmp_path / "runs").exists() or not any((tmp_path / "runs").iterdir())

    def test_without_a_register_the_bench_file_is_refused_with_its_line(
        self, tmp_path, monkeypatch
    ):
        """No register named: the missing certificate is reported as file:line, not a traceback."""
        from verirun.register.standards import load_bench

        monkeypatch.delenv("VERIRUN_REGISTER", raising=False)
        with pytest.raises(
            ProcedureError, match=r"bench-by-asset.yaml:\d+: calibrator.certificate: missing"
        ):
            load_bench(DATA / "bench-by-asset.yaml")

    def test_a_standard_the_register_does_not_hold_is_named(self, register):
        """An asset the register has never seen is reported with how to enter it."""
        from verirun.register.standards import load_bench

        with pytest.raises(ProcedureError, match="holds no standard 'RT-STD-001'"):
            load_bench(DATA / "bench-by-asset.yaml")


class TestDue:
    def test_due_lists_standards_and_items_within_the_span(
        self, register, tmp_path, closed_run, capsys
    ):
        """An item calibrated 2026-03-01 every 365 days is due 2027-03-01; a standard due in 10
        days is listed within 30 days, one due in a year is not; dry runs do not count."""
        today = dt.date.today()
        assert (
            main(
                [
                    "register",
                    "standard",
                    "--from-bench",
                    str(DATA / "bench.yaml"),
                    "--due",
                    (today + dt.timedelta(days=10)).isoformat(),
                ]
            )
            == 0
        )
        closed_run(
            tmp_path / "runs",
            serial="D-1",
            when=dt.datetime.combine(
                today - dt.timedelta(days=350), dt.time(9), tzinfo=dt.timezone.utc
            ),
        )
        closed_run(tmp_path / "runs", serial="D-1", simulated=True)  # a dry run today
        closed_run(tmp_path / "runs", serial="D-2")
        assert main(["register", "item", "D-1", "--model", "PV-3", "--interval", "365d"]) == 0
        assert main(["register", "item", "D-2", "--model", "PV-3", "--interval", "1y"]) == 0
        capsys.readouterr()
        assert main(["due", "--within", "30d", "--json"]) == 0
        rows = json.loads(capsys.readouterr().out)
        assert [(r["kind"], r["id"], r["days"]) for r in rows] == [
            ("standard", "RT-STD-001", 10),
            ("item", "D-1", 15),
        ]
        assert main(["due", "--within", "2w", "--json"]) == 0
        assert [r["id"] for r in json.loads(capsys.readouterr().out)] == ["RT-STD-001"]
        assert main(["due", "--within", "soon"]) == 1


class TestStoredRunsOfEarlierFormats:
    def test_rebuild_takes_every_stored_run_with_the_summary_counts_of_its_record(
        self, register, tmp_path
    ):
        """The stored runs kept for format tests (written by earlier versions of verirun) all
        verify and are stored; each row's counts are the four verdicts, skipped and not measured
        as the record that version wrote says them (its ``summary``), conditional ones included."""
        import shutil

        from verirun.register.rebuild import rebuild

        stored = DATA.parent / "stored-runs"
        root = tmp_path / "stored"
        for folder in sorted(p for p in stored.iterdir() if p.is_dir()):
            shutil.copytree(folder, root / folder.name)
        out = rebuild(register, root)
        assert out.failed == {}
        names = sorted(p.name for p in root.iterdir())
        with register.reading() as connection:
            rows = {
                row["folder"]: row
                for row in connection.execute(sa.select(runs).order_by(runs.c.documents)).mappings()
            }  # the latest closing of each
        assert sorted(rows) == names
        for name, row in rows.items():
            summary = json.loads((root / name / "record.json").read_text())["summary"]
            assert (
                row["passed"],
                row["conditional_pass"],
                row["conditional_fail"],
                row["failed"],
                row["skipped"],
                row["not_measured"],
                row["overall"],
            ) == (
                summary["pass"],
                summary.get("conditional-pass", 0),
                summary.get("conditional-fail", 0),
                summary["fail"],
                summary["skipped"],
                summary["not-measured"],
                summary["overall"],
            ), name
        assert rows["format1-non-binary"]["conditional_pass"] == 3  # its record.json, as stored
        # Every record is stored whole as its file holds it (an amended run's earlier revision as
        # record.rN.json): the typed record gives back, in canonical form, the very values and
        # number types of the file.
        with register.reading() as connection:
            stored_bodies = connection.execute(
                sa.select(runs.c.folder, runs.c.revision, records.c.body).join(
                    records, records.c.run_id == runs.c.id
                )
            ).all()
        files = 0
        for name, revision, body in stored_bodies:
            current = json.loads((root / name / "record.json").read_text())
            path = (
                root
                / name
                / (
                    "record.json"
                    if current["run"]["revision"] == revision
                    else f"record.r{revision}.json"
                )
            )
            assert body == dumps(json.loads(path.read_text())), (name, revision)
            files += 1
        assert files == len(list(root.glob("*/record*.json")))
