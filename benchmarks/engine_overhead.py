"""Engine overhead: a verirun dry run against a hand-written PyVISA loop doing the same work.

For each size N the generated procedure is run two ways on the simulated calibrator:

- **verirun**: ``session.execute`` in-process, with the driver on a fresh copy of the simulator's
  device file, scripted readings, a quiet console, a virtual clock and the journal on. The time
  covers building the reading source and the whole of ``execute`` (open the calibrator, run,
  close the journal into the record, render the certificate); loading the procedure, bench and
  lab files is timed separately.
- **baseline**: the script a technician might write: a plain PyVISA loop on a fresh copy of
  the same device file that sends the same commands in the same order (error-queue query after
  every setting, output read-back after every standby), computes each window inline with the
  same formulas and appends and fsyncs one JSON line per point.

Before timing, both are run once at a small size with every command recorded, and the two
command sequences and the verdicts are checked to be identical.

Usage: python benchmarks/engine_overhead.py [--quick] [--profile N]
"""

from __future__ import annotations

import argparse
import contextlib
import csv
import datetime as dt
import gc
import json
import os
import shutil
import sys
import tempfile
import time
import uuid
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _gen  # noqa: E402

SIZES = (10, 100, 1000, 10000)
QUICK_SIZES = (10, 100)
REPEATS = {10: 21, 100: 11, 1000: 5, 10000: 3}
QUICK_REPEATS = {10: 5, 100: 3}
RATIO_TARGET = 1.3
FLAT_TARGET = 1.25  # per-point cost at the largest size over that at the next size down
SIM_RESOURCE = "GPIB0::4::INSTR"
START = dt.datetime(2026, 12, 1, 9, 0, tzinfo=dt.timezone.utc)


# --- verirun side -------------------------------------------------------------------------------


class ProgressConsole:
    """A QuietConsole that also prints a progress line every ``every`` steps (to stderr)."""

    def __new__(cls, every: int):
        from verirun.console import QuietConsole

        class _Progress(QuietConsole):
            def step(self, point):
                super().step(point)
                if (point.index + 1) % every == 0:
                    print(
                        f"    verirun: step {point.index + 1} of {point.total}",
                        file=sys.stderr,
                        flush=True,
                    )

        return _Progress()


class Phases:
    """Wall time of the record and certificate phases of ``execute``, measured by wrapping the
    two functions ``execute`` calls (the engine loop is the rest): ``close_record``, which every
    closing of a run goes through, and ``write_certificate``."""

    def __init__(self):
        self.record = 0.0
        self.certificate = 0.0

    @contextlib.contextmanager
    def installed(self):
        import verirun.conduct as session

        close_record, write_certificate = session.close_record, session.write_certificate

        def timed_close_record(*args, **kwargs):
            t = time.perf_counter()
            try:
                return close_record(*args, **kwargs)
            finally:
                self.record += time.perf_counter() - t

        def timed_write_certificate(*args, **kwargs):
            t = time.perf_counter()
            try:
                return write_certificate(*args, **kwargs)
            finally:
                self.certificate += time.perf_counter() - t

        session.close_record = timed_close_record
        session.write_certificate = timed_write_certificate
        try:
            yield self
        finally:
            session.close_record, session.write_certificate = close_record, write_certificate


class DryRun:
    """A generated procedure loaded for verirun, ready to be run many times."""

    def __init__(self, gen: _gen.Generated):
        from verirun.bench.config import load_bench
        from verirun.engine import RunContext
        from verirun.lab import load_lab
        from verirun.procedure.load import load_procedure

        self.gen = gen
        t = time.perf_counter()
        self.procedure = load_procedure(gen.procedure)
        self.bench = load_bench(gen.bench)
        lab = load_lab(gen.lab)
        self.load_s = time.perf_counter() - t
        self.context = RunContext(
            lab=lab.lab.model_dump(mode="json"),
            customer={"name": "Benchmark customer", "address": ["1 Test Street"]},
            item={"serial": "BENCH-1", "asset": "A-1", "condition": "as new"},
            operator="benchmark",
            simulated=True,
        )

    def run(self, workdir: Path, *, calibrator=None, console=None, serial: str | None = None):
        """One dry run; returns (seconds, Finished, Phases)."""
        import dataclasses

        from verirun.clock import VirtualClock
        from verirun.conduct import execute
        from verirun.console import QuietConsole
        from verirun.readings import ScriptedReadings

        context = self.context
        if serial is not None:
            context = dataclasses.replace(context, item={**context.item, "serial": serial})
        phases = Phases()
        with phases.installed():
            t = time.perf_counter()
            readings = ScriptedReadings(self.gen.readings)
            finished = execute(
                procedure=self.procedure,
                bench=self.bench,
                context=context,
                readings=readings,
                console=console or QuietConsole(),
                runs_dir=workdir / "runs",
                reports_dir=workdir / "reports",
                simulate=True,
                clock=VirtualClock(START),
                uid=uuid.uuid4().hex,
                calibrator=calibrator,
            )
            seconds = time.perf_counter() - t
        return seconds, finished, phases


# --- the hand-written baseline --------------------------------------------------------------------


def baseline_run(gen: _gen.Generated, workdir: Path, *, wrap=None) -> tuple[float, list[str]]:
    """The technician's script: returns (seconds, verdicts in run order)."""
    import pyvisa

    t = time.perf_counter()
    rm = pyvisa.ResourceManager(_gen.fresh_sim_yaml(workdir / "sim"))
    cal = rm.open_resource(
        SIM_RESOURCE, read_termination="\n", write_termination="\n", timeout=2000
    )
    if wrap is not None:
        cal = wrap(cal)

    readings = {}
    with open(gen.readings, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            # Each value is written "number unit" in SI base units: the number is the first word.
            readings[(row["range"], float(row["at"].split()[0]))] = row["reading"]

    def setting(command):
        cal.write(command)
        reply = cal.query("SYST:ERR?")
        if int(reply.split(",")[0]) != 0:
            raise RuntimeError(f"calibrator error after {command}: {reply}")

    def standby():
        setting("OUTP OFF")
        if cal.query("OUTP?").strip() not in ("0", "OFF"):
            raise RuntimeError("output still on")

    if not cal.query("*IDN?").startswith("Verirun Simulation,SIM-CAL-1"):
        raise RuntimeError("wrong calibrator")
    while int(cal.query("SYST:ERR?").split(",")[0]) != 0:  # empty what an earlier session left
        pass
    verdicts = []
    with open(workdir / "log.jsonl", "a", encoding="utf-8") as log:
        for index, p in enumerate(gen.points):
            if p.first_of_range:
                setting("OUTP OFF")
            if p.function == "resistance":
                setting(f"RES {p.nominal!r}")
            else:
                setting("FUNC DC")
                setting(f"{'VOLT' if p.function == 'dc-voltage' else 'CURR'} {p.nominal!r}")
            setting("OUTP ON")
            typed = readings[(p.range_id, p.nominal)]
            reading = float(typed.split()[0])
            if p.full_scale is not None:
                half = p.percent / 100.0 * p.full_scale
                low, high = p.nominal - half, p.nominal + half
            else:
                rc, df = p.centre, p.degrees / 100.0
                f0 = rc / (rc + p.nominal)

                def ohms(f):
                    return float("inf") if f <= 0 else 0.0 if f >= 1 else rc * (1 - f) / f

                a, b = ohms(f0 - df), ohms(f0 + df)
                low, high = min(a, b, p.nominal), max(a, b, p.nominal)
            log.write(
                json.dumps(
                    {
                        "kind": "observation",
                        "time": dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"),
                        "point": f"{p.range_id}@{p.nominal!r}",
                        "index": index,
                        "range": p.range_id,
                        "function": p.function,
                        "applied": {"value": p.nominal, "frequency": None},
                        "typed": typed,
                        "reading": reading,
                    }
                )
                + "\n"
            )
            log.flush()
            os.fsync(log.fileno())
            standby()
            verdicts.append("pass" if low <= reading <= high else "fail")
    standby()
    cal.close()
    return time.perf_counter() - t, verdicts


# --- checks that the two do the same work ---------------------------------------------------------


class Recorder:
    """Wraps a VISA resource and records every exchange as ("w" | "q", command)."""

    def __init__(self, resource):
        self.resource = resource
        self.sent: list[tuple[str, str]] = []

    def write(self, command):
        self.sent.append(("w", command))
        return self.resource.write(command)

    def query(self, command):
        self.sent.append(("q", command))
        return self.resource.query(command)

    def close(self):
        self.resource.close()

    @property
    def timeout(self):
        return self.resource.timeout


def check_equivalence(n: int, root: Path) -> str:
    """Run both sides once at size ``n`` with every command recorded; raise if they differ."""
    import pyvisa

    from verirun.bench.calibrator import Calibrator

    gen = _gen.generate(n, root / f"check-{n}")
    dry = DryRun(gen)
    rm = pyvisa.ResourceManager(_gen.fresh_sim_yaml(root / f"check-{n}" / "sim-verirun"))
    raw = rm.open_resource(
        SIM_RESOURCE, read_termination="\n", write_termination="\n", timeout=2000
    )
    ours = Recorder(raw)
    _, finished, _ = dry.run(
        root / f"check-{n}" / "verirun", calibrator=Calibrator(ours, "scpi-generic")
    )
    raw.close()
    theirs: list[Recorder] = []

    def wrap(resource):
        theirs.append(Recorder(resource))
        return theirs[0]

    _, verdicts = baseline_run(gen, root / f"check-{n}" / "baseline", wrap=wrap)
    if ours.sent != theirs[0].sent:
        for i, (a, b) in enumerate(zip(ours.sent, theirs[0].sent)):
            if a != b:
                raise AssertionError(f"command {i} differs: verirun {a}, baseline {b}")
        raise AssertionError(f"command counts differ: {len(ours.sent)} vs {len(theirs[0].sent)}")
    theirs_verdicts = [row.verdict for row in sorted(finished.record.points, key=lambda r: r.index)]
    expected = [p.expected for p in gen.points]
    if not (theirs_verdicts == verdicts == expected):
        raise AssertionError("verdicts differ between verirun, the baseline and the generator")
    writes = sum(kind == "w" for kind, _ in ours.sent)
    return (
        f"N={n}: identical command sequences ({len(ours.sent)} exchanges: {writes} writes,"
        f" {len(ours.sent) - writes} queries; {len(ours.sent) / n:.1f} per point),"
        f" identical verdicts ({verdicts.count('fail')} fail)"
    )


# --- measurement ----------------------------------------------------------------------------------


class FsyncMeter:
    """Adds up the time spent waiting in ``os.fsync`` (the shared disk's latency varies a lot
    from minute to minute; both sides fsync once per point, so this is reported apart)."""

    def __init__(self):
        self.seconds = 0.0

    @contextlib.contextmanager
    def installed(self):
        real = os.fsync

        def timed(fd):
            t = time.perf_counter()
            try:
                real(fd)
            finally:
                self.seconds += time.perf_counter() - t

        os.fsync = timed
        try:
            yield self
        finally:
            os.fsync = real


def _timed(call):
    """Run ``call``; return (its result, wall s, CPU s of this process, fsync wait s)."""
    meter = FsyncMeter()
    gc.collect()
    with meter.installed():
        cpu = time.process_time()
        result = call()
        cpu = time.process_time() - cpu
    return result, cpu, meter.seconds


def measure(sizes, repeats, root: Path) -> list[dict]:
    results = []
    warm = _gen.generate(10, root / "warmup")
    warm_dry = DryRun(warm)
    warm_dry.run(root / "warmup" / "verirun")
    baseline_run(warm, root / "warmup" / "baseline")
    for n in sizes:
        gen = _gen.generate(n, root / f"n{n}")
        dry = DryRun(gen)
        samples = {
            key: []
            for key in (
                "v_wall",
                "v_cpu",
                "v_fsync",
                "v_record",
                "v_cert",
                "b_wall",
                "b_cpu",
                "b_fsync",
            )
        }
        reps = repeats[n]
        for rep in range(reps):
            if n >= 1000:
                print(f"  N={n}: repetition {rep + 1} of {reps}", file=sys.stderr, flush=True)
            work = root / f"n{n}" / f"rep{rep}"
            console = ProgressConsole(1000) if n >= 10000 else None
            (seconds, _, phases), cpu, fsync = _timed(
                lambda: dry.run(work / "verirun", console=console)
            )
            samples["v_wall"].append(seconds)
            samples["v_cpu"].append(cpu)
            samples["v_fsync"].append(fsync)
            samples["v_record"].append(phases.record)
            samples["v_cert"].append(phases.certificate)
            (seconds, _), cpu, fsync = _timed(lambda: baseline_run(gen, work / "baseline"))
            samples["b_wall"].append(seconds)
            samples["b_cpu"].append(cpu)
            samples["b_fsync"].append(fsync)
            shutil.rmtree(work, ignore_errors=True)
        m = {key: _gen.median(values) for key, values in samples.items()}
        # Ratios per repetition (the two sides of one repetition ran back to back), then the median.
        ratio = _gen.median([v / b for v, b in zip(samples["v_wall"], samples["b_wall"])])
        engine_ratio = _gen.median(
            [
                (v - r - c) / b
                for v, r, c, b in zip(
                    samples["v_wall"], samples["v_record"], samples["v_cert"], samples["b_wall"]
                )
            ]
        )
        cpu_ratio = _gen.median([v / b for v, b in zip(samples["v_cpu"], samples["b_cpu"])])
        results.append(
            {
                "n": n,
                "reps": reps,
                **m,
                "ratio": ratio,
                "engine_ratio": engine_ratio,
                "cpu_ratio": cpu_ratio,
                "load": dry.load_s,
            }
        )
        print(
            f"  N={n}: verirun {m['v_wall'] / n * 1e6:.0f} us/point, baseline"
            f" {m['b_wall'] / n * 1e6:.0f} us/point",
            file=sys.stderr,
            flush=True,
        )
    return results


def _us(seconds: float, n: int) -> str:
    return f"{seconds / n * 1e6:.0f}"


def report(results: list[dict]) -> None:
    rows = []
    for r in results:
        n = r["n"]
        engine = r["v_wall"] - r["v_record"] - r["v_cert"]
        rows.append(
            [
                str(n),
                str(r["reps"]),
                f"{engine * 1e3:.1f}",
                _us(engine, n),
                f"{r['b_wall'] * 1e3:.1f}",
                _us(r["b_wall"], n),
                f"{r['engine_ratio']:.2f}",
                f"<= {RATIO_TARGET}",
                _gen.verdict(r["engine_ratio"] <= RATIO_TARGET),
            ]
        )
    print(
        "\nEngine overhead: the dry run up to the journal's last line (preflight, opening the"
        " simulated"
        "\ncalibrator, the run loop, every observation journaled and fsynced) against the"
        " hand-written"
        "\nPyVISA loop doing the same; wall time, medians; ratio = median of the per-repetition"
        " ratios"
    )
    print(
        _gen.table(
            [
                "N",
                "runs",
                "verirun ms",
                "us/pt",
                "baseline ms",
                "us/pt",
                "ratio",
                "target",
                "result",
            ],
            rows,
        )
    )

    rows = []
    for r in results:
        n = r["n"]
        engine = r["v_wall"] - r["v_record"] - r["v_cert"]
        rows.append(
            [
                str(n),
                _us(engine, n),
                _us(r["v_record"], n),
                _us(r["v_cert"], n),
                _us(r["v_wall"], n),
                f"{r['ratio']:.2f}",
                f"{r['load'] * 1e3:.1f}",
            ]
        )
    print(
        "\nThe rest of a verirun dry run, which the baseline does not do: closing the journal into"
        " the run"
        "\nrecord (every point evaluated again from the journal) and rendering the certificate;"
        " us per"
        "\npoint. whole ratio = the whole execute over the baseline (for information; the"
        " certificate's"
        "\nown targets are in certificates.py)"
    )
    print(
        _gen.table(
            [
                "N",
                "engine",
                "record",
                "certificate",
                "whole",
                "whole ratio",
                "file loading ms (not in the times)",
            ],
            rows,
        )
    )

    rows = []
    for r in results:
        n = r["n"]
        rows.append(
            [
                str(n),
                _us(r["v_cpu"], n),
                _us(r["b_cpu"], n),
                f"{r['cpu_ratio']:.2f}",
                _us(r["v_fsync"], n),
                _us(r["b_fsync"], n),
            ]
        )
    print(
        "\nCPU time of the process (whole execute) and fsync wait, us per point"
        " (the disk is shared: fsync varies)"
    )
    print(
        _gen.table(
            ["N", "verirun CPU", "baseline CPU", "CPU ratio", "verirun fsync", "baseline fsync"],
            rows,
        )
    )

    rows = []
    for prev, cur in zip(results, results[1:]):
        span = cur["n"] - prev["n"]
        engine = (cur["v_wall"] - cur["v_record"] - cur["v_cert"]) - (
            prev["v_wall"] - prev["v_record"] - prev["v_cert"]
        )
        rows.append(
            [
                f"{prev['n']} -> {cur['n']}",
                _us(engine, span),
                _us(cur["v_wall"] - prev["v_wall"], span),
                _us(cur["b_wall"] - prev["b_wall"], span),
            ]
        )
    print("\nMarginal cost of one more point, us (slope between sizes)")
    print(_gen.table(["sizes", "verirun engine", "verirun whole", "baseline"], rows))

    big, prev = results[-1], results[-2]

    def per_point(r, key):
        value = r["v_wall"] - r["v_record"] - r["v_cert"] if key == "engine" else r["v_wall"]
        return value / r["n"]

    growth = per_point(big, "engine") / per_point(prev, "engine")
    growth_whole = per_point(big, "whole") / per_point(prev, "whole")
    print(
        f"\nPer-point cost flat? verirun us/pt at N={big['n']} over N={prev['n']}:"
        f" engine {growth:.2f},"
        f" whole {growth_whole:.2f} (target <= {FLAT_TARGET}):"
        f" {_gen.verdict(max(growth, growth_whole) <= FLAT_TARGET)}"
    )
    worst = max(results, key=lambda r: r["engine_ratio"])
    print(
        f"Engine ratio <= {RATIO_TARGET} at every size:"
        f" {_gen.verdict(worst['engine_ratio'] <= RATIO_TARGET)}"
        f" (worst {worst['engine_ratio']:.2f} at N={worst['n']})"
    )


def profile(n: int, root: Path, top: int) -> None:
    """cProfile one dry run of ``n`` points (after a warm-up run) and print the top entries."""
    import cProfile
    import pstats

    gen = _gen.generate(n, root / f"profile-{n}")
    dry = DryRun(gen)
    dry.run(root / f"profile-{n}" / "warm")
    profiler = cProfile.Profile()
    profiler.enable()
    seconds, _, _ = dry.run(root / f"profile-{n}" / "run")
    profiler.disable()
    print(f"\ncProfile of one {n}-point dry run ({seconds:.2f} s under the profiler)")
    stats = pstats.Stats(profiler, stream=sys.stdout)
    stats.sort_stats("cumulative").print_stats(top)
    stats.sort_stats("tottime").print_stats(top)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--quick", action="store_true", help="sizes 10 and 100 only, fewer repetitions"
    )
    parser.add_argument(
        "--profile",
        type=int,
        metavar="N",
        help="instead of the comparison, cProfile one N-point dry run",
    )
    parser.add_argument("--top", type=int, default=25, help="entries of the profile to print")
    args = parser.parse_args(argv)
    root = Path(tempfile.mkdtemp(prefix="verirun-bench-engine-"))
    try:
        if args.profile:
            profile(args.profile, root, args.top)
            return 0
        print("Checking that verirun and the baseline do the same work:")
        for n in (10, 100):
            print("  " + check_equivalence(n, root))
        sizes, repeats = (QUICK_SIZES, QUICK_REPEATS) if args.quick else (SIZES, REPEATS)
        t = time.perf_counter()
        results = measure(sizes, repeats, root)
        report(results)
        print(f"\n(total benchmark time {time.perf_counter() - t:.0f} s)")
        return 0
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
