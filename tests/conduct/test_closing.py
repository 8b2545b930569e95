"""No run is lost at its end: a run whose every reading is confirmed can always be closed, and a
closed run is never resumed, cut short, or certified twice under one number with other results."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from runkit import (
    READINGS,
    cli,
    documents,
    only_run,
    readings_file,
    rechained,
    record,
    resume_to_close,
    run_args,
    run_until_death,
)

from verirun.record.verify import problems


def leftovers(tmp_path):
    return sorted(str(p) for p in tmp_path.rglob("*.tmp"))


class TestKilledAtTheEnd:
    """A real verirun process ended dead (as SIGKILL ends it: no handler, no finally) at each
    moment of the end of a run; `verirun resume` then closes the run without measuring anything
    again, and the record verifies with every step."""

    @pytest.mark.parametrize("moment", ["after-last-observation", "before-stop", "while-closing"])
    def test_resume_closes_a_run_killed_at_its_end(self, tmp_path, moment, capsys):
        proc = run_until_death(run_args(tmp_path), moment, last_index=4)
        assert proc.returncode == 137, proc.stderr
        run_dir = only_run(tmp_path / "runs")
        before = documents(run_dir)
        assert sum(d["kind"] == "observation" for d in before) == 5
        # No readings are given: if resume measured anything it would stop at the prompt.
        assert resume_to_close(tmp_path, run_dir) == 0
        after = documents(run_dir)
        assert after[: len(before)] == before
        assert sum(d["kind"] == "observation" for d in after) == 5
        rec = record(run_dir)
        assert rec["run"]["status"] == "complete" and rec["summary"]["not-measured"] == 0
        assert rec["summary"]["fail"] == 1  # 10.3 V outside 9.8..10.2 V (2 % of 10 V)
        assert len(list((tmp_path / "reports").glob("*.html"))) == 1
        assert problems(run_dir, reports=tmp_path / "reports") == []
        assert not [p for p in leftovers(tmp_path) if "simulated" not in p]

    def test_closing_at_the_console_asks_nothing(self, tmp_path):
        """At the console (no readings file), a run with nothing left to measure is closed
        without asking the conditions or anything else: here the input is closed, so any
        question would stop the run instead."""
        import subprocess
        import sys

        assert run_until_death(run_args(tmp_path), "before-stop").returncode == 137
        run_dir = only_run(tmp_path / "runs")
        done = subprocess.run(
            [
                sys.executable,
                "-m",
                "verirun",
                "resume",
                str(run_dir),
                "--reports",
                str(tmp_path / "reports"),
            ],
            stdin=subprocess.DEVNULL,
            capture_output=True,
            text=True,
            timeout=120,
        )
        assert done.returncode == 0, done.stderr
        assert record(run_dir)["run"]["status"] == "complete"

    def test_resume_closes_a_run_killed_right_after_an_amendment(self, tmp_path):
        """Killed after the correction is journaled, before the new revision's record is
        written: resume writes revision 2 and its certificate; revision 1 is kept."""
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        proc = run_until_death(
            [
                "amend",
                run_dir,
                "--point",
                "3",
                "--reading",
                "10.15",
                "--reason",
                "mistyped",
                "--reports",
                tmp_path / "reports",
            ],
            "after-correction",
        )
        assert proc.returncode == 137, proc.stderr
        assert record(run_dir)["run"]["revision"] == 1  # the record lags the journal
        assert any(
            "is older than its journal" in p and "verirun resume" in p for p in problems(run_dir)
        )
        assert resume_to_close(tmp_path, run_dir) == 0
        rec = record(run_dir)
        assert rec["run"]["revision"] == 2 and rec["summary"]["fail"] == 0
        assert (run_dir / "record.r1.json").exists()
        assert any(p.name.endswith("-R2.html") for p in (tmp_path / "reports").glob("*.html"))
        assert problems(run_dir, reports=tmp_path / "reports") == []

    def test_resume_closes_a_run_stopped_by_a_signal_after_its_last_reading(
        self, tmp_path, make_run
    ):
        """SIGTERM (here its KeyboardInterrupt) just after the last reading is journaled stops the
        run as aborted with every step measured; resume closes it with nothing measured again."""
        import datetime as dt

        from verirun.clock import VirtualClock
        from verirun.console import QuietConsole

        class TerminatedAfterLast(QuietConsole):
            def result(self, point, entry):
                if point.index == point.total - 1:
                    raise KeyboardInterrupt("terminated (SIGTERM)")
                return super().result(point, entry)

        with pytest.raises(KeyboardInterrupt) as caught:
            make_run(
                console=TerminatedAfterLast(),
                item="TERM-1",
                operator="tester",
                clock=VirtualClock(dt.datetime(2026, 12, 1, 9, tzinfo=dt.timezone.utc)),
            )
        run_dir = caught.value.run_dir
        assert (
            documents(run_dir)[-1]["status"] == "aborted"
            and record(run_dir)["run"]["status"] == "aborted"
        )
        assert resume_to_close(tmp_path, run_dir) == 0
        assert record(run_dir)["run"]["status"] == "complete"
        assert sum(d["kind"] == "observation" for d in documents(run_dir)) == 5
        assert problems(run_dir, reports=tmp_path / "reports") == []

    def test_a_closed_run_is_not_resumed(self, tmp_path, capsys):
        """Once closed and written, resume refuses the run and changes nothing."""
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        before = (run_dir / "journal.jsonl").read_bytes()
        capsys.readouterr()
        assert (
            cli("resume", run_dir, "--readings", READINGS, "--reports", tmp_path / "reports") == 1
        )
        assert "nothing to resume" in capsys.readouterr().err
        assert (run_dir / "journal.jsonl").read_bytes() == before


class TestCutShort:
    def _failed_run(self, tmp_path):
        assert cli(*run_args(tmp_path)) == 0
        run_dir = only_run(tmp_path / "runs")
        assert record(run_dir)["summary"]["overall"] == "fail"
        return run_dir

    def _cut(self, run_dir):
        """Drop the last observations and the stop: the journal then ends mid-run and its chain
        still verifies."""
        path = run_dir / "journal.jsonl"
        lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
        kept = [line for line in lines if '"kind":"stop"' not in line]
        last_obs = max(i for i, line in enumerate(kept) if '"kind":"observation"' in line)
        path.write_text("".join(kept[: last_obs - 2]), encoding="utf-8")

    def test_a_cut_journal_is_reported_and_not_resumed(self, tmp_path, capsys):
        """With the FAIL's observation cut away, verify says the record and the certificate
        were made from more of the journal than it holds, and resume refuses to take other
        readings in its place."""
        run_dir = self._failed_run(tmp_path)
        self._cut(run_dir)
        found = problems(run_dir, reports=tmp_path / "reports")
        assert any("record.json: was closed from" in p for p in found)
        assert any(".html: this certificate was issued from" in p for p in found)
        capsys.readouterr()
        assert (
            cli("resume", run_dir, "--readings", READINGS, "--reports", tmp_path / "reports") == 1
        )
        assert "no longer reaches" in capsys.readouterr().err

    def test_the_issued_certificate_is_never_replaced_by_other_results(self, tmp_path, capsys):
        """Even with the record removed as well, a resume with passing readings cannot overwrite
        the issued (failing) certificate of the same number."""
        run_dir = self._failed_run(tmp_path)
        (cert,) = (tmp_path / "reports").glob("*.html")
        issued = cert.read_bytes()
        self._cut(run_dir)
        (run_dir / "record.json").unlink()
        passing = readings_file(
            tmp_path,
            [
                ("dcv-10", "10 V", "10.0"),
                ("dca-50u", "10 uA", "10 uA"),
                ("dca-50u", "50 uA", "49.5 uA"),
            ],
        )
        capsys.readouterr()
        assert cli("resume", run_dir, "--readings", passing, "--reports", tmp_path / "reports") == 1
        assert "not overwritten" in capsys.readouterr().err
        assert cert.read_bytes() == issued
        assert any(
            "this certificate was issued from" in p
            for p in problems(run_dir, reports=tmp_path / "reports")
        )

    def test_a_document_after_the_stop_does_not_verify(self, tmp_path):
        """An observation appended after the stop (with the chain rebuilt) is a verification
        failure, and the earlier reading is not replaced."""
        run_dir = self._failed_run(tmp_path)
        docs = documents(run_dir)
        obs = [d for d in docs if d["kind"] == "observation"][-1]
        (run_dir / "journal.jsonl").write_text(
            rechained(docs + [{**obs, "typed": "50 uA", "reading": 5e-05}]), encoding="utf-8"
        )
        (run_dir / "record.json").unlink()
        assert any("written after the run was closed complete" in p for p in problems(run_dir))


class TestStoppedBeforeTheStart:
    def test_no_folder_and_no_resume_hint_when_nothing_was_journaled(self, tmp_path, capsys):
        """A run that stops before its start document (the calibrator cannot be opened) leaves no
        run folder and does not offer a resume that could not work."""
        bench = tmp_path / "bench.yaml"
        from runkit import BENCH

        # Not the simulator's library (a bench reached through it is a dry run): a real bench's,
        # which is not there.
        bench.write_text(
            BENCH.read_text().replace(
                "resource: GPIB0::4::INSTR",
                "resource: GPIB0::4::INSTR\n  visa-library: /nonexistent/libvisa.so",
            )
        )
        args = run_args(tmp_path, bench=bench)
        args.remove("--simulate")
        args += [
            "--lab",
            Path(__file__).resolve().parents[1] / "data" / "lab-test.yaml",
            "--condition",
            "as new",
        ]
        code = cli(*args)
        err = capsys.readouterr().err
        assert code == 3, err
        assert "resume" not in err
        assert not (tmp_path / "runs").exists() or not list((tmp_path / "runs").iterdir())


class TestKilledBeforeItStarted:
    """A process killed after it made the run's folder and before the start document reached
    the journal leaves a folder in which nothing was measured. It is named for what it is by
    verify and resume (no "does not begin with a start document"), and the next run in that
    runs folder removes it once it is a minute old, unless a process holds its lock."""

    def killed(self, tmp_path):
        proc = run_until_death(run_args(tmp_path), "before-start")
        assert proc.returncode == 137, proc.stderr
        return only_run(tmp_path / "runs")

    def test_verify_and_resume_say_it_never_started(self, tmp_path, capsys):
        run_dir = self.killed(tmp_path)
        capsys.readouterr()
        assert cli("verify", run_dir) == 1
        out = capsys.readouterr().out
        assert (
            "never started" in out and "nothing was measured" in out and "start document" not in out
        )
        assert cli("resume", run_dir, "--readings", readings_file(tmp_path, [])) == 1
        err = capsys.readouterr().err
        assert "never started" in err and "Traceback" not in err

    def age(self, folder, seconds=120):
        import os
        import time

        then = time.time() - seconds
        os.utime(folder, (then, then))

    def test_the_next_run_removes_it_once_it_is_a_minute_old(self, tmp_path):
        stale = self.killed(tmp_path)
        self.age(stale)
        assert cli(*run_args(tmp_path)) == 0
        assert not stale.exists()
        assert len(list((tmp_path / "runs").iterdir())) == 1

    def test_a_recent_one_a_locked_one_and_other_folders_stay(self, tmp_path):
        from verirun.locks import run_lock

        recent = self.killed(tmp_path)
        locked = tmp_path / "runs" / "20261201-090000-LOCKED-0123abcd"
        locked.mkdir()
        self.age(locked)
        other = tmp_path / "runs" / "20261201-090000-NOTES-0123abcd"
        other.mkdir()
        (other / "notes.txt").write_text("the technician's own file")
        self.age(other)
        unnamed = tmp_path / "runs" / "scratch"
        unnamed.mkdir()
        self.age(unnamed)
        with run_lock(locked):
            assert cli(*run_args(tmp_path)) == 0
        assert recent.exists() and locked.exists() and other.exists() and unnamed.exists()
        assert (other / "notes.txt").exists()

    def test_a_folder_with_a_record_stays_whatever_its_journal(self, tmp_path):
        """A run folder holding a record is a closed run, even with its journal gone or cut to
        nothing (a damaged folder is for verify to name, never for a run to remove)."""
        from verirun.record.journal import never_started

        for number, journal in enumerate((None, b"", b'{"kind": "sta')):
            folder = tmp_path / "runs" / f"20261201-090000-KEPT-{number:08x}"
            folder.mkdir(parents=True)
            (folder / "record.json").write_text("{}\n")
            if journal is not None:
                (folder / "journal.jsonl").write_bytes(journal)
            self.age(folder)
            assert not never_started(folder)
        assert cli(*run_args(tmp_path)) == 0
        assert len([f for f in (tmp_path / "runs").iterdir() if "KEPT" in f.name]) == 3


def test_close_keeps_working_from_a_copy(tmp_path):
    """A closed run's folder copied elsewhere still verifies (nothing in it depends on its path)."""
    assert cli(*run_args(tmp_path)) == 0
    run_dir = only_run(tmp_path / "runs")
    copy = tmp_path / "copy"
    shutil.copytree(run_dir, copy)
    assert problems(copy) == []
