"""Generated inputs for the benchmarks: a procedure of N points, its scripted readings, a bench.

The procedure has linear DC voltage and DC current ranges and series-ohms ranges, with the N
points spread over them as evenly as they go. Every nominal value is written once as text and
that same text is used in the procedure and in the readings file, so both sides parse the same
float. Readings are deterministic: most lie well inside their window, and a few (about one in
twelve) lie well outside it, far enough from either limit that rounding cannot move a verdict.

Run it directly to write one set of files and check the procedure with ``verirun check``:

    python benchmarks/_gen.py 100
"""

from __future__ import annotations

import csv
import math
import re
import shutil
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "verirun" / "demo"
SIM_YAML = ROOT / "verirun" / "bench" / "sim" / "calibrator.yaml"
LAB_YAML = DEMO / "lab.yaml"

#: The ranges of the generated procedure (those of the demo meter, plus a 300 mA range). Linear
#: ranges carry a percent-of-full-scale accuracy, ohms ranges one in degrees of arc on a 90 degree
#: arc. DC voltages stay below the 60 V hazardous-live threshold so that no point needs a
#: confirmation.
RANGES = (
    {
        "id": "dcv-6",
        "function": "dc-voltage",
        "unit": "V",
        "full_scale": 6.0,
        "percent": 2.5,
        "resolution": "0.05 V",
    },
    {
        "id": "dcv-30",
        "function": "dc-voltage",
        "unit": "V",
        "full_scale": 30.0,
        "percent": 2.5,
        "resolution": "0.25 V",
    },
    {
        "id": "dca-30m",
        "function": "dc-current",
        "unit": "A",
        "full_scale": 0.03,
        "percent": 3.0,
        "resolution": "0.00025 A",
    },
    {
        "id": "dca-300m",
        "function": "dc-current",
        "unit": "A",
        "full_scale": 0.3,
        "percent": 3.0,
        "resolution": "0.0025 A",
    },
    {"id": "ohm-x1", "function": "resistance", "unit": "ohm", "centre": 16.0, "degrees": 3.0},
    {"id": "ohm-x1k", "function": "resistance", "unit": "ohm", "centre": 16000.0, "degrees": 3.0},
)
ARC = 90.0


@dataclass(frozen=True)
class GenPoint:
    """One generated point, with what a hand-written script needs to run and judge it."""

    range_id: str
    function: str
    nominal: float
    nominal_text: str  # bare number in SI base units, as written in both files
    reading_text: str  # bare number in SI base units (the CSV adds the unit)
    first_of_range: bool
    full_scale: float | None
    percent: float | None
    centre: float | None
    degrees: float | None
    expected: str  # "pass" or "fail", by construction


@dataclass(frozen=True)
class Generated:
    """The files of one generated set and its points in run order."""

    folder: Path
    procedure: Path
    readings: Path
    bench: Path
    lab: Path
    points: tuple[GenPoint, ...]


def _text(value: float) -> str:
    return format(value, ".10g")


def _counts(n: int) -> list[int]:
    base, extra = divmod(n, len(RANGES))
    return [base + (1 if i < extra else 0) for i in range(len(RANGES))]


def _is_outlier(index: int) -> bool:
    # A few out-of-tolerance readings: about one point in twelve, the first at index 3.
    return index % 12 == 3


def _error_fraction(index: int) -> float:
    """Deterministic error as a fraction of the half-width: within ±0.6, or ±1.5 for outliers."""
    wobble = math.sin(1.7 * index + 0.3)
    if _is_outlier(index):
        return 1.5 if wobble >= 0 else -1.5
    return 0.6 * wobble


def make_points(n: int) -> list[GenPoint]:
    """The ``n`` points in run order (range by range), each with its reading."""
    points: list[GenPoint] = []
    index = 0
    for spec, count in zip(RANGES, _counts(n)):
        for j in range(count):
            frac = _error_fraction(index)
            if "full_scale" in spec:
                fs = spec["full_scale"]
                nominal_text = _text(fs * (j + 1) / count)
                nominal = float(nominal_text)
                half = spec["percent"] / 100.0 * fs
                reading = nominal + frac * half
                points.append(
                    GenPoint(
                        spec["id"],
                        spec["function"],
                        nominal,
                        nominal_text,
                        _text(reading),
                        j == 0,
                        fs,
                        spec["percent"],
                        None,
                        None,
                        "fail" if abs(frac) > 1 else "pass",
                    )
                )
            else:
                rc = spec["centre"]
                # Geometric spread from centre/8 to centre*8: deflections 0.11 to 0.89.
                nominal_text = _text(rc * 8.0 ** (2.0 * (j + 0.5) / count - 1.0))
                nominal = float(nominal_text)
                half = spec["degrees"] / ARC
                f = rc / (rc + nominal) + frac * half
                reading = rc * (1.0 - f) / f
                points.append(
                    GenPoint(
                        spec["id"],
                        spec["function"],
                        nominal,
                        nominal_text,
                        _text(reading),
                        j == 0,
                        None,
                        None,
                        rc,
                        spec["degrees"],
                        "fail" if abs(frac) > 1 else "pass",
                    )
                )
            index += 1
    keys = {(p.range_id, p.nominal) for p in points}
    if len(keys) != len(points):
        raise AssertionError("generated nominal values are not distinct within their ranges")
    return points


def procedure_text(n: int, points: list[GenPoint]) -> str:
    lines = [
        f"# Generated benchmark procedure: {n} points.",
        "format: 1",
        "procedure:",
        f"  id: BENCH-{n}",
        f"  title: Generated benchmark procedure of {n} points",
        "  revision: A",
        "meter:",
        "  kind: analog multimeter",
        "  maker: Generated Instruments",
        "  model: GEN-1",
        "decision:",
        "  rule: simple",
        "ranges:",
    ]
    for spec in RANGES:
        mine = [p for p in points if p.range_id == spec["id"]]
        if not mine:
            continue
        unit = spec["unit"]
        lines += [f"  - id: {spec['id']}", f"    function: {spec['function']}"]
        if "full_scale" in spec:
            lines += [
                "    scale: linear",
                f"    full-scale: {_text(spec['full_scale'])} {unit}",
                f"    arc: {_text(ARC)} deg",
                f"    accuracy: {{percent-of-full-scale: {_text(spec['percent'])}}}",
                f"    resolution: {spec['resolution']}",
            ]
        else:
            lines += [
                "    scale: series-ohms",
                f"    centre: {_text(spec['centre'])} ohm",
                "    battery: 3 V",
                f"    arc: {_text(ARC)} deg",
                f"    accuracy: {{degrees: {_text(spec['degrees'])}}}",
                "    resolution: 0.5 deg",
            ]
        lines += [
            f"    read-on: scale of range {spec['id']}",
            f"    connect: Selector to {spec['id']}.",
            "    points:",
        ]
        lines += [f"      - {p.nominal_text} {unit}" for p in mine]
    return "\n".join(lines) + "\n"


def bench_text() -> str:
    """The demo's simulated bench, with the settling time forced to zero."""
    text = (DEMO / "bench-sim.yaml").read_text(encoding="utf-8")
    text, count = re.subn(r"(?m)^settle:.*$", "settle: 0 s", text)
    if count == 0:
        text += "settle: 0 s\n"
    return text


def generate(n: int, folder: str | Path | None = None) -> Generated:
    """Write the procedure, readings and bench of ``n`` points into ``folder`` (a new temp folder
    when not given)."""
    folder = (
        Path(folder) if folder is not None else Path(tempfile.mkdtemp(prefix=f"verirun-gen{n}-"))
    )
    folder.mkdir(parents=True, exist_ok=True)
    points = make_points(n)
    procedure = folder / f"procedure-{n}.yaml"
    procedure.write_text(procedure_text(n, points), encoding="utf-8")
    readings = folder / f"readings-{n}.csv"
    with open(readings, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["range", "at", "reading"])
        units = {spec["id"]: spec["unit"] for spec in RANGES}
        for p in points:
            # With the unit: a bare number would be read in the unit the prompt shows (mA, kΩ).
            unit = units[p.range_id]
            writer.writerow([p.range_id, f"{p.nominal_text} {unit}", f"{p.reading_text} {unit}"])
    bench = folder / "bench-sim.yaml"
    bench.write_text(bench_text(), encoding="utf-8")
    lab = folder / "lab.yaml"
    shutil.copyfile(LAB_YAML, lab)
    return Generated(
        folder=folder,
        procedure=procedure,
        readings=readings,
        bench=bench,
        lab=lab,
        points=tuple(points),
    )


def fresh_sim_yaml(folder: str | Path) -> str:
    """Copy the simulated calibrator's device file into ``folder``; return its ``@sim`` library
    string (the simulator keeps one state per file path, so each run gets its own copy)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    target = folder.resolve() / "calibrator.yaml"
    shutil.copyfile(SIM_YAML, target)
    return f"{target}@sim"


def median(values):
    ordered = sorted(values)
    mid = len(ordered) // 2
    return ordered[mid] if len(ordered) % 2 else (ordered[mid - 1] + ordered[mid]) / 2


def table(headers: list[str], rows: list[list[str]]) -> str:
    """A plain text table, columns padded to their widest cell."""
    cells = [headers] + rows
    widths = [max(len(str(row[i])) for row in cells) for i in range(len(headers))]
    out = [
        "  ".join(str(c).ljust(w) for c, w in zip(headers, widths)),
        "  ".join("-" * w for w in widths),
    ]
    out += [
        "  ".join(
            str(c).rjust(w) if i else str(c).ljust(w) for i, (c, w) in enumerate(zip(row, widths))
        )
        for row in rows
    ]
    return "\n".join(out)


def verdict(ok: bool) -> str:
    return "PASS" if ok else "MISS"


if __name__ == "__main__":
    size = int(sys.argv[1]) if len(sys.argv) > 1 else 100
    gen = generate(size)
    print(f"wrote {gen.procedure}, {gen.readings}, {gen.bench}")
    print(
        f"{sum(p.expected == 'fail' for p in gen.points)} of {size} readings are out of tolerance"
    )
    verirun = Path(sys.executable).with_name("verirun")
    command = [str(verirun)] if verirun.exists() else [sys.executable, "-m", "verirun"]
    sys.exit(subprocess.call(command + ["check", str(gen.procedure)]))
