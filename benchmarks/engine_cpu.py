"""verirun's own CPU time per point of a dry run, with the instrument and the disk taken out.

A dry run of the generated procedure (see ``_gen.py``) goes through ``session.execute`` with
scripted readings, a quiet console and a virtual clock, at N = 10, 100, 1,000 and 10,000 points,
twice:

- **own**: the calibrator's VISA resource is a stand-in that answers at once what the simulated
  calibrator answers (its identity, "no error" from the error queue, each setting read back as
  it was set), and ``os.fsync`` returns at once. The process CPU time of the call, less closing
  (building the run record and rendering the certificate, shown apart), is verirun's own work:
  planning, the window and uncertainty of each point, the decision, the driver's commands and
  its checks of every reply, the output guard, composing, validating and writing each journal
  document. Nothing of verirun is left out: only the instrument's side of each exchange and the
  disk's wait.
- **through the simulator**: the same run on the simulated calibrator (pyvisa-sim, in this
  process) and the real fsync, with the time inside every VISA write and query, every fsync and
  closing measured around the calls (the columns ``instrument``, ``fsync``, ``closing``,
  ``whole``). Taking those from the whole would also charge verirun with the timers' own cost
  and with what the simulator's work does to the processor's caches; the stand-in measures
  verirun's code alone.

The target is at most 0.25 ms per point at every size, and flat: the 10,000-point figure
within 1.3x of the 10-point one. A run's own time is also split into what it costs once
(making the run folder, its lock, the signal handlers, loading the driver profile, the start
document) and what each point adds: ``added`` at N points is ``(own(N) - own(10)) / (N - 10)``,
and the set-up is ``own(10)`` less ten points at the 100-point ``added``. The whole-run figure at
10 points carries a tenth of the set-up in each point.

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
def patched(target, name, meter):
    """``target.name`` timed by ``meter`` for the block (or replaced by it, if it is a function)."""
    real = getattr(target, name)
    setattr(target, name, meter.wrap(real) if isinstance(meter, CpuMeter) else meter)
    try:
        yield
    finally:
        setattr(target, name, real)


class InstantResource:
    """A VISA resource that answers at once as the simulated calibrator does (see the module
    docstring): its identity, an empty error queue, and every setting read back as set."""

    timeout = 2000

    def __init__(self, identity: str):
        self.identity = identity
        self.settings: dict[str, str] = {"OUTP": "OFF"}

    def write(self, command: str) -> None:
        name, _, value = command.partition(" ")
        if value:
            self.settings[name] = value

    def query(self, command: str) -> str:
        if command == "*IDN?":
            return self.identity
        if command == "SYST:ERR?":
            return '0,"No error"'
        return self.settings.get(command.rstrip("?"), "0")

    def close(self) -> None:
        pass


def _simulator_identity() -> str:
    import yaml

    device = yaml.safe_load(_gen.SIM_YAML.read_text(encoding="utf-8"))["devices"]["calibrator"]
    return next(d["r"] for d in device["dialogues"] if d["q"] == "*IDN?")


def own_run(run: DryRun, workdir: Path) -> dict:
    """One run with the stand-in resource and an instant fsync: own and closing CPU seconds."""
    import os

    import verirun.conduct as session
    from verirun.bench.calibrator import Calibrator
    from verirun.bench.profile import load_profile

    closing = CpuMeter()
    resource = InstantResource(_simulator_identity())
    with contextlib.ExitStack() as stack:
        stack.enter_context(patched(os, "fsync", lambda fd: None))
        stack.enter_context(patched(session, "close_record", closing))
        stack.enter_context(patched(session, "write_certificate", closing))
        gc.collect()
        start = time.process_time()
        # The driver and its profile are made in the time, as execute makes its own.
        calibrator = Calibrator(resource, load_profile(run.bench.file.calibrator.profile))
        _, finished, _ = run.run(workdir, calibrator=calibrator)
        total = time.process_time() - start
    return {
        "points": finished.record["summary"]["points"],
        "own": total - closing.seconds,
    }


def one_run(run: DryRun, workdir: Path) -> dict:
    """One run through the simulator: the CPU seconds of the whole call and of its parts."""
    import os

    import verirun.conduct as session
    from verirun.bench.calibrator import Calibrator

    instrument, disk, closing = CpuMeter(), CpuMeter(), CpuMeter()
    with contextlib.ExitStack() as stack:
        stack.enter_context(patched(Calibrator, "_write", instrument))
        stack.enter_context(patched(Calibrator, "_query", instrument))
        stack.enter_context(patched(session, "open_calibrator", instrument))
        stack.enter_context(patched(os, "fsync", disk))
        stack.enter_context(patched(session, "close_record", closing))
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
    }


def measure(sizes, repeats: int, root: Path) -> list[dict]:
    results = []
    for n in sizes:
        gen = _gen.generate(n, root / f"gen-{n}")
        run = DryRun(gen)
        one_run(run, root / f"warm-{n}")  # imports, template compiled, caches warm
        own_run(run, root / f"warm-own-{n}")
        samples, owns = [], []
        for r in range(repeats if n < 10000 else max(1, repeats // 2)):
            workdir = root / f"run-{n}-{r}"
            samples.append(one_run(run, workdir))
            shutil.rmtree(workdir, ignore_errors=True)
            owns.append(own_run(run, workdir))
            shutil.rmtree(workdir, ignore_errors=True)
        assert all(s["points"] == n for s in samples + owns), "a run did not measure every point"
        results.append(
            {
                "n": n,
                "own": _gen.median([s["own"] for s in owns]),
                **{
                    key: _gen.median([s[key] for s in samples])
                    for key in ("total", "instrument", "disk", "closing")
                },
            }
        )
    return results


def report(results: list[dict]) -> bool:
    def ms(seconds, n):
        return f"{seconds / n * 1e3:.3f}"

    first = results[0]

    def added(r) -> float | None:  # seconds each point adds beyond the first size's
        return (r["own"] - first["own"]) / (r["n"] - first["n"]) if r is not first else None

    rows = [
        [
            f"{r['n']:,}",
            ms(r["own"], r["n"]),
            "-" if added(r) is None else f"{added(r) * 1e3:.3f}",
            ms(r["instrument"], r["n"]),
            ms(r["disk"], r["n"]),
            ms(r["closing"], r["n"]),
            ms(r["total"], r["n"]),
        ]
        for r in results
    ]
    print(
        "CPU ms per point (medians): verirun's own (instant instrument and disk) | what each point"
        " adds | through the simulator: instrument (VISA + simulator) | fsync |"
        " record and certificate | whole call"
    )
    print(_gen.table(["N", "own", "added", "instrument", "fsync", "closing", "whole"], rows))
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
    if len(results) > 1:
        per_point = max(added(r) for r in results[1:]) * 1e3
        setup = (first["own"] - first["n"] * added(results[1])) * 1e3
        print(
            f"set-up per run: {setup:.2f} ms; what a point adds beyond the first {first['n']:,},"
            f" worst size: {per_point:.3f} ms (target <= {TARGET_MS} ms)"
            f" {_gen.verdict(per_point <= TARGET_MS)}"
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
