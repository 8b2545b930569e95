"""Stopping, crashing and resuming: no confirmed observation is ever lost."""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import time

import pytest
from runkit import simulated_run_args

from verirun.cli import main
from verirun.record.journal import read_journal
from verirun.record.verify import problems

ROOT_ARGS = None


def run_cli(*args):
    return main([str(a) for a in args])


def demo_run(tmp_path, demo_procedure_path, demo_bench_path, readings, extra=()):
    return run_cli(
        *simulated_run_args(
            tmp_path,
            demo_procedure_path,
            demo_bench_path,
            readings,
            serial="SN-7",
            customer="Test customer",
        ),
        *extra,
    )


def resume_demo(tmp_path, data_dir, run_dir, *extra) -> int:
    """`verirun resume` of a demo run with the scripted readings, certificates into
    ``tmp_path / "reports"``; the exit code."""
    return run_cli(
        "resume",
        run_dir,
        *extra,
        "--readings",
        data_dir / "qm40-readings.csv",
        "--reports",
        tmp_path / "reports",
    )


def abort_at(data_dir, tmp_path, line_text, replacement):
    text = (data_dir / "qm40-readings.csv").read_text()
    assert line_text in text
    path = tmp_path / "readings-abort.csv"
    path.write_text(text.replace(line_text, replacement))
    return path


class TestAbortAndResume:
    def test_abort_then_resume_completes_with_every_observation(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, capsys
    ):
        """An operator abort stops the run with its observations kept; resume finishes the rest and
        the record then verifies and holds all 20 points once each."""
        readings = abort_at(data_dir, tmp_path, "dcv-30,15 V,15\n", "dcv-30,15 V,abort\n")
        assert demo_run(tmp_path, demo_procedure_path, demo_bench_path, readings) == 2
        err = capsys.readouterr().err
        assert "aborted by the operator at step 7 of 20" in err and "verirun resume" in err
        (run_dir,) = (tmp_path / "runs").iterdir()
        before = read_journal(run_dir / "journal.jsonl").documents
        assert [d["kind"] for d in before].count("observation") == 6
        assert before[-1]["kind"] == "stop" and before[-1]["status"] == "aborted"
        assert not list((tmp_path / "reports").glob("*.html"))  # no certificate for an aborted run

        assert resume_demo(tmp_path, data_dir, run_dir) == 0
        after = read_journal(run_dir / "journal.jsonl").documents
        assert after[: len(before)] == before  # nothing rewritten
        record = json.loads((run_dir / "record.json").read_text())
        assert record["run"]["status"] == "complete"
        assert [r["verdict"] != "not-measured" for r in record["points"]] == [True] * 20
        assert problems(run_dir) == []
        assert len(list((tmp_path / "reports").glob("*.html"))) == 1

    def test_resume_refuses_a_changed_procedure(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, capsys
    ):
        """Resume checks the procedure is the one the run started with, by SHA-256."""
        readings = abort_at(data_dir, tmp_path, "dcv-6,4.8 V,4.6\n", "dcv-6,4.8 V,abort\n")
        demo_run(tmp_path, demo_procedure_path, demo_bench_path, readings)
        (run_dir,) = (tmp_path / "runs").iterdir()
        changed = tmp_path / "changed.yaml"
        changed.write_text(demo_procedure_path.read_text().replace("revision: C", "revision: D"))
        capsys.readouterr()
        assert (
            run_cli(
                "resume",
                run_dir,
                "--procedure",
                changed,
                "--readings",
                data_dir / "qm40-readings.csv",
            )
            == 1
        )
        assert "not the one the run started with" in capsys.readouterr().err

    def test_resume_refuses_another_item(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, capsys
    ):
        """Resume refuses when the item serial given is not the run's."""
        readings = abort_at(data_dir, tmp_path, "dcv-6,4.8 V,4.6\n", "dcv-6,4.8 V,abort\n")
        demo_run(tmp_path, demo_procedure_path, demo_bench_path, readings)
        (run_dir,) = (tmp_path / "runs").iterdir()
        capsys.readouterr()
        assert (
            run_cli(
                "resume", run_dir, "--serial", "OTHER", "--readings", data_dir / "qm40-readings.csv"
            )
            == 1
        )
        assert "not 'OTHER'" in capsys.readouterr().err

    def test_nothing_to_resume_on_a_complete_run(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, capsys
    ):
        """A complete run is not resumed; the message says so."""
        demo_run(tmp_path, demo_procedure_path, demo_bench_path, data_dir / "qm40-readings.csv")
        (run_dir,) = (tmp_path / "runs").iterdir()
        capsys.readouterr()
        assert run_cli("resume", run_dir, "--readings", data_dir / "qm40-readings.csv") == 1
        assert "nothing to resume" in capsys.readouterr().err

    @pytest.mark.parametrize(
        "stray",
        [
            lambda record: record.update(issues=None),
            lambda record: record.update(as_found=None),
            lambda record: record["run"].update(certificate_number=None),
        ],
        ids=["issues", "as_found", "certificate_number"],
    )
    def test_a_record_with_a_null_its_journal_does_not_give_is_written_again(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, capsys, stray
    ):
        """A complete run's record.json holding a null its journal does not give (the models
        of the two records compare equal; the files do not) does not verify, and resume writes
        it again from the journal rather than saying there is nothing to resume."""
        demo_run(tmp_path, demo_procedure_path, demo_bench_path, data_dir / "qm40-readings.csv")
        (run_dir,) = (tmp_path / "runs").iterdir()
        path = run_dir / "record.json"
        record = json.loads(path.read_text(encoding="utf-8"))
        stray(record)
        path.write_text(json.dumps(record), encoding="utf-8")
        assert any("differs from what its journal records" in p for p in problems(run_dir))
        capsys.readouterr()
        assert run_cli("resume", run_dir, "--readings", data_dir / "qm40-readings.csv") == 0
        assert "nothing to resume" not in capsys.readouterr().err
        assert problems(run_dir) == []

    def test_torn_last_line_is_recovered_and_reported(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, capsys
    ):
        """A journal whose last line was cut mid-write is resumed: the torn line is dropped and
        reported, every whole line is kept, and the finished journal verifies."""
        readings = abort_at(data_dir, tmp_path, "dcv-6,4.8 V,4.6\n", "dcv-6,4.8 V,abort\n")
        demo_run(tmp_path, demo_procedure_path, demo_bench_path, readings)
        (run_dir,) = (tmp_path / "runs").iterdir()
        journal = run_dir / "journal.jsonl"
        whole = read_journal(journal).documents
        with open(journal, "a", encoding="utf-8") as fh:
            fh.write('{"kind":"observation","point":"dcv-6@4.8","typed":"4.')  # power lost mid-line
        assert read_journal(journal).torn_line is not None
        assert any("cut off" in p for p in problems(run_dir))
        capsys.readouterr()
        assert resume_demo(tmp_path, data_dir, run_dir) == 0
        assert "cut off" in capsys.readouterr().out
        docs = read_journal(journal).documents
        assert docs[: len(whole)] == whole
        assert problems(run_dir) == []
        record = json.loads((run_dir / "record.json").read_text())
        # In the run's internal log, not among the notes the customer reads.
        assert any("cut-off last journal line was dropped" in n["text"] for n in record["run_log"])
        assert not any("cut-off" in n["text"] for n in record["notes"])
        resumed = next(d for d in docs if d["kind"] == "resume")
        assert resumed["recovered_text"] == '{"kind":"observation","point":"dcv-6@4.8","typed":"4.'

    def test_resume_uses_the_journal_copy_when_the_file_was_revised(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path
    ):
        """With no procedure named, resume uses the copy the journal holds, so revising the file
        the run started from does not strand the run."""
        procedure = tmp_path / "procedure.yaml"
        procedure.write_text(demo_procedure_path.read_text())
        readings = abort_at(data_dir, tmp_path, "dcv-6,4.8 V,4.6\n", "dcv-6,4.8 V,abort\n")
        demo_run(tmp_path, procedure, demo_bench_path, readings)
        (run_dir,) = (tmp_path / "runs").iterdir()
        procedure.write_text(procedure.read_text().replace("revision: C", "revision: D"))
        assert resume_demo(tmp_path, data_dir, run_dir) == 0
        record = json.loads((run_dir / "record.json").read_text())
        assert record["procedure"]["revision"] == "C" and record["run"]["status"] == "complete"


def _kill_bench(tmp_path, demo_bench_path):
    """The demo bench with a settling time, so that a run lasts long enough to be killed mid-way."""
    bench = tmp_path / "bench-slow.yaml"
    bench.write_text(demo_bench_path.read_text().replace("settle: 0 s", "settle: 0.04 s"))
    return bench


def _demo_command(tmp_path, procedure, bench, data_dir, serial: str) -> list[str]:
    """`verirun run` of ``procedure`` on ``bench`` with the scripted readings of tests/data, as
    a command for a real process: runs and reports go into ``tmp_path``."""
    readings = data_dir / "qm40-readings.csv"
    return [
        sys.executable,
        "-m",
        "verirun",
        *simulated_run_args(tmp_path, procedure, bench, readings, serial=serial),
    ]


def _wait_for_observations(tmp_path, count: int, proc, timeout: float = 30.0):
    """Poll the run's journal until it holds ``count`` observations (or the process ends)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and proc.poll() is None:
        found = (
            list((tmp_path / "runs").glob("*/journal.jsonl"))
            if (tmp_path / "runs").exists()
            else []
        )
        text = found[0].read_text(errors="replace") if found else ""
        if '"kind":"start"' in text and text.count('"kind":"observation"') >= count:
            return found[0]
        time.sleep(0.005)
    return None


class TestKilledMidRun:
    # Kill once the journal holds N observations, then a little later, so the kill lands at
    # different places: between points, while a point settles, while a line is written.
    @pytest.mark.parametrize(
        "observed, extra_delay",
        [
            (0, 0.0),
            (1, 0.013),
            (3, 0.027),
            (6, 0.0),
            (9, 0.013),
            (12, 0.027),
            (15, 0.0),
            (18, 0.013),
        ],
    )
    def test_sigkill_loses_no_confirmed_observation(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, observed, extra_delay
    ):
        """A verirun process killed with SIGKILL at any moment keeps every observation it had
        journaled; resume finishes the run and the record verifies with all 20 points."""
        bench = _kill_bench(tmp_path, demo_bench_path)
        cmd = _demo_command(tmp_path, demo_procedure_path, bench, data_dir, "KILL")
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        journal = _wait_for_observations(tmp_path, observed, proc)
        time.sleep(extra_delay)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        assert journal is not None, "the run ended or stalled before the kill point"
        run_dir = journal.parent
        read = read_journal(journal)
        before = read.documents
        assert before[0]["kind"] == "start"
        assert sum(d["kind"] == "observation" for d in before) >= observed
        assert before[-1]["kind"] != "stop"  # SIGKILL gives no chance to write one
        assert resume_demo(tmp_path, data_dir, run_dir, "--bench", bench) == 0
        after = read_journal(run_dir / "journal.jsonl").documents
        assert after[: len(before)] == before
        observed_points = [d["point"] for d in after if d["kind"] == "observation"]
        assert len(observed_points) == len(set(observed_points)) == 20
        assert problems(run_dir) == []


class TestSigterm:
    @pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGHUP])
    def test_signal_puts_output_in_standby_and_stops_resumable(
        self, tmp_path, data_dir, demo_procedure_path, demo_bench_path, signum
    ):
        """SIGTERM, or SIGHUP when the terminal goes away, ends a run as an interruption: exit
        code 2, a stop document naming the signal, and the run left resumable."""
        bench = _kill_bench(tmp_path, demo_bench_path)
        cmd = _demo_command(tmp_path, demo_procedure_path, bench, data_dir, "TERM")
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        deadline = time.monotonic() + 20
        journal = None
        while time.monotonic() < deadline:  # wait until the run has begun journaling
            found = (
                list((tmp_path / "runs").glob("*/journal.jsonl"))
                if (tmp_path / "runs").exists()
                else []
            )
            if found and found[0].read_text().count("observation") >= 2:
                journal = found[0]
                break
            time.sleep(0.02)
        assert journal is not None, "the run never started"
        proc.send_signal(signum)
        _, err = proc.communicate(timeout=30)
        assert proc.returncode == 2
        assert "standby" in err and "verirun resume" in err
        docs = read_journal(journal).documents
        assert docs[-1]["kind"] == "stop" and docs[-1]["status"] == "aborted"
        assert signal.Signals(signum).name in docs[-1]["reason"]
