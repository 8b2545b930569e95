"""Small runs for the record tests: the test-scenario procedure and bench of ``tests/data/steps``,
variants of them written into a test's folder, and the command line run in-process or as a
real process that can be stopped dead at a chosen moment."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

from verirun.cli import main
from verirun.record.journal import read_journal

STEPS = Path(__file__).resolve().parent / "data" / "steps"
STORED = STEPS / "stored"
PROCEDURE = STEPS / "procedure.yaml"
BENCH = STEPS / "bench.yaml"
READINGS = STEPS / "readings.csv"


def cli(*args) -> int:
    return main([str(a) for a in args])


def procedure_with(tmp_path: Path, dcv_points: str, name: str = "procedure.yaml") -> Path:
    """The test procedure with the dcv-10 range's points replaced by ``dcv_points``."""
    text = PROCEDURE.read_text(encoding="utf-8")
    assert "points: [2 V, 6 V, 10 V]" in text
    path = tmp_path / name
    path.write_text(
        text.replace("points: [2 V, 6 V, 10 V]", f"points: [{dcv_points}]"), encoding="utf-8"
    )
    return path


def readings_file(
    tmp_path: Path, rows: list[tuple[str, str, str]], name: str = "readings.csv"
) -> Path:
    path = tmp_path / name
    path.write_text(
        "range,at,reading\n" + "".join(f"{r},{a},{v}\n" for r, a, v in rows), encoding="utf-8"
    )
    return path


def run_args(
    tmp_path: Path,
    procedure: Path = PROCEDURE,
    readings: Path = READINGS,
    serial: str = "PM7-1",
    bench: Path = BENCH,
    runs: Path | None = None,
    reports: Path | None = None,
) -> list:
    return [
        "run",
        procedure,
        "--bench",
        bench,
        "--simulate",
        "--readings",
        readings,
        "--serial",
        serial,
        "--customer",
        "Test customer",
        "--temperature",
        "23",
        "--humidity",
        "45",
        "--runs",
        runs or tmp_path / "runs",
        "--reports",
        reports or tmp_path / "reports",
    ]


def only_run(runs: Path) -> Path:
    (run_dir,) = [p for p in Path(runs).iterdir() if p.is_dir()]
    return run_dir


def documents(run_dir: Path) -> list[dict]:
    return read_journal(run_dir / "journal.jsonl").documents


def record(run_dir: Path) -> dict:
    return json.loads((run_dir / "record.json").read_text(encoding="utf-8"))


#: Code run in a real verirun process before its command line: it ends the process at once
#: (``os._exit``, as SIGKILL would: no handler, no finally) at the moment ``VERIRUN_TEST_DIE``
#: names. Each moment is a call into verirun's own functions, so the death lands exactly there.
_DIE_AT = textwrap.dedent("""
    import os, sys
    import verirun.record.journal as record, verirun.storage as storage
    moment = os.environ["VERIRUN_TEST_DIE"]
    append, write_atomic = record.Journal.append, storage.write_atomic

    def dying_append(self, doc):
        if moment == "before-start" and doc["kind"] == "start":
            os._exit(137)
        if moment == "before-stop" and doc["kind"] == "stop":
            os._exit(137)
        full = append(self, doc)
        if moment == "after-last-observation" and doc["kind"] == "observation" and doc["index"] == LAST:
            os._exit(137)
        if moment == "after-correction" and doc["kind"] == "correction":
            os._exit(137)
        return full

    def dying_write(path, pieces):
        if moment == "while-closing" and str(path).endswith("record.json"):
            tmp = str(path) + ".tmp"
            with open(tmp, "w") as fh:  # a part of the record on disk, then dead
                fh.write(next(iter(pieces)))
            os._exit(137)
        return write_atomic(path, pieces)

    record.Journal.append = dying_append
    storage.write_atomic = dying_write
    LAST = int(os.environ.get("VERIRUN_TEST_LAST", "-1"))
    from verirun.cli import main
    sys.exit(main(sys.argv[1:]))
""")


def run_until_death(args: list, moment: str, *, last_index: int = -1, cwd: Path | None = None):
    """Run ``verirun ARGS`` in a real process that dies at ``moment``; return the process."""
    import os

    env = {**os.environ, "VERIRUN_TEST_DIE": moment, "VERIRUN_TEST_LAST": str(last_index)}
    return subprocess.run(
        [sys.executable, "-c", _DIE_AT, *[str(a) for a in args]],
        env=env,
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=120,
    )


def read_until(proc, marker: bytes, seconds: float = 30.0) -> bytes:
    """What ``proc`` writes to its standard output until ``marker`` appears, or ``seconds``
    have passed (a read never waits past that: a process asking something else cannot hang
    the test)."""
    import os
    import select
    import time

    seen, deadline = b"", time.monotonic() + seconds
    while marker not in seen and time.monotonic() < deadline:
        if select.select([proc.stdout], [], [], 1.0)[0]:
            seen += os.read(proc.stdout.fileno(), 4096)
    return seen
