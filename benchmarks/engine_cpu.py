"""verirun's own CPU time per point of a dry run, with the instrument and the disk taken out.

A dry run of the generated procedure (see ``_gen.py``) goes through ``session.execute`` on the
simulated calibrator, with scripted readings, a quiet console and a virtual clock, at N = 10,
100, 1,000 and 10,000 points. The process CPU time of the whole call is measured, and from it
are taken out, each measured the same way around its calls:

- the instrument: every VISA write and query (``Calibrator._write`` / ``_query``, through PyVISA
  into the simulator, which runs in this process) and opening the calibrator;
- the disk: every ``os.fsync``;
- closing: building the run record and rendering the certificate (shown apart, per point).

What is left is verirun's own work in the run loop: planning, the window and uncertainty of each
point, the decision, the console, composing and validating each journal document. The target is
at most 0.25 ms per point at every size, and flat: the 10,000-point figure within 1.3x of the
10-point one.

Usage: python benchmarks/engine_cpu.py [--quick]
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _gen  # noqa: E402
from engine_overhead import DryRun  # noqa: E402

SIZES = (10, 100, 1000, 10000)
TARGET_MS = 0.25
FLAT = 1.3


class CpuMeter:
    """Adds up the process CPU time spent inside the wrapped callables."""

    def __init__(self):
        self.seconds = 0.0
        self._depth = 0

    def wrap(self, function):
        def timed(*args, **kwargs):
            if self._depth:  # a wrapped call inside another: counted once, by the outer one
                return function(*args, **kwargs)
            self._depth += 1
            start = time.process_time()
            try:
                return function(*args, **kwargs)
            finally:
                self.seconds += time.process_time() - start
                self._depth -= 1

        return timed


@contextlib.contextmanager
def patched(target, name, meter: CpuMeter):
    real = getattr(target, name)
    setattr(target, name, meter.wrap(real))
    try:
        yield
    finally:
        setattr(target, name, real)


def one_run(run: DryRun, workdir: Path) -> dict:
    import os

    import verirun.conduct as session
    from verirun.bench.calibrator import Calibrator

    instrument, disk, closing = CpuMeter(), CpuMeter(), CpuMeter()
    with contextlib.ExitStack() as stack:
        stack.enter_context(patched(Calibrator, "_write", instrument))
        stack.enter_context(patched(Calibrator, "_query", instrument))
        stack.enter_context(patched(session, "open_calibrator", instrument))
        stack.enter_context(patched(os, "fsync", disk))
        stack.enter_context(patched(session, "close_run", closing))
        stack.enter_context(patched(session, "write_certificate", closing))
        gc.collect()
        start = time.process_time()
        _, finished, _ = run.run(workdir)
        total = time.process_time() - start
    points = finished.record["summary"]["points"]
    return {
        "points": points,
        "total": total,
        "instrument": instrument.seconds,
        "disk": disk.seconds,
        "closing": closing.seconds,
        "own": total - instrument.seconds - disk.seconds - closing.seconds,
    }


def measure(sizes, repeats: int, root: Path) -> list[dict]:
    results = []
    for n in sizes:
        gen = _gen.generate(n, root / f"gen-{n}")
        run = DryRun(gen)
        one_run(run, root / f"warm-{n}")  # imports, template compiled, caches warm
        samples = []
        for r in range(repeats if n < 10000 else max(1, repeats // 2)):
            workdir = root / f"run-{n}-{r}"
            samples.append(one_run(run, workdir))
            shutil.rmtree(workdir, ignore_errors=True)
        assert all(s["points"] == n for s in samples), "a run did not measure every point"
        results.append(
            {
                "n": n,
                **{
                    key: _gen.median([s[key] for s in samples])
                    for key in ("total", "instrument", "disk", "closing", "own")
                },
            }
        )
    return results


def report(results: list[dict]) -> bool:
    def ms(seconds, n):
        return f"{seconds / n * 1e3:.3f}"

    rows = [
        [
            f"{r['n']:,}",
            ms(r["own"], r["n"]),
            ms(r["instrument"], r["n"]),
            ms(r["disk"], r["n"]),
            ms(r["closing"], r["n"]),
            ms(r["total"], r["n"]),
        ]
        for r in results
    ]
    print(
        "CPU ms per point (medians): verirun's own | instrument (VISA + simulator) | fsync |"
        " record and certificate | whole call"
    )
    print(_gen.table(["N", "own", "instrument", "fsync", "closing", "whole"], rows))
    worst = max(r["own"] / r["n"] for r in results) * 1e3
    flat = (results[-1]["own"] / results[-1]["n"]) / (results[0]["own"] / results[0]["n"])
    ok_target, ok_flat = worst <= TARGET_MS, flat <= FLAT
    print(
        f"\nverirun's own CPU per point, worst size: {worst:.3f} ms (target <= {TARGET_MS} ms)"
        f" {_gen.verdict(ok_target)}"
    )
    print(
        f"per point, {results[-1]['n']:,} / {results[0]['n']:,} points: {flat:.2f} (target <= {FLAT},"
        f" flat) {_gen.verdict(ok_flat)}"
    )
    return ok_target and ok_flat


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--quick", action="store_true", help="sizes 10 and 100 only, fewer repetitions"
    )
    args = parser.parse_args(argv)
    sizes, repeats = (SIZES[:2], 3) if args.quick else (SIZES, 5)
    root = Path(tempfile.mkdtemp(prefix="verirun-bench-cpu-"))
    try:
        report(measure(sizes, repeats, root))
    finally:
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
