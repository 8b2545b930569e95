"""Peak memory (RSS) of the 10,000-point dry run and of regenerating 1,000 stored runs.

Every measurement runs in a new interpreter of its own, so peaks never mix; each child reads
its own peak with ``resource.getrusage`` and prints it. For the regeneration the child runs
``verirun certify`` in-process (the same code as the command); when it renders on a process
pool, the pool's workers are that child's children, and their largest peak is read with
``RUSAGE_CHILDREN`` once they have exited. The figure compared with the target is then the
child's own peak plus that largest worker peak times the number of workers (an upper bound of
what the batch holds at once).

Usage: python benchmarks/memory.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _gen  # noqa: E402

DRY_RUN_TARGET_MB = 150
CERTIFY_TARGET_MB = 300


def _peak_mb(who=resource.RUSAGE_SELF) -> float:
    return resource.getrusage(who).ru_maxrss / 1024  # kilobytes on Linux


# --- what each child does -----------------------------------------------------------------------


def child_idle() -> dict:
    """The interpreter with verirun's run modules and pyvisa imported, nothing run."""
    import pyvisa  # noqa: F401

    import verirun.certificate.render  # noqa: F401
    import verirun.conduct  # noqa: F401

    return {"peak_mb": _peak_mb()}


def child_dryrun(folder: Path, n: int) -> dict:
    from engine_overhead import DryRun

    gen = _gen.generate(n, folder / f"gen-{n}")
    dry = DryRun(gen)
    t = time.perf_counter()
    _, finished, _ = dry.run(folder / f"run-{n}")
    return {
        "peak_mb": _peak_mb(),
        "seconds": time.perf_counter() - t,
        "points": finished.record.summary.points,
    }


def child_certify(runs_file: Path, reports: Path) -> dict:
    from verirun.cli import main

    runs = runs_file.read_text(encoding="utf-8").split("\n")
    t = time.perf_counter()
    code = main(["certify", *runs, "--reports", str(reports)])
    seconds = time.perf_counter() - t
    made = len(list(reports.glob("*.html")))
    return {
        "peak_mb": _peak_mb(),
        "workers_peak_mb": _peak_mb(resource.RUSAGE_CHILDREN),
        "seconds": seconds,
        "code": code,
        "certificates": made,
    }


# --- the parent ---------------------------------------------------------------------------------


def in_child(*args: str) -> dict:
    done = subprocess.run(
        [sys.executable, __file__, "--child", *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    if done.returncode != 0:
        raise SystemExit(f"child {args} failed: {done.stderr[-1500:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def worker_count(runs: int) -> int:
    """How many processes ``verirun certify`` renders with (1 when it has no pool)."""
    try:
        from verirun.certificate import batch
    except ImportError:
        return 1
    if runs < getattr(batch, "POOL_THRESHOLD", 0):
        return 1
    return min(runs, os.cpu_count() or 1)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a 100-point dry run and 100 runs")
    parser.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        kind, rest = args.child[0], args.child[1:]
        result = {
            "idle": lambda: child_idle(),
            "dryrun": lambda: child_dryrun(Path(rest[0]), int(rest[1])),
            "certify": lambda: child_certify(Path(rest[0]), Path(rest[1])),
        }[kind]()
        print(json.dumps(result))
        return 0

    points, count = (100, 100) if args.quick else (10000, 1000)
    root = Path(tempfile.mkdtemp(prefix="verirun-bench-mem-"))
    try:
        idle = in_child("idle")
        print(f"  dry run of {points} points in a child process...", file=sys.stderr, flush=True)
        dry = in_child("dryrun", str(root / "dry"), str(points))

        print(f"  making {count} stored runs...", file=sys.stderr, flush=True)
        from certificates import make_folder

        runs = make_folder(count, root / "folder")
        runs_file = root / "runs.txt"
        runs_file.write_text("\n".join(map(str, runs)), encoding="utf-8")
        print(f"  certify {count} runs in a child process...", file=sys.stderr, flush=True)
        cert = in_child("certify", str(runs_file), str(root / "reports"))
        if cert["code"] != 0 or cert["certificates"] != count:
            raise SystemExit(f"certify did not render every certificate: {cert}")
        workers = worker_count(count)
        if workers > 1:
            total = cert["peak_mb"] + workers * cert["workers_peak_mb"]
            how = (
                f"{cert['peak_mb']:.0f} MB main"
                f" + {workers} x {cert['workers_peak_mb']:.0f} MB workers"
            )
        else:
            total, how = cert["peak_mb"], "one process"

        print(
            f"Peak RSS, each in its own process (an idle interpreter with verirun and pyvisa"
            f" imported: {idle['peak_mb']:.0f} MB)"
        )
        print(
            _gen.table(
                ["measurement", "peak MB", "how", "time s", "target MB", "ratio", "result"],
                [
                    [
                        f"dry run, {points} points",
                        f"{dry['peak_mb']:.0f}",
                        "one process",
                        f"{dry['seconds']:.1f}",
                        f"<= {DRY_RUN_TARGET_MB}",
                        f"{dry['peak_mb'] / DRY_RUN_TARGET_MB:.2f}",
                        _gen.verdict(dry["peak_mb"] <= DRY_RUN_TARGET_MB),
                    ],
                    [
                        f"verirun certify, {count} runs",
                        f"{total:.0f}",
                        how,
                        f"{cert['seconds']:.1f}",
                        f"<= {CERTIFY_TARGET_MB}",
                        f"{total / CERTIFY_TARGET_MB:.2f}",
                        _gen.verdict(total <= CERTIFY_TARGET_MB),
                    ],
                ],
            )
        )
        return 0
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
