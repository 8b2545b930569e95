"""The lab register against today's folder scan: listing runs, one item's history, rebuilding.

Prints, in one run of this script, each register figure beside the same job done by reading
the run folders (``verirun runs``' folder scan, and ``verirun verify`` for checking folders):

1. ``runs`` (the listing ``verirun runs`` prints, all rows, and filtered by one item) over
   100,000 registered runs on SQLite; target <= 0.5 s.
2. one item's history (``item_history``: query, pandas table, drift fits, the model's share of
   calibrations in tolerance: every run is of one model here, the worst case) among those
   100,000 runs; target <= 0.2 s.

(1) and (2) are timed in a fresh process each, as a command runs, after its imports (the
median of five calls after one to warm up).
3. ``register rebuild`` of 10,000 run folders into an empty register; target <= 60 s.

The folder scan is timed on the 10,000 folders of (3) and scaled by 10 to 100,000 runs (it is
linear in the number of folders: it reads each one). The 100,000 registered runs are written
straight into the tables from one real run's record (uid, item, date changed; records stored
whole), which takes a minute or two; the 10,000 folders are one real run's journal re-chained
with a new uid, item and date and closed into its record by the same functions as a run.

    python benchmarks/register.py            # the sizes above
    python benchmarks/register.py --quick    # 10,000 registered runs and 1,000 folders
"""

from __future__ import annotations

import datetime as dt
import random
import shutil
import sys
import tempfile
import time
import uuid
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _gen  # noqa: E402

LIST_TARGET, HISTORY_TARGET, REBUILD_TARGET = 0.5, 0.2, 60.0
ITEMS_PER_10 = 10  # each item is calibrated this many times


def one_run(root: Path) -> Path:
    """A real 5-point run on the simulated calibrator, recorded as a calibration."""
    from verirun.bench.config import load_bench
    from verirun.clock import VirtualClock
    from verirun.conduct import execute
    from verirun.console import QuietConsole
    from verirun.engine import RunContext
    from verirun.lab import load_lab
    from verirun.procedure.load import load_procedure
    from verirun.readings import ScriptedReadings

    gen = _gen.generate(5, root / "gen")
    lab = load_lab(_gen.LAB_YAML)
    context = RunContext(
        lab=lab.lab.model_dump(mode="json"),
        customer={"name": "Bench Customer", "address": []},
        item={"serial": "S-0", "asset": None, "condition": "As received.", "received": None},
        operator="bench",
        simulated=False,
        environment={"temperature_c": 23.0, "humidity_pct": 40.0},
    )
    finished = execute(
        procedure=load_procedure(gen.procedure),
        bench=load_bench(gen.bench),
        context=context,
        readings=ScriptedReadings(gen.readings),
        console=QuietConsole(),
        runs_dir=root / "seed",
        reports_dir=root / "reports",
        simulate=True,
        clock=VirtualClock(dt.datetime(2020, 1, 1, tzinfo=dt.timezone.utc)),
    )
    return finished.run_dir


def make_folders(seed: Path, root: Path, n: int) -> Path:
    """``n`` run folders: the seed's journal with a new uid, item and start time, re-chained."""
    from verirun.conduct import run_folder_name
    from verirun.record.build import build_record
    from verirun.record.journal import (
        GENESIS,
        JOURNAL_NAME,
        RECORD_NAME,
        dumps,
        line_hash,
        read_journal,
        write_record,
    )

    docs = read_journal(seed / JOURNAL_NAME).documents
    rng = random.Random(7)
    out = root / "folders"
    out.mkdir()
    start = dt.datetime(2016, 1, 1, tzinfo=dt.timezone.utc)
    for i in range(n):
        uid = uuid.UUID(int=rng.getrandbits(128)).hex
        when = start + dt.timedelta(hours=7 * i)
        stamp = when.strftime("%Y-%m-%dT%H:%M:%SZ")
        serial = f"S-{i % max(n // ITEMS_PER_10, 1)}"
        prev, lines, fresh = GENESIS, [], []
        for doc in docs:
            doc = {**doc, "prev": prev, "time": stamp}
            if doc["kind"] == "start":
                doc = {**doc, "uid": uid, "item": {**doc["item"], "serial": serial}}
            line = dumps(doc)
            prev = line_hash(line)
            lines.append(line)
            fresh.append(doc)
        folder = out / run_folder_name(serial, uid, when)
        folder.mkdir()
        (folder / JOURNAL_NAME).write_text("\n".join(lines) + "\n", encoding="utf-8")
        write_record(build_record(fresh), folder / RECORD_NAME)
    return out


def fill_register(register, seed: Path, n: int) -> None:
    """``n`` runs written straight into the tables from the seed's record (each stored whole)."""
    import hashlib

    from verirun.record.documents import record_document
    from verirun.record.journal import dumps, load_record
    from verirun.register.schema import items, points, records, runs
    from verirun.register.store import point_rows, run_row

    record = load_record(seed)
    rng = random.Random(11)
    start = dt.datetime(2016, 1, 1, tzinfo=dt.timezone.utc)
    batch = 5000
    for first in range(0, n, batch):
        run_rows, point_list, bodies, item_rows = [], [], [], []
        for i in range(first, min(first + batch, n)):
            uid = uuid.UUID(int=rng.getrandbits(128)).hex
            stamp = (start + dt.timedelta(minutes=53 * i)).strftime("%Y-%m-%dT%H:%M:%SZ")
            serial = f"S-{i % max(n // ITEMS_PER_10, 1)}"
            run = record.run.model_copy(update={"uid": uid, "started": stamp, "ended": stamp})
            item = record.item.model_copy(update={"serial": serial})
            copy = record.model_copy(update={"run": run, "item": item})
            row = run_row(copy, f"{stamp[:10]}-{serial}-{uid[:8]}")
            run_rows.append({**row, "id": i + 1})
            point_list.extend(point_rows(i + 1, copy))
            body = dumps(record_document(copy))
            bodies.append(
                {"run_id": i + 1, "body": body, "sha256": hashlib.sha256(body.encode()).hexdigest()}
            )
            if i < n // ITEMS_PER_10:
                item_rows.append(
                    {
                        "serial": serial,
                        "model": row["item_model"],
                        "revision": 1,
                        "entered": stamp,
                        "entered_by": "bench",
                        "interval_days": 365,
                    }
                )
        with register.engine.begin() as connection:
            connection.execute(runs.insert(), run_rows)
            connection.execute(points.insert(), point_list)
            connection.execute(records.insert(), bodies)
            if item_rows:
                connection.execute(items.insert(), item_rows)


def best(call, repeats: int = 5) -> float:
    """The median time of ``repeats`` calls after one to warm up."""
    from certificates import timed

    return timed(call, repeats)


_CHILD = """
import datetime as dt, sys, time
sys.path.insert(0, {here!r})
from register import best
from verirun.register.db import open_register
from verirun.register.history import item_history
from verirun.register.listing import list_runs
register = open_register({db!r})
print(best(lambda: {call}))
"""


def in_child(db: Path, call: str) -> float:
    """The median time of ``call`` in a fresh process (as a command runs), after its imports."""
    import subprocess

    code = _CHILD.format(here=str(Path(__file__).resolve().parent), db=str(db), call=call)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return float(out.stdout.strip().splitlines()[-1])


def main(argv: list[str]) -> int:
    quick = "--quick" in argv
    registered, folders_n = (10_000, 1_000) if quick else (100_000, 10_000)
    scale = registered / folders_n
    from verirun.record.listing import list_runs as scan_runs
    from verirun.record.verify import problems
    from verirun.register.db import open_register
    from verirun.register.history import item_history
    from verirun.register.rebuild import rebuild

    root = Path(tempfile.mkdtemp(prefix="verirun-register-bench-"))
    try:
        seed = one_run(root)
        t = time.perf_counter()
        folders = make_folders(seed, root, folders_n)
        print(f"wrote {folders_n:,} run folders in {time.perf_counter() - t:.1f} s")
        t = time.perf_counter()
        big = open_register(str(root / "big.db"))
        fill_register(big, seed, registered)
        print(
            f"wrote {registered:,} registered runs in {time.perf_counter() - t:.1f} s"
            f" ({(root / 'big.db').stat().st_size / 2**20:,.0f} MiB)"
        )

        big.engine.dispose()
        listed = in_child(root / "big.db", "list_runs(register)")
        one_item = in_child(root / "big.db", "list_runs(register, item='S-3')")
        history = in_child(
            root / "big.db", "item_history(register, serial='S-3', today=dt.date(2030, 1, 1))"
        )
        scan = best(lambda: scan_runs(folders), 1) * scale
        scan_item = best(lambda: scan_runs(folders, item="S-3"), 1) * scale
        calibrations = (
            item_history(
                open_register(str(root / "big.db")), serial="S-3", today=dt.date(2030, 1, 1)
            )
            .table["uid"]
            .nunique()
        )

        def scan_history():  # what a history from the folders would read: every record
            import json

            for folder in sorted(folders.iterdir()):
                record = json.loads((folder / "record.json").read_text(encoding="utf-8"))
                if record["item"]["serial"] == "S-3":
                    pass

        history_scan = best(scan_history, 1) * scale

        fresh = open_register(str(root / "fresh.db"))
        t = time.perf_counter()
        out = rebuild(fresh, folders)
        rebuilt = time.perf_counter() - t
        assert out.stored == folders_n and not out.failed, out.failed
        t = time.perf_counter()
        bad = sum(bool(problems(p)) for p in sorted(folders.iterdir()))
        verify = time.perf_counter() - t
        assert bad == 0

        n, f = f"{registered:,}", f"{folders_n:,}"
        rows = [
            [
                f"runs, all {n} rows",
                f"{listed:.3f}",
                f"{scan:.1f} (scaled from {f})",
                f"{scan / listed:,.0f}x",
                f"<= {LIST_TARGET}",
                _gen.verdict(listed <= LIST_TARGET),
            ],
            [
                f"runs --item (of {n})",
                f"{one_item:.4f}",
                f"{scan_item:.1f} (scaled from {f})",
                f"{scan_item / one_item:,.0f}x",
                f"<= {LIST_TARGET}",
                _gen.verdict(one_item <= LIST_TARGET),
            ],
            [
                f"history of one item ({calibrations} calibrations among {n})",
                f"{history:.4f}",
                f"{history_scan:.1f} (scaled from {f})",
                f"{history_scan / history:,.0f}x",
                f"<= {HISTORY_TARGET}",
                _gen.verdict(history <= HISTORY_TARGET),
            ],
            [
                f"rebuild from {f} folders (verify each, store)",
                f"{rebuilt:.1f}",
                f"{verify:.1f} (verify {f})",
                f"{verify / rebuilt:.2f}x",
                f"<= {REBUILD_TARGET}" if not quick else "(info)",
                _gen.verdict(rebuilt <= REBUILD_TARGET * folders_n / 10_000),
            ],
        ]
        print(
            _gen.table(
                ["figure", "register, s", "folder scan, s", "scan / register", "target, s", ""],
                rows,
            )
        )
    finally:
        from verirun.register.db import forget_open

        forget_open()
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
