"""Certificates: render time by size, and regenerating a folder of stored runs.

1. Records of 10, 100 and 1,000 points are made by one dry run each (as in engine_overhead.py);
   then ``render_html(record)`` alone is timed, median of several after a warm-up.
2. One 30-point run is copied into 1,000 run folders, each with its own uid and item serial
   (the journal is re-chained and the record patched to match; a sample is checked against a
   record rebuilt from its journal). ``verirun certify`` is then run as a command over the first
   100, 300 and 1,000 of them, with the processes the command chooses by default and with one
   process, and the wall time per certificate is compared across folder sizes. Where the
   installed ``verirun certify`` has no ``--workers`` option, a two-process pool built in this
   script (a prototype, not verirun code) stands in for the parallel figure.
3. The cost of one certificate of the folder is split into its parts (in-process).

Usage: python benchmarks/certificates.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _gen  # noqa: E402
from engine_overhead import DryRun  # noqa: E402

RENDER_SIZES = (10, 100, 1000)
QUICK_RENDER_SIZES = (10, 100)
FOLDER_SIZES = (100, 300, 1000)
QUICK_FOLDER_SIZES = (10, 100)
SINGLE_SIZES = (100, 300)  # one-process runs (slow: the largest is left out)
QUICK_SINGLE_SIZES = (10, 100)
RENDER_TARGET = 1.0  # s, a 1,000-point certificate
FOLDER_TARGET = 30.0  # s, 1,000 runs on 2 cores
FLAT_TARGET = 1.25  # per-certificate time, largest folder over smallest


def verirun_command() -> list[str]:
    script = Path(sys.executable).with_name("verirun")
    return [str(script)] if script.exists() else [sys.executable, "-m", "verirun"]


def timed(call, repeats: int) -> float:
    call()
    samples = []
    for _ in range(repeats):
        t = time.perf_counter()
        call()
        samples.append(time.perf_counter() - t)
    return _gen.median(samples)


# --- 1. render time by size ---------------------------------------------------------------------


def render_sizes(sizes, root: Path) -> list[list[str]]:
    from verirun.certificate.render import render_html

    rows = []
    for n in sizes:
        dry = DryRun(_gen.generate(n, root / f"render-{n}"))
        _, finished, _ = dry.run(root / f"render-{n}" / "run")
        record = finished.record
        repeats = 5 if n >= 1000 else 9
        seconds = timed(lambda: render_html(record), repeats)
        size = len(render_html(record).encode("utf-8"))
        target = f"<= {RENDER_TARGET} s" if n == 1000 else ""
        result = _gen.verdict(seconds <= RENDER_TARGET) if n == 1000 else ""
        rows.append(
            [
                str(n),
                f"{seconds * 1e3:.1f}",
                f"{seconds / n * 1e6:.0f}",
                f"{size / 1024:.0f}",
                target,
                f"{seconds / RENDER_TARGET:.2f}" if n == 1000 else "",
                result,
            ]
        )
    return rows


# --- 2. a folder of stored runs -----------------------------------------------------------------


def make_folder(count: int, root: Path) -> list[Path]:
    """``count`` copies of one 30-point run, each with its own uid and serial; returns the
    folders."""
    from verirun.record.build import build_record_document
    from verirun.record.journal import (
        JOURNAL_NAME,
        RECORD_NAME,
        dumps,
        line_hash,
        load_record_document,
        read_journal,
    )

    dry = DryRun(_gen.generate(30, root / "source"))
    _, finished, _ = dry.run(root / "source" / "run")
    docs = read_journal(finished.run_dir / JOURNAL_NAME).documents
    record = load_record_document(finished.run_dir / RECORD_NAME)
    base_uid = record["run"]["uid"]
    folder = root / "stored"
    runs = []
    for i in range(count):
        uid = f"{i:08x}{base_uid[8:]}"  # the certificate number holds the first 8 characters
        serial = f"BENCH-{i:05d}"
        lines, prev = [], "0" * 64
        for seq, doc in enumerate(docs):
            body = {k: v for k, v in doc.items() if k not in ("seq", "prev")}
            if seq == 0:
                body = {**body, "uid": uid, "item": {**body["item"], "serial": serial}}
            line = dumps({**body, "seq": seq, "prev": prev})
            lines.append(line)
            prev = line_hash(line)
        copy = json.loads(json.dumps(record))
        copy["run"]["uid"] = uid
        copy["item"]["serial"] = serial
        copy["run"]["journal_sha256_last"] = prev
        run = folder / f"run-{i:05d}"
        run.mkdir(parents=True)
        (run / JOURNAL_NAME).write_text("\n".join(lines) + "\n", encoding="utf-8")
        (run / RECORD_NAME).write_text(
            json.dumps(copy, sort_keys=True, ensure_ascii=False, indent=1) + "\n", encoding="utf-8"
        )
        runs.append(run)
    for run in (runs[0], runs[len(runs) // 2], runs[-1]):  # the copies must verify
        journal = run / JOURNAL_NAME
        rebuilt = build_record_document(read_journal(journal).documents, str(journal))
        if rebuilt != load_record_document(run / RECORD_NAME):
            raise AssertionError(f"{run}: the copied record does not match its journal")
    return runs


def certify_command(runs: list[Path], reports: Path, workers: int | None) -> float:
    command = verirun_command() + ["certify", *map(str, runs), "--reports", str(reports)]
    if workers is not None:
        command += ["--workers", str(workers)]
    t = time.perf_counter()
    done = subprocess.run(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    seconds = time.perf_counter() - t
    made = len(list(reports.glob("*.html")))
    if done.returncode != 0 or made != len(runs):
        raise SystemExit(
            f"verirun certify failed ({done.returncode}, {made} of {len(runs)} certificates):"
            f" {done.stderr[-800:]}"
        )
    return seconds


def _prototype_one(job):
    from verirun.certificate.render import write_certificate
    from verirun.record.journal import load_record

    run, reports = job
    return str(write_certificate(load_record(run), reports))


def prototype_pool(runs: list[Path], reports: Path, workers: int = 2) -> float:
    """PROTOTYPE (benchmark code, not verirun): load + render + write on a process pool."""
    from concurrent.futures import ProcessPoolExecutor

    t = time.perf_counter()
    with ProcessPoolExecutor(max_workers=workers) as pool:
        list(
            pool.map(
                _prototype_one,
                [(run, reports) for run in runs],
                chunksize=max(1, len(runs) // (workers * 8)),
            )
        )
    return time.perf_counter() - t


def has_workers_option() -> bool:
    done = subprocess.run(verirun_command() + ["certify", "--help"], capture_output=True, text=True)
    return "--workers" in done.stdout


def folder_runs(runs: list[Path], sizes, single_sizes, root: Path) -> tuple[list[list[str]], dict]:
    workers_option = has_workers_option()
    certify_command(runs[:5], root / "reports-warm", None)  # warm-up
    timings: dict[tuple[str, int], float] = {}
    for n in sizes:
        print(f"  certify {n} runs (default processes)", file=sys.stderr, flush=True)
        timings[("default", n)] = certify_command(runs[:n], root / f"reports-default-{n}", None)
        if workers_option and n in single_sizes:
            print(f"  certify {n} runs (--workers 1)", file=sys.stderr, flush=True)
            timings[("single", n)] = certify_command(runs[:n], root / f"reports-single-{n}", 1)
        if not workers_option:
            timings[("prototype", n)] = prototype_pool(runs[:n], root / f"reports-proto-{n}")
    rows = []
    for n in sizes:
        default = timings[("default", n)]
        row = [str(n), f"{default:.2f}", f"{default / n * 1e3:.1f}"]
        other = timings.get(("single", n)) or timings.get(("prototype", n))
        row += [
            f"{other:.2f}" if other else "-",
            f"{other / n * 1e3:.1f}" if other else "-",
            f"{other / default:.2f}" if other else "-",
        ]
        rows.append(row)
    return rows, {"timings": timings, "workers_option": workers_option}


def split_one(run: Path, root: Path) -> list[list[str]]:
    """Where the time of one certificate of the folder goes (in-process, median of 15)."""
    from verirun.certificate.render import render_html
    from verirun.record.journal import JOURNAL_NAME, RECORD_NAME, load_record, read_journal

    parts = []
    record = load_record(run / RECORD_NAME)
    try:
        from verirun.record import verify as integrity

        parts.append(
            (
                "verify: rebuild the record from the journal and compare",
                timed(lambda: integrity.problems(run), 15),
            )
        )
    except ImportError:
        pass
    from verirun.record.build import build_record

    docs = read_journal(run / JOURNAL_NAME).documents
    parts.append(
        (
            "  of which build_record (parse procedure + bench text, plan, evaluate)",
            timed(lambda: build_record(docs, "journal"), 15),
        )
    )
    parts.append(("load record.json", timed(lambda: load_record(run / RECORD_NAME), 15)))
    parts.append(("render_html", timed(lambda: render_html(record), 15)))
    out = root / "split"
    out.mkdir(exist_ok=True)
    try:
        from verirun.certificate.batch import certify_one

        parts.append(
            (
                "certify_one (all of it, as each worker does)",
                timed(lambda: certify_one(run, out), 15),
            )
        )
    except ImportError:
        pass
    return [[name, f"{seconds * 1e3:.1f}"] for name, seconds in parts]


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="sizes 10 and 100 only")
    args = parser.parse_args(argv)
    render, sizes, single = (
        (QUICK_RENDER_SIZES, QUICK_FOLDER_SIZES, QUICK_SINGLE_SIZES)
        if args.quick
        else (RENDER_SIZES, FOLDER_SIZES, SINGLE_SIZES)
    )
    root = Path(tempfile.mkdtemp(prefix="verirun-bench-cert-"))
    started = time.perf_counter()
    try:
        print("render_html(record) alone, median (records made by one dry run each)")
        print(
            _gen.table(
                ["points", "ms", "us/point", "KiB", "target", "ratio", "result"],
                render_sizes(render, root),
            )
        )

        t = time.perf_counter()
        runs = make_folder(max(sizes), root)
        print(
            f"\nMade {len(runs)} stored 30-point runs in {time.perf_counter() - t:.1f} s"
            f" (copies verified against their journals); {os.cpu_count()} cores"
        )
        rows, info = folder_runs(runs, sizes, single, root)
        other = "--workers 1" if info["workers_option"] else "PROTOTYPE 2-process pool"
        print(
            f"\nverirun certify <folder>/* as a command, wall time (one run each);"
            f" default processes vs {other}"
        )
        print(
            _gen.table(
                ["runs", "default s", "ms/cert", f"{other} s", "ms/cert", "ratio to default"], rows
            )
        )

        timings = info["timings"]
        largest, smallest = max(sizes), min(sizes)
        total = timings[("default", largest)]
        per_big = total / largest
        per_small = timings[("default", smallest)] / smallest
        growth = per_big / per_small
        summary = [
            [
                f"{largest} runs, default processes",
                f"{total:.1f} s",
                f"<= {FOLDER_TARGET:.0f} s",
                f"{total / FOLDER_TARGET:.2f}",
                _gen.verdict(total <= FOLDER_TARGET),
            ],
            [
                f"per-certificate time, {largest} over {smallest} runs",
                f"{growth:.2f}",
                f"<= {FLAT_TARGET}",
                f"{growth / FLAT_TARGET:.2f}",
                _gen.verdict(growth <= FLAT_TARGET),
            ],
        ]
        single_sizes = [n for n in sizes if ("single", n) in timings]
        if single_sizes:
            n = max(single_sizes)
            gain = timings[("single", n)] / timings[("default", n)]
            summary.append(
                [f"gain of the pool over one process at {n} runs", f"{gain:.2f}x", "(info)", "", ""]
            )
            estimate = timings[("single", n)] / n * largest
            summary.append(
                [
                    f"{largest} runs in one process (from {n})",
                    f"~{estimate:.0f} s",
                    "(info)",
                    "",
                    "",
                ]
            )
        print()
        print(_gen.table(["figure", "measured", "target", "ratio", "result"], summary))

        print("\nOne certificate of the folder, in-process, ms (median of 15)")
        print(_gen.table(["part", "ms"], split_one(runs[0], root)))
        print(f"\n(total benchmark time {time.perf_counter() - started:.0f} s)")
        return 0
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
