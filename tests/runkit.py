"""Small runs for the tests: the test-scenario procedure and bench of ``tests/data/steps``,
variants of them written into a test's folder, one way to build a run in-process
(:func:`build_run`, the ``make_run`` fixture), the command line run in-process or as a real
process that can be stopped dead at a chosen moment or typed at on a pseudo-terminal
(:class:`Terminal`), and the check of journal lines against the shipped schema."""

from __future__ import annotations

import datetime as dt
import json
import os
import select
import subprocess
import sys
import textwrap
import time
from pathlib import Path

from verirun.cli import main
from verirun.record.journal import read_journal

DATA = Path(__file__).resolve().parent / "data"
DEMO = Path(__file__).resolve().parents[1] / "verirun" / "demo"
STEPS = DATA / "steps"
STORED = STEPS / "stored"
PROCEDURE = STEPS / "procedure.yaml"
BENCH = STEPS / "bench.yaml"
READINGS = STEPS / "readings.csv"
LAB = STEPS / "lab.yaml"

#: When a test's run starts unless it says otherwise (the virtual clock's start).
START = dt.datetime(2026, 12, 1, tzinfo=dt.timezone.utc)


def sim_resources(folder: Path, *, count: int = 1, timeout: int = 300) -> list:
    """``count`` VISA handles on one fresh simulated calibrator (its own copy of the device
    file, in ``folder / "sim"``): one for the driver, the others to probe the device itself."""
    import pyvisa

    from verirun.bench.sim import SIM_RESOURCE, sim_library

    manager = pyvisa.ResourceManager(sim_library(folder / "sim"))
    return [
        manager.open_resource(
            SIM_RESOURCE, read_termination="\n", write_termination="\n", timeout=timeout
        )
        for _ in range(count)
    ]


def demo_run() -> dict:
    """The demo run as the tests make it, as keywords of :func:`build_run`: the demo's
    procedure, bench and lab, the scripted readings of ``tests/data/qm40-readings.csv``, one
    customer and item, a fixed start (2026-12-01 09:00 UTC) and run uid."""
    from verirun.clock import VirtualClock

    return dict(
        procedure=DEMO / "qm40-analog-multimeter.yaml",
        bench=DEMO / "bench-sim.yaml",
        lab=DEMO / "lab.yaml",
        readings=DATA / "qm40-readings.csv",
        customer="Test customer",
        item={"serial": "SN-1", "asset": None, "condition": "as new"},
        operator="tester",
        clock=VirtualClock(dt.datetime(2026, 12, 1, 9, 0, tzinfo=dt.timezone.utc)),
        uid="0123456789abcdef0123456789abcdef",
    )


def build_run(
    *,
    runs_dir: Path,
    reports_dir: Path | None = None,
    procedure=PROCEDURE,
    bench=BENCH,
    readings=READINGS,
    console=None,
    lab=LAB,
    customer: str = "C",
    item: dict | str = "S",
    operator: str = "op",
    simulated: bool = True,
    environment: dict | None = None,
    as_found: dict | None = None,
    clock=None,
    uid: str | None = None,
    calibrator=None,
):
    """One run through :func:`verirun.conduct.execute` on the simulated calibrator; returns
    what it returns (``Finished``) and lets whatever it raises through.

    ``procedure``, ``bench`` and ``lab`` are files or what was loaded from them (``lab`` also
    the lab's own fields); ``readings`` is a CSV of scripted readings, a reading source, or
    ``None`` for the console (what the operator types); ``console`` is a quiet one unless
    given; ``item`` is its fields or just a serial; ``clock`` is a virtual clock at
    :data:`START` unless given; ``calibrator`` is a driver, a VISA resource to drive with the
    scpi-generic profile, or ``None`` for the one ``execute`` opens itself. Reports go beside
    ``runs_dir`` unless ``reports_dir`` says otherwise. ``simulated=False`` records the run as a
    calibration (not a dry run), although the calibrator it drives is still the simulated one.
    """
    from verirun.bench.calibrator import Calibrator
    from verirun.bench.config import load_bench
    from verirun.clock import VirtualClock
    from verirun.conduct import execute
    from verirun.console import QuietConsole
    from verirun.engine import RunContext
    from verirun.lab import load_lab
    from verirun.procedure.load import load_procedure
    from verirun.readings import ScriptedReadings

    if isinstance(procedure, (str, Path)):
        procedure = load_procedure(procedure)
    if isinstance(bench, (str, Path)):
        bench = load_bench(bench)
    if isinstance(lab, (str, Path)):
        lab = load_lab(lab).lab.model_dump(mode="json")
    console = QuietConsole() if console is None else console
    if readings is None:
        readings = console
    elif isinstance(readings, (str, Path)):
        readings = ScriptedReadings(readings)
    if calibrator is not None and not isinstance(calibrator, Calibrator):
        calibrator = Calibrator(calibrator, "scpi-generic")
    context = RunContext(
        lab=lab,
        customer={"name": customer, "address": []},
        item={"serial": item} if isinstance(item, str) else item,
        operator=operator,
        simulated=simulated,
        environment=environment or {},
        as_found=as_found,
    )
    return execute(
        procedure=procedure,
        bench=bench,
        context=context,
        readings=readings,
        console=console,
        runs_dir=runs_dir,
        reports_dir=reports_dir or Path(runs_dir).parent / "reports",
        simulate=True,
        clock=clock or VirtualClock(START),
        uid=uid,
        calibrator=calibrator,
    )


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


def rechained(docs: list[dict]) -> str:
    """The documents as a journal with a whole chain (a forger can rebuild an unkeyed chain)."""
    from verirun.record.journal import GENESIS, dumps, line_hash

    prev, lines = GENESIS, []
    for seq, doc in enumerate(docs):
        line = dumps({**doc, "seq": seq, "prev": prev})
        prev = line_hash(line)
        lines.append(line)
    return "\n".join(lines) + "\n"


def simulated_run_args(
    folder: Path,
    procedure: Path = DEMO / "qm40-analog-multimeter.yaml",
    bench: Path = DEMO / "bench-sim.yaml",
    readings: Path = DATA / "qm40-readings.csv",
    *,
    serial: str = "S",
    customer: str = "C",
    reports: str = "reports",
) -> list[str]:
    """The words after ``verirun`` of a run of ``procedure`` on ``bench``'s simulated calibrator
    with the scripted ``readings`` (the demo's, unless given); runs go into ``folder / "runs"``,
    certificates into ``folder / reports``."""
    return [
        "run",
        str(procedure),
        "--bench",
        str(bench),
        "--simulate",
        "--readings",
        str(readings),
        "--serial",
        serial,
        "--customer",
        customer,
        "--runs",
        str(Path(folder) / "runs"),
        "--reports",
        str(Path(folder) / reports),
    ]


def resume_to_close(tmp_path: Path, run_dir: Path) -> int:
    """`verirun resume` given no readings (had it anything to measure, it would stop at the
    prompt): it can only close the run and write its certificate; the exit code."""
    return cli(
        "resume",
        run_dir,
        "--readings",
        readings_file(tmp_path, []),
        "--reports",
        tmp_path / "reports",
    )


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
""")  # noqa: E501


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


def fits_the_journal_schema(docs):
    """Every document fits the shipped JSON Schema of a journal line and its model."""
    import json

    import jsonschema

    from verirun.record.documents import validate_document

    schema = json.loads(
        (
            Path(__file__).resolve().parents[1] / "verirun" / "schema" / "journal.schema.json"
        ).read_text(encoding="utf-8")
    )
    for doc in docs:
        jsonschema.validate(doc, schema, cls=jsonschema.Draft202012Validator)
        validate_document(doc)


class Terminal:
    """A process on a pseudo-terminal: read its output until a text shows, type a line."""

    def __init__(self, args, cwd, columns=100):
        import fcntl
        import pty
        import struct
        import termios

        self.master, slave = pty.openpty()
        fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 40, columns, 0, 0))
        env = {k: v for k, v in os.environ.items() if k not in ("COLUMNS", "LINES")}
        env["TERM"] = "xterm"
        self.proc = subprocess.Popen(
            args, stdin=slave, stdout=slave, stderr=slave, cwd=cwd, env=env, close_fds=True
        )
        os.close(slave)
        self.seen = ""

    def expect(self, text, timeout=30.0):
        end = time.monotonic() + timeout
        while text not in self.seen:
            left = end - time.monotonic()
            if left <= 0:
                raise AssertionError(
                    f"{text!r} did not show; the terminal showed:\n{self.seen[-2000:]}"
                )
            ready, _, _ = select.select([self.master], [], [], left)
            if ready:
                try:
                    chunk = os.read(self.master, 65536)
                except OSError:
                    chunk = b""
                if not chunk:
                    raise AssertionError(
                        f"{text!r} did not show before the end:\n{self.seen[-2000:]}"
                    )
                self.seen += chunk.decode("utf-8", "replace")
        index = self.seen.index(text) + len(text)
        shown, self.seen = self.seen[:index], self.seen[index:]
        return shown

    def type(self, line):
        os.write(self.master, (line + "\r").encode())

    def close(self):
        try:
            self.proc.wait(timeout=30)
        finally:
            os.close(self.master)
        return self.proc.returncode


def undescribed_fields(schema: dict, root: str) -> list[str]:
    """Every property of a JSON Schema (pydantic's, with ``$defs``) that does not say what it
    means: it has no description, and neither has the part it refers to (a ``$ref``, alone or
    beside ``null`` in an ``anyOf``), as ``Part.field``."""
    defs = schema.get("$defs", {})

    def described(field: dict) -> bool:
        if "description" in field:
            return True
        refs = [field] + field.get("anyOf", []) + field.get("allOf", [])
        named = [r["$ref"].rsplit("/", 1)[-1] for r in refs if "$ref" in r]
        return bool(named) and all("description" in defs.get(name, {}) for name in named)

    missing = []
    for where, part in [(root, schema), *defs.items()]:
        for name, field in part.get("properties", {}).items():
            if not described(field):
                missing.append(f"{where}.{name}")
    return missing
