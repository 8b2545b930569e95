"""Regenerating certificates at scale: byte-identical, one bad record never stops the batch."""

from __future__ import annotations

import json
from pathlib import Path

from stored_runs import clone_run

from verirun.certificate.batch import certify_many, find_runs
from verirun.certificate.render import TEMPLATE_VERSION
from verirun.cli import main


class TestCertifyFolder:
    def test_fifty_runs_byte_identical_and_one_corrupt_reported(
        self, demo_run_dir, tmp_path, capsys
    ):
        """A folder of 50 stored runs certifies; certifying again gives the same bytes; a
        corrupted record in the batch is reported with its reason and the other 49 are rendered."""
        folder = tmp_path / "runs"
        for n in range(50):
            clone_run(
                demo_run_dir,
                folder / f"run-{n:02d}",
                uid=f"{n:02d}" + "ab" * 15,
                serial=f"SN-{n:02d}",
            )
        assert main(["certify", str(folder), "--reports", str(tmp_path / "first")]) == 0
        assert "50 certificates rendered, 0 failed" in capsys.readouterr().out
        first = {p.name: p.read_bytes() for p in (tmp_path / "first").glob("*.html")}
        assert len(first) == 50

        (folder / "run-17" / "record.json").write_text("{ not json", encoding="utf-8")
        assert main(["certify", str(folder), "--reports", str(tmp_path / "second")]) == 1
        captured = capsys.readouterr()
        assert "49 certificates rendered, 1 failed" in captured.out
        assert "run-17" in captured.err and "not a run record" in captured.err
        second = {p.name: p.read_bytes() for p in (tmp_path / "second").glob("*.html")}
        assert len(second) == 49
        assert all(first[name] == data for name, data in second.items())

    def test_rendering_over_a_certificate_of_another_template_version_is_reported(
        self, demo_run_dir, tmp_path
    ):
        """Re-rendering over a certificate made with another template version says so, and keeps
        the earlier one beside it: an issued certificate is never overwritten."""

        reports = tmp_path / "rep"
        (outcome,) = certify_many([demo_run_dir], reports)
        path = reports / outcome.certificate.split("/")[-1]
        html = path.read_text().replace(
            f'name="verirun-template" content="{TEMPLATE_VERSION}"',
            'name="verirun-template" content="0"',
        )
        path.write_text(html)
        (again,) = certify_many([demo_run_dir], reports)
        assert again.note == (
            f"re-rendered with certificate template {TEMPLATE_VERSION} (was 0; the earlier"
            " one is kept beside it)"
        )
        assert path.with_name(f"{path.stem}.t0.html").read_text() == html
        (third,) = certify_many([demo_run_dir], reports)
        assert third.note is None  # same version, same bytes: nothing to report

    def test_a_different_certificate_of_the_same_number_and_version_is_not_overwritten(
        self, demo_run_dir, tmp_path
    ):
        """A certificate already issued under a number is never replaced by different bytes
        rendered with the same template: certify refuses and the issued file stays as it was."""
        reports = tmp_path / "rep"
        (outcome,) = certify_many([demo_run_dir], reports)
        path = Path(outcome.certificate)
        issued = path.read_bytes().replace(b"FAIL", b"PASS")  # as if issued from another record
        path.write_bytes(issued)
        (again,) = certify_many([demo_run_dir], reports)
        assert again.error and "not overwritten" in again.error
        assert path.read_bytes() == issued
        assert not list(reports.glob("*.tmp"))

    def test_pool_and_single_process_give_the_same_bytes(self, demo_run_dir, tmp_path):
        """Rendering on two processes gives the same certificates as rendering in one."""
        folder = tmp_path / "runs"
        runs = [
            clone_run(demo_run_dir, folder / f"r{n}", uid=f"{n:02d}" + "cd" * 15, serial=f"P{n}")
            for n in range(20)
        ]
        one = certify_many(runs, tmp_path / "one", workers=1)
        two = certify_many(runs, tmp_path / "two", workers=2)
        assert [o.error for o in one + two] == [None] * 40
        for a, b in zip(one, two):
            assert open(a.certificate, "rb").read() == open(b.certificate, "rb").read()

    def test_find_runs_accepts_folders_records_and_run_folders(self, demo_run_dir, tmp_path):
        """Runs can be named as a folder of runs, a run folder, or a record file."""
        assert find_runs([demo_run_dir.parent]) == [demo_run_dir]
        assert find_runs([demo_run_dir]) == [demo_run_dir]
        assert find_runs([demo_run_dir / "record.json"]) == [demo_run_dir]


class TestRunsListing:
    def test_lists_filters_and_json(self, demo_run_dir, tmp_path, capsys):
        """`verirun runs` lists each run's item, procedure, date, verdict and status, filters by
        item and date, and prints JSON on request."""
        folder = tmp_path / "runs"
        clone_run(demo_run_dir, folder / "a", uid="aa" * 16, serial="ITEM-A")
        clone_run(demo_run_dir, folder / "b", uid="bb" * 16, serial="ITEM-B")
        journal = folder / "b" / "journal.jsonl"
        lines = journal.read_text().splitlines()
        journal.write_text("\n".join(lines[:-1]) + "\n")  # drop the stop document: a crashed run
        assert main(["runs", "--runs", str(folder), "--json"]) == 0
        rows = json.loads(capsys.readouterr().out)
        assert [(r["item"], r["status"], r["verdict"], r["procedure"]) for r in rows] == [
            ("ITEM-A", "complete", "fail", "TH-VP-040"),
            ("ITEM-B", "resumable", "fail", "TH-VP-040"),
        ]
        assert main(["runs", "--runs", str(folder), "--item", "ITEM-B", "--json"]) == 0
        assert [r["item"] for r in json.loads(capsys.readouterr().out)] == ["ITEM-B"]
        assert main(["runs", "--runs", str(folder), "--since", "2999-01-01", "--json"]) == 0
        assert json.loads(capsys.readouterr().out) == []
        assert main(["runs", "--runs", str(folder)]) == 0
        table = capsys.readouterr().out
        assert "ITEM-A" in table and "resumable" in table
