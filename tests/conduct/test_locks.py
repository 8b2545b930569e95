"""One writer per run, one verirun per calibrator: tried with two real verirun processes."""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

from runkit import BENCH, READINGS, cli, documents, only_run, readings_file, record, run_args

from verirun.record.verify import problems

#: A verirun process at a real bench whose calibrator is reached through the simulated device
#: (see :func:`at_the_bench.calibrator_at_the_bench`).
_AT_THE_BENCH = f"""
import sys
sys.path.insert(0, {str(Path(__file__).resolve().parents[1])!r})
from at_the_bench import calibrator_at_the_bench
from verirun.cli import main
with calibrator_at_the_bench():
    code = main(sys.argv[1:])
sys.exit(code)
"""


def verirun(args: list, env: dict, *, at_the_bench: bool = False, **kw) -> subprocess.Popen:
    command = ["-c", _AT_THE_BENCH] if at_the_bench else ["-m", "verirun"]
    return subprocess.Popen(
        [sys.executable, *command, *[str(a) for a in args]],
        env=env,
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        **kw,
    )


def wait_for(predicate, proc: subprocess.Popen, timeout: float = 30.0) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if predicate():
            return True
        if proc.poll() is not None:
            return False
        time.sleep(0.01)
    return False


def aborted_run(tmp_path: Path) -> Path:
    readings = readings_file(
        tmp_path, [("dcv-10", "2 V", "2.05"), ("dcv-10", "6 V", "abort")], "abort.csv"
    )
    assert cli(*run_args(tmp_path, readings=readings)) == 2
    return only_run(tmp_path / "runs")


class TestOneWriterPerRun:
    def test_a_second_resume_is_refused_while_the_first_runs(self, tmp_path):
        """While one `verirun resume` waits at the operator's prompt, a second on the same run is
        refused at once (exit 5) naming the run and the first one's pid; it writes nothing, and
        once the first has ended the run resumes and verifies."""
        run_dir = aborted_run(tmp_path)
        env = {**os.environ}
        first = verirun(
            [
                "resume",
                run_dir,
                "--reports",
                tmp_path / "reports",
                "--temperature",
                "23",
                "--humidity",
                "45",
            ],
            env,
        )
        try:
            assert wait_for(
                lambda: any(d["kind"] == "resume" for d in documents(run_dir)), first
            ), first.communicate(timeout=10)
            held = (run_dir / "journal.jsonl").read_bytes()
            second = subprocess.run(
                [
                    sys.executable,
                    "-m",
                    "verirun",
                    "resume",
                    str(run_dir),
                    "--readings",
                    str(READINGS),
                    "--reports",
                    str(tmp_path / "reports"),
                ],
                env=env,
                capture_output=True,
                text=True,
                timeout=60,
            )
            assert second.returncode == 5, second.stderr
            assert (
                f"run {run_dir} is in use by another verirun process (pid {first.pid})"
                in second.stderr
            )
            assert "verirun resume" not in second.stderr  # not told to do what was just refused
            assert (run_dir / "journal.jsonl").read_bytes() == held
        finally:
            out, err = first.communicate("abort\n", timeout=60)
        assert first.returncode == 2, err
        assert (
            cli("resume", run_dir, "--readings", READINGS, "--reports", tmp_path / "reports") == 0
        )
        assert record(run_dir)["run"]["status"] == "complete" and problems(run_dir) == []
        kinds = [d["kind"] for d in documents(run_dir)]
        assert kinds.count("resume") == 2 and kinds.count("stop") == 3


class TestOneVerirunPerCalibrator:
    def test_a_second_run_on_the_same_calibrator_is_refused(self, tmp_path):
        """Two runs of different items on one bench: while the first holds the calibrator (its
        VISA resource), the second is refused before it opens the resource, names it and the
        holder's pid, and leaves no run folder behind."""
        # A real bench (a bench reached through the simulator's library is a dry run, which
        # locks no instrument): each process reaches the calibrator through the simulated device.
        bench = BENCH
        env = {**os.environ}
        at_bench = [
            "--lab",
            Path(__file__).resolve().parents[1] / "data" / "lab-test.yaml",
            "--condition",
            "as new",
        ]
        args = [*run_args(tmp_path, bench=bench, serial="FIRST"), *at_bench]
        args.remove("--simulate")
        args[args.index("--readings") : args.index("--readings") + 2] = []
        first = verirun(args, env, at_the_bench=True)
        try:
            assert wait_for(
                lambda: (
                    (tmp_path / "runs").is_dir()
                    and any(
                        (p / "journal.jsonl").exists() and documents(p)
                        for p in (tmp_path / "runs").iterdir()
                    )
                ),
                first,
            ), first.communicate(timeout=10)
            second_runs = tmp_path / "second-runs"
            args2 = [*run_args(tmp_path, bench=bench, serial="SECOND", runs=second_runs), *at_bench]
            args2.remove("--simulate")
            second = subprocess.run(
                [sys.executable, "-c", _AT_THE_BENCH, *map(str, args2)],
                env=env,
                capture_output=True,
                text=True,
                timeout=60,
            )
            assert second.returncode == 5, second.stderr
            assert (
                f"the calibrator at 'GPIB0::4::INSTR' is in use by another verirun process"
                f" (pid {first.pid})"
            ) in second.stderr
            assert "verirun resume" not in second.stderr
            assert not second_runs.exists() or not list(second_runs.iterdir())
        finally:
            first.communicate("abort\n", timeout=60)
        assert first.returncode == 2


class TestTheLockFile:
    """The lock file says which process holds the lock, whatever an earlier holder wrote."""

    def test_it_holds_the_holders_pid_alone(self, tmp_path):
        from verirun.locks import RUN_LOCK_NAME, run_lock

        lock = tmp_path / RUN_LOCK_NAME
        lock.write_bytes(b"4194303\nleft over by an earlier holder\n")  # longer than any pid
        with run_lock(tmp_path):
            assert lock.read_bytes() == f"{os.getpid()}\n".encode()
        with run_lock(tmp_path):  # a second time: the same, nothing added
            assert lock.read_bytes() == f"{os.getpid()}\n".encode()

    def test_a_new_lock_file_holds_the_pid(self, tmp_path):
        from verirun.locks import RUN_LOCK_NAME, run_lock

        with run_lock(tmp_path):
            assert (tmp_path / RUN_LOCK_NAME).read_bytes() == f"{os.getpid()}\n".encode()

    def test_a_pid_that_cannot_be_written_leaves_no_earlier_holders(self, tmp_path, monkeypatch):
        """On a full disk the lock holds without its pid, and the file does not go on naming an
        earlier holder (a second process would be told the wrong process holds the run)."""
        import errno

        from verirun.locks import RUN_LOCK_NAME, run_lock

        lock = tmp_path / RUN_LOCK_NAME
        lock.write_bytes(b"4194303\n")

        def full(fd, data, offset):
            raise OSError(errno.ENOSPC, "No space left on device")

        monkeypatch.setattr(os, "pwrite", full)
        with run_lock(tmp_path):
            assert lock.read_bytes() == b""
