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
  disk's wait. The runs folder is there before the run, as it is at a bench after its first
  run; the run makes its own folder in it.
- **through the simulator**: the same run on the simulated calibrator (pyvisa-sim, in this
  process) and the real fsync, with the time inside every VISA write and query, every fsync and
  closing measured around the calls (the columns ``instrument``, ``fsync``, ``closing``,
  ``whole``). Taking those from the whole would also charge verirun with the timers' own cost
  and with what the simulator's work does to the processor's caches; the stand-in measures
  verirun's code alone.

A run's own time is split in two without timing any part of it (a timer around each step
would cost more than some steps). Runs of one point alternate with the runs of each size, and
**what each point adds** at N points is ``(own(N) - own(1)) / (N - 1)``, from runs made in the
same minutes. The **set-up** is the rest of the one-point run, what a run costs once whatever
its size: the run folder, its lock, the journal file, the start document with the procedure's
and the bench's texts, the signal handlers, the driver profile, the calibrator's identity and
error queue. Closing (the run record, written and returned typed, and the
certificate) is timed apart and shown apart.

The target is at most 0.25 ms per point at every size, and flat: the 10,000-point figure
within 1.3x of the 10-point one. It is checked against what each point adds, the cost of a
point. The set-up is a cost of the run, paid once whatever its size, and is printed as its own
figure; so is the whole run's own time divided by its points, which at 10 points carries a tenth
of the set-up in each point and at 10,000 points next to none of it.

Each figure is the least of the runs at its size, as ``timeit`` advises: a slower run is the
shared machine's doing (another process, a cold cache), not verirun's; the median of the whole
run is shown beside it.

The shared machine's speed changes from hour to hour (by up to twice here): the script times a
fixed piece of pure Python before and after (``reference_ms``), and the simulator's column is a
second witness. Figures of two runs compare only when those are alike.

Usage: python benchmarks/engine_cpu.py [--quick]
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import math
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
#: Own runs at each size: a small run is quick, and its least is the more often disturbed.
REPEATS = {10: 25, 100: 12, 1000: 7, 10000: 5}
#: Runs through the simulator at each size (each is several times an own run).
SIM_REPEATS = {10: 10, 100: 5, 1000: 3, 10000: 2}


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


def _closing(stack: contextlib.ExitStack, session, meter: CpuMeter) -> None:
    """Time closing with ``meter``: the run record (built, written and returned typed) and
    the certificate."""
    for name in ("close_record", "write_certificate"):
        stack.enter_context(patched(session, name, meter))


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
        _closing(stack, session, closing)
        (workdir / "runs").mkdir(parents=True)  # as at a bench after its first run
        gc.collect()
        start = time.process_time()
        # The driver and its profile are made in the time, as execute makes its own.
        calibrator = Calibrator(resource, load_profile(run.bench.file.calibrator.profile))
        _, finished, _ = run.run(workdir, calibrator=calibrator)
        total = time.process_time() - start
    return {"points": finished.record.summary.points, "own": total - closing.seconds}


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
        _closing(stack, session, closing)
        (workdir / "runs").mkdir(parents=True)  # as at a bench after its first run
        gc.collect()
        start = time.process_time()
        _, finished, _ = run.run(workdir)
        total = time.process_time() - start
    points = finished.record.summary.points
    return {
        "points": points,
        "total": total,
        "instrument": instrument.seconds,
        "disk": disk.seconds,
        "closing": closing.seconds,
    }


def measure(sizes, repeats: dict[int, int], sim_repeats: dict[int, int], root: Path) -> list[dict]:
    """Each size's figures. The own runs of a size alternate with runs of one point, so that
    what a point adds is taken from two runs made in the same minutes."""
    base = DryRun(_gen.generate(1, root / "gen-1"))
    own_run(base, root / "warm-1")
    results = []
    for n in sizes:
        run = DryRun(_gen.generate(n, root / f"gen-{n}"))
        one_run(run, root / f"warm-{n}")  # imports, template compiled, caches warm
        own_run(run, root / f"warm-own-{n}")
        samples, owns, ones = [], [], []
        for r in range(sim_repeats[n]):
            workdir = root / f"run-{n}-{r}"
            samples.append(one_run(run, workdir))
            shutil.rmtree(workdir, ignore_errors=True)
        for r in range(repeats[n]):
            for source, kept in ((base, ones), (run, owns)):
                workdir = root / f"own-{n}-{r}"
                kept.append(own_run(source, workdir))
                shutil.rmtree(workdir, ignore_errors=True)
        assert all(s["points"] == n for s in samples + owns), "a run did not measure every point"
        own = [s["own"] for s in owns]
        one_point = min(s["own"] for s in ones)
        results.append(
            {
                "n": n,
                "runs": repeats[n],
                "own": min(own),
                "own_median": _gen.median(own),
                "one_point": one_point,
                "point": (min(own) - one_point) / (n - 1),
                **{
                    key: min(s[key] for s in samples)
                    for key in ("total", "instrument", "disk", "closing")
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
            str(r["runs"]),
            f"{r['point'] * 1e3:.3f}",
            ms(r["own"], r["n"]),
            ms(r["own_median"], r["n"]),
            ms(r["instrument"], r["n"]),
            ms(r["disk"], r["n"]),
            ms(r["closing"], r["n"]),
            ms(r["total"], r["n"]),
        ]
        for r in results
    ]
    print(
        "verirun's own CPU (instant instrument and disk), ms per point: what each point adds to"
        " a run of one point | the whole run's own time per point (least, median of the runs).\n"
        "Through the simulator, least of the runs, ms per point: instrument (VISA + simulator) |"
        " fsync | closing (record and certificate) | whole call"
    )
    headers = ["N", "runs", "point", "own", "median", "instrument", "fsync", "closing", "whole"]
    print(_gen.table(headers, rows))

    def checked(label: str, per: list[float]) -> bool:
        worst, flat = max(per), per[-1] / per[0]
        print(
            f"{label}: worst size {worst:.3f} ms (target <= {TARGET_MS} ms)"
            f" {_gen.verdict(worst <= TARGET_MS)}; {results[-1]['n']:,} / {results[0]['n']:,}"
            f" points {flat:.2f} (target <= {FLAT}, flat) {_gen.verdict(flat <= FLAT)}"
        )
        return worst <= TARGET_MS and flat <= FLAT

    print()
    ok = checked("what each point adds", [r["point"] * 1e3 for r in results])
    whole = [r["own"] / r["n"] * 1e3 for r in results]
    print(
        "the whole run's own time per point (the set-up shared out; the target is per point):"
        f" {' / '.join(f'{ms:.3f}' for ms in whole)} ms"
    )
    setups = [(r["one_point"] - r["point"]) * 1e3 for r in results]
    print(
        f"a run of one point: {min(r['one_point'] for r in results) * 1e3:.2f}-"
        f"{max(r['one_point'] for r in results) * 1e3:.2f} ms; of it the set-up a run costs once:"
        f" {min(setups):.2f}-{max(setups):.2f} ms (a cost of the run, not of a point)"
    )
    return ok


def reference_ms(rounds: int = 7) -> float:
    """CPU ms of a fixed piece of pure Python, the least of ``rounds``: exact fractions summed,
    and a canonical JSON line hashed, as verirun's own work does at every point. It is the same
    code at every run of this script, so it tells a slower hour of a shared machine from slower
    code: compare verirun's figures only between runs whose reference is alike."""
    import hashlib
    import json
    from fractions import Fraction

    def work() -> None:
        total = Fraction(0)
        for i in range(1, 2001):
            total += Fraction(i, 1000) / 3
            line = json.dumps({"seq": i, "reading": float(total)}, sort_keys=True)
            hashlib.sha256(line.encode()).hexdigest()

    least = math.inf
    for _ in range(rounds):
        start = time.process_time()
        work()
        least = min(least, time.process_time() - start)
    return least * 1e3


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--quick", action="store_true", help="sizes 10 and 100 only, fewer repetitions"
    )
    args = parser.parse_args(argv)
    sizes = SIZES[:2] if args.quick else SIZES
    repeats = {n: 5 for n in sizes} if args.quick else REPEATS
    sim_repeats = {n: 2 for n in sizes} if args.quick else SIM_REPEATS
    root = Path(tempfile.mkdtemp(prefix="verirun-bench-cpu-"))
    try:
        before = reference_ms()
        report(measure(sizes, repeats, sim_repeats, root))
        after = reference_ms()
        print(
            f"the machine's speed: a fixed piece of pure Python took {before:.1f} ms before and"
            f" {after:.1f} ms after (see reference_ms)"
        )
    finally:
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
