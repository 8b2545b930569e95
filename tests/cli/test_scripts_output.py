"""Output for scripts and narrow terminals: `verirun runs`, resume's words, nothing wrapped."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from verirun import cli

DATA = Path(__file__).resolve().parents[1] / "data"
READINGS = (DATA / "bench-meter-readings.csv").read_text(encoding="utf-8")


def scripted_run(tmp_path, readings_text, *extra, serial="Item-7", runs="runs", reports="rep1"):
    path = tmp_path / f"r{len(list(tmp_path.glob('r*.csv')))}.csv"
    path.write_text(readings_text, encoding="utf-8")
    return cli.main(
        [
            "run",
            str(DATA / "bench-meter.yaml"),
            "--bench",
            str(DATA / "bench-test.yaml"),
            "--simulate",
            "--readings",
            str(path),
            "--serial",
            serial,
            "--customer",
            "Tern Hollow Water",
            "--temperature",
            "23",
            "--humidity",
            "40",
            "--runs",
            str(tmp_path / runs),
            "--reports",
            str(tmp_path / reports),
            *extra,
        ]
    )


class TestRunsListing:
    def test_json_has_certificate_customer_bench_revision_and_links(self, tmp_path, capsys):
        """Each run lists its certificate number, customer, simulated or real, record revision,
        and an as-left run names its as-found run and the other way round."""
        assert scripted_run(tmp_path, READINGS) == 0
        (found,) = (tmp_path / "runs").iterdir()
        assert (
            scripted_run(tmp_path, READINGS, "--as-left-of", str(found), "--adjustment", "zero set")
            == 0
        )
        capsys.readouterr()
        assert cli.main(["runs", "--runs", str(tmp_path / "runs"), "--json"]) == 0
        rows = json.loads(capsys.readouterr().out)
        assert len(rows) == 2
        first, second = sorted(rows, key=lambda r: r["run"] != found.name)
        assert first["certificate"] and first["certificate"] in {
            p.stem for p in (tmp_path / "rep1").iterdir()
        }
        assert first["customer"] == "Tern Hollow Water" and first["simulated"] is True
        assert first["record_revision"] == 1
        assert first["as_left_run"] == second["run"] and second["as_found_run"] == first["run"]

    def test_item_matches_in_any_case(self, tmp_path, capsys):
        """`--item item-7` finds the runs of Item-7."""
        assert scripted_run(tmp_path, READINGS) == 0
        capsys.readouterr()
        assert (
            cli.main(["runs", "--runs", str(tmp_path / "runs"), "--item", "ITEM-7", "--json"]) == 0
        )
        assert [r["item"] for r in json.loads(capsys.readouterr().out)] == ["Item-7"]

    def test_table_without_a_terminal_never_cuts_the_run(self, tmp_path, capsys):
        """Printed to a pipe, the table holds every run folder name whole on one line."""
        assert scripted_run(tmp_path, READINGS, serial="A-VERY-LONG-SERIAL-NUMBER-0123456789") == 0
        capsys.readouterr()
        assert cli.main(["runs", "--runs", str(tmp_path / "runs")]) == 0
        out = capsys.readouterr().out
        (run,) = (tmp_path / "runs").iterdir()
        assert any(run.name in line and "simulated" in line for line in out.splitlines())

    def test_narrow_terminal_never_cuts_the_run(self, tmp_path):
        """In a 60-column pseudo-terminal the run folder name is still shown whole."""
        from runkit import Terminal

        assert scripted_run(tmp_path, READINGS, serial="A-VERY-LONG-SERIAL-NUMBER-0123456789") == 0
        (run,) = (tmp_path / "runs").iterdir()
        term = Terminal(
            [sys.executable, "-m", "verirun", "runs", "--runs", str(tmp_path / "runs")],
            cwd=tmp_path,
            columns=60,
        )
        try:
            shown = term.expect("revision 1", timeout=30)
        finally:
            term.close()
        assert run.name in shown, shown


class TestNothingWrapsForScripts:
    def test_long_paths_printed_whole(self, tmp_path):
        """`verirun run` writing to a pipe prints the run record's long path on one line."""
        deep = tmp_path / ("a-rather-long-folder-name-" * 4) / "runs"
        csv = tmp_path / "r.csv"
        csv.write_text(READINGS, encoding="utf-8")
        result = subprocess.run(
            [
                sys.executable,
                "-m",
                "verirun",
                "run",
                str(DATA / "bench-meter.yaml"),
                "--bench",
                str(DATA / "bench-test.yaml"),
                "--simulate",
                "--readings",
                str(csv),
                "--serial",
                "S",
                "--customer",
                "C",
                "--temperature",
                "23",
                "--humidity",
                "40",
                "--runs",
                str(deep),
                "--reports",
                str(tmp_path / "rep"),
            ],
            capture_output=True,
            text=True,
            timeout=120,
            stdin=subprocess.DEVNULL,
        )
        assert result.returncode == 0, result.stderr
        (run,) = deep.iterdir()
        assert any(str(run / "record.json") in line for line in result.stdout.splitlines()), (
            result.stdout
        )


class TestResume:
    def test_resume_says_what_it_continues_and_writes_where_the_run_started(self, tmp_path, capsys):
        """Resume names the run, the readings it keeps, that it is a dry run, takes the conditions
        anew, and renders the certificate into the reports folder the run was started with."""
        stopped = READINGS.replace("dcv-100,80 V,80.5", "dcv-100,80 V,abort")
        assert scripted_run(tmp_path, stopped) == cli.EXIT_ABORTED
        (run,) = (tmp_path / "runs").iterdir()
        capsys.readouterr()
        csv = tmp_path / "all.csv"
        csv.write_text(READINGS, encoding="utf-8")
        code = cli.main(
            [
                "resume",
                str(run),
                "--readings",
                str(csv),
                "--temperature",
                "24.5",
                "--humidity",
                "45",
            ]
        )
        out = capsys.readouterr().out
        assert code == 0
        assert f"Continuing run {run}" in out
        assert "3 of 9 points have a confirmed entry and are kept, 6 to go" in out
        assert "a dry run on the simulated calibrator" in out
        assert f"Certificate folder: {tmp_path / 'rep1'}" in out
        assert len(list((tmp_path / "rep1").glob("*.html"))) == 1
        assert not Path("reports").exists()
        record = json.loads((run / "record.json").read_text(encoding="utf-8"))
        assert any(
            "conditions then 24.5 °C, 45 % relative humidity" in n["text"] for n in record["notes"]
        )


@pytest.mark.skipif(sys.platform == "win32", reason="needs a POSIX pseudo-terminal")
class TestResumeAtTheTerminal:
    def test_resume_at_the_console_asks_the_conditions_again(self, tmp_path):
        """Resumed at a terminal, the run says what it continues and asks the temperature and
        humidity now before the leads of the next range; the resume is journaled with them."""
        from runkit import Terminal

        stopped = READINGS.replace("dcv-100,80 V,80.5", "dcv-100,80 V,abort")
        assert scripted_run(tmp_path, stopped) == cli.EXIT_ABORTED
        (run,) = (tmp_path / "runs").iterdir()
        term = Terminal([sys.executable, "-m", "verirun", "resume", str(run)], cwd=tmp_path)
        try:
            shown = term.expect("Laboratory temperature now")
            term.type("24.5")
            term.expect("humidity now")
            term.type("45")
            term.expect("Press Enter")
            term.type("")
            term.expect("(or y)")
            term.type("skip")
            for answer in ("", "10.25", "49.5 mA", "", "3.1", "12", "47"):
                term.expect("Press Enter" if answer == "" else "reading in")
                term.type(answer)
            term.expect("Overall")
        finally:
            code = term.close()
        assert code == 0
        assert "Continuing run" in shown and "3 of 9 points" in shown and "dry run" in shown
        docs = [
            json.loads(line)
            for line in (run / "journal.jsonl").read_text(encoding="utf-8").splitlines()
        ]
        (resumed,) = [d for d in docs if d["kind"] == "resume"]
        assert resumed["environment"] == {"temperature_c": 24.5, "humidity_pct": 45.0}
        assert docs[0]["reports"] == str(tmp_path / "rep1")
        from runkit import fits_the_journal_schema

        fits_the_journal_schema(docs)
