"""A full disk, a read-only folder, a path that is a file, a planted symlink: bench faults, not
bugs. Each ends in exit 3 with what to free or fix, the output in standby (read back from the
simulated device), the journal whole, no temporary left, and the run resumable once fixed."""

from __future__ import annotations

import errno
import os
import subprocess
from pathlib import Path

import pytest
from runkit import (
    READINGS,
    cli,
    documents,
    only_run,
    procedure_with,
    readings_file,
    record,
    resume_to_close,
    run_args,
)

from verirun.record.journal import read_journal, verify_chain
from verirun.record.verify import problems


def output_state(run_dir: Path) -> str:
    """The output state read back from the run's simulated device itself (its state lives in
    this process, per device file)."""
    import pyvisa

    device = run_dir / "simulated-calibrator" / "calibrator.yaml"
    rm = pyvisa.ResourceManager(f"{device.resolve()}@sim")
    try:
        res = rm.open_resource("GPIB0::4::INSTR", read_termination="\n", write_termination="\n")
        return res.query("OUTP?").strip()
    finally:
        rm.close()


def no_temporaries(*folders: Path) -> bool:
    return not [p for folder in folders if folder.exists() for p in folder.rglob("*.tmp")]


def check_fault_then_resume(
    tmp_path: Path,
    code: int,
    err: str,
    runs: Path,
    reports: Path,
    fix,
    readings: Path = READINGS,
    steps: int = 5,
) -> str:
    """After a run ended by a storage fault: exit 3 and a clear message, or a finished run; the
    journal whole, no temporaries, the output off; then, once ``fix()``-ed, resume finishes it.
    Returns where the fault landed, for the matrix's report."""
    assert "internal error" not in err and "Traceback" not in err
    folders = [p for p in runs.iterdir() if p.is_dir()] if runs.exists() else []
    if code == 0:
        return "none"
    assert code == 3, err
    assert no_temporaries(runs, reports)
    if not folders:  # nothing was journaled: no folder and no resume promised
        assert "resume" not in err
        return "before the start"
    (run_dir,) = folders
    docs = read_journal(run_dir / "journal.jsonl").documents
    assert docs and docs[0]["kind"] == "start" and verify_chain(docs) == []
    assert "verirun resume" in err
    assert output_state(run_dir) in ("0", "OFF")
    fix()
    assert cli("resume", run_dir, "--readings", readings, "--reports", reports) == 0
    rec = record(run_dir)
    assert rec["run"]["status"] == "complete" and rec["summary"]["not-measured"] == 0
    assert problems(run_dir, reports=reports) == []
    assert len(list(reports.glob("*.html"))) == 1
    assert no_temporaries(runs, reports)
    observed = sum(d["kind"] == "observation" for d in docs)
    return f"after {observed} observations" if observed < steps else "while closing"


@pytest.fixture
def small_disk(tmp_path):
    """A 256 KiB tmpfs mounted for the test (needs root; skipped otherwise)."""
    mount = tmp_path / "disk"
    mount.mkdir()
    done = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", "size=256k,mode=0755", "tmpfs", str(mount)],
        capture_output=True,
    )
    if done.returncode != 0:
        pytest.skip("cannot mount a small file system here (needs root)")
    try:
        yield mount
    finally:
        subprocess.run(["umount", "-l", str(mount)], capture_output=True)


def fill(disk: Path, leave: int) -> Path:
    """Fill ``disk`` until ``leave`` bytes are free; return the filler file."""
    filler = disk / "filler"
    stat = os.statvfs(disk)
    free = stat.f_bavail * stat.f_frsize
    filler.write_bytes(b"\0" * max(free - leave, 0))
    return filler


class TestDiskFullOnASmallFileSystem:
    # Free space left on the disk when an 11-step run starts: its own files need about 64 KiB
    # (device copy, lock, journal, record, certificate) in 4 KiB pages, so the levels stop it
    # at each moment: before the start, mid-run (the journal's third page), while closing the
    # record, at the certificate.
    @pytest.mark.parametrize("leave_kib", [0, 4, 8, 12, 16, 20, 24, 28, 32, 40, 48, 56, 64, 80])
    def test_disk_full_is_a_bench_fault_and_the_run_resumes(
        self, tmp_path, small_disk, leave_kib, capsys
    ):
        procedure = procedure_with(tmp_path, "2 V, 4 V, 6 V, 8 V, 10 V, 8 V, 6 V, 4 V, 2 V")
        readings = readings_file(
            tmp_path,
            [("dcv-10", f"{v} V", f"{v}.05") for v in (2, 4, 6, 8, 10, 8, 6, 4, 2)]
            + [("dca-50u", "10 uA", "10 uA"), ("dca-50u", "50 uA", "50 uA")],
        )
        runs, reports = small_disk / "runs", small_disk / "reports"
        runs.mkdir(), reports.mkdir()
        filler = fill(small_disk, leave_kib * 1024)
        code = cli(*run_args(tmp_path, procedure, readings, runs=runs, reports=reports))
        err = capsys.readouterr().err
        if code:
            assert "no space left on the device" in err and "free space" in err
        check_fault_then_resume(
            tmp_path, code, err, runs, reports, fix=filler.unlink, readings=readings, steps=11
        )


class TestDiskFullSimulated:
    """Where no small file system can be mounted the same faults are made by os.write refusing
    after a number of bytes (ENOSPC, as a full disk) or os.fsync failing (EIO, a failing device)."""

    @pytest.mark.parametrize(
        "budget", [0, 1, 2000, 6500, 7000, 7600, 8200, 9000, 12000, 20000, 30000]
    )
    def test_write_refused_after_a_number_of_bytes(self, tmp_path, monkeypatch, budget, capsys):
        real_write = os.write
        state = {"left": budget, "on": True}
        root = str(tmp_path / "out")

        def write(fd, data):
            try:
                target = os.readlink(f"/proc/self/fd/{fd}")
            except OSError:
                target = ""
            if not state["on"] or not target.startswith(root):
                return real_write(fd, data)
            if state["left"] <= 0:
                raise OSError(errno.ENOSPC, "No space left on device")
            part = bytes(data[: state["left"]])
            state["left"] -= len(part)
            return real_write(fd, part)

        monkeypatch.setattr(os, "write", write)
        runs, reports = tmp_path / "out" / "runs", tmp_path / "out" / "reports"
        code = cli(*run_args(tmp_path, runs=runs, reports=reports))
        err = capsys.readouterr().err
        state["on"] = False
        # A run writes about 36 kB (journal, record, certificate): every budget here runs out.
        assert code == 3 and "no space left on the device" in err, err
        check_fault_then_resume(tmp_path, code, err, runs, reports, fix=lambda: None)

    # A run's fsyncs: 1 the new run folder, 2-8 the journal's seven lines, 9 the record, 10 the
    # run folder after the rename, 11 the certificate, 12 the reports folder. A folder's fsync
    # that fails is not fatal (the file's own was done); every other is.
    @pytest.mark.parametrize("failing", [2, 3, 4, 6, 7, 8, 9, 11])
    def test_fsync_fails(self, tmp_path, monkeypatch, failing, capsys):
        real_fsync = os.fsync
        calls = {"n": 0, "on": True}

        def fsync(fd):
            calls["n"] += 1
            if calls["on"] and calls["n"] == failing:
                raise OSError(errno.EIO, "Input/output error")
            return real_fsync(fd)

        monkeypatch.setattr(os, "fsync", fsync)
        runs, reports = tmp_path / "runs", tmp_path / "reports"
        code = cli(*run_args(tmp_path, runs=runs, reports=reports))
        err = capsys.readouterr().err
        calls["on"] = False
        assert code == 3 and "Input/output error" in err, err
        check_fault_then_resume(tmp_path, code, err, runs, reports, fix=lambda: None)


class TestReadOnlyAndInTheWay:
    def test_a_run_folder_on_a_read_only_file_system(self, tmp_path, small_disk, capsys):
        """A run stopped by the operator, its disk then made read-only: resume is refused with
        what to fix (exit 3), the journal untouched; once read-write again, resume finishes."""
        runs, reports = small_disk / "runs", tmp_path / "reports"
        readings = readings_file(tmp_path, [("dcv-10", "2 V", "2.05"), ("dcv-10", "6 V", "abort")])
        assert cli(*run_args(tmp_path, readings=readings, runs=runs, reports=reports)) == 2
        run_dir = only_run(runs)
        before = (run_dir / "journal.jsonl").read_bytes()
        subprocess.run(["mount", "-o", "remount,ro", str(small_disk)], check=True)
        capsys.readouterr()
        assert cli("resume", run_dir, "--readings", READINGS, "--reports", reports) == 3
        err = capsys.readouterr().err
        assert "read-only" in err and "internal error" not in err
        assert cli(*run_args(tmp_path, runs=runs, reports=reports, serial="OTHER")) == 3
        assert "read-only" in capsys.readouterr().err
        subprocess.run(["mount", "-o", "remount,rw", str(small_disk)], check=True)
        assert (run_dir / "journal.jsonl").read_bytes() == before
        assert cli("resume", run_dir, "--readings", READINGS, "--reports", reports) == 0
        assert problems(run_dir) == []

    def test_runs_folder_that_is_a_file(self, tmp_path, capsys):
        (tmp_path / "runs").write_text("not a folder")
        assert cli(*run_args(tmp_path)) == 3
        err = capsys.readouterr().err
        assert "a file or folder is in the way" in err and "internal error" not in err

    def test_reports_folder_that_is_a_file(self, tmp_path, capsys):
        """The run completes and its record is written; the certificate cannot be: exit 3, and
        once the file is moved aside resume writes the certificate without measuring again."""
        (tmp_path / "reports").write_text("not a folder")
        assert cli(*run_args(tmp_path)) == 3
        err = capsys.readouterr().err
        assert "a file or folder is in the way" in err and "verirun resume" in err
        run_dir = only_run(tmp_path / "runs")
        assert record(run_dir)["run"]["status"] == "complete"
        (tmp_path / "reports").unlink()
        assert resume_to_close(tmp_path, run_dir) == 0
        assert len(list((tmp_path / "reports").glob("*.html"))) == 1
        assert sum(d["kind"] == "observation" for d in documents(run_dir)) == 5


class TestSymlinksAreNotFollowed:
    def _aborted(self, tmp_path):
        readings = readings_file(tmp_path, [("dcv-10", "2 V", "2.05"), ("dcv-10", "6 V", "abort")])
        assert cli(*run_args(tmp_path, readings=readings)) == 2
        return only_run(tmp_path / "runs")

    @pytest.mark.parametrize("name", ["journal.jsonl", "record.json", "writer.lock"])
    def test_a_link_in_the_run_folder_is_refused(self, tmp_path, name, capsys):
        """A file of the run folder replaced by a link to a file elsewhere: resume refuses to write
        through it (exit 3) and the file elsewhere is untouched."""
        run_dir = self._aborted(tmp_path)
        outside = tmp_path / "elsewhere.txt"
        outside.write_bytes((run_dir / name).read_bytes())
        (run_dir / name).unlink()
        (run_dir / name).symlink_to(outside)
        before = outside.read_bytes()
        capsys.readouterr()
        code = cli("resume", run_dir, "--readings", READINGS, "--reports", tmp_path / "reports")
        assert code == 3, capsys.readouterr().err
        assert outside.read_bytes() == before

    def test_a_link_in_the_reports_folder_is_refused(self, tmp_path, capsys):
        """A certificate's name in the reports folder planted as a link: not written through."""
        run_dir = self._aborted(tmp_path)
        from verirun.certificate.render import number_for, safe_file_name

        start = documents(run_dir)[0]
        number = number_for(
            prefix=start["lab"]["certificate_prefix"],
            simulated=start["bench"]["simulated"],
            started=start["time"],
            uid=start["uid"],
            given=None,
        )
        target = tmp_path / "reports" / f"{safe_file_name(number)}.html"
        target.parent.mkdir(exist_ok=True)
        outside = tmp_path / "elsewhere.html"
        outside.write_text("keep me")
        target.symlink_to(outside)
        assert (
            cli("resume", run_dir, "--readings", READINGS, "--reports", tmp_path / "reports") == 3
        )
        assert outside.read_text() == "keep me"
        assert record(run_dir)["run"]["status"] == "complete"


def test_runs_and_reports_folders_may_be_links(tmp_path):
    """A runs or reports folder kept on another disk through a link is used; only the files
    written inside are never links."""
    (tmp_path / "elsewhere" / "runs").mkdir(parents=True)
    (tmp_path / "elsewhere" / "reports").mkdir()
    (tmp_path / "runs").symlink_to(tmp_path / "elsewhere" / "runs")
    (tmp_path / "reports").symlink_to(tmp_path / "elsewhere" / "reports")
    assert cli(*run_args(tmp_path)) == 0
    assert len(list((tmp_path / "elsewhere" / "reports").glob("*.html"))) == 1
    assert problems(only_run(tmp_path / "elsewhere" / "runs")) == []
