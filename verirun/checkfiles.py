"""``verirun check``: every file a run uses, recognised by what it holds, checked in one pass.

A procedure, bench file, driver profile, lab profile and virtual meter are YAML files with a
``format`` version, told apart by their top-level keys; a readings file is a CSV file. Readings
and virtual-meter files are checked against the procedures given with them; with a bench, each
procedure gets the whole preflight of :mod:`verirun.review` without opening the instrument.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path

from verirun import yamlfile
from verirun.errors import ProcedureError

#: Top-level keys that tell each kind of YAML file apart (any one is enough), tried in order; a
#: file missing some of its keys is still recognised, so its loader can say which are missing.
_SIGNS = (
    ("procedure", ("procedure", "decision")),
    ("bench file", ("bench", "calibrator", "safety")),
    ("driver profile", ("commands", "functions", "output-state", "error-queue")),
    ("lab profile", ("lab",)),
)


@dataclass
class Report:
    """What ``check`` found: lines to print, and whether any file has a problem."""

    lines: list[str] = field(default_factory=list)
    failed: bool = False

    def problems(self, found: list[str]) -> None:
        self.lines.extend(found)
        self.failed = self.failed or bool(found)


def kind_of(path: Path) -> str:
    """Which kind of file ``path`` is.

    Raises
    ------
    ProcedureError
        If the file cannot be read, or is none of the kinds verirun reads.
    """
    if path.suffix.lower() == ".csv":
        return "readings"
    located = yamlfile.load_file(path)
    data = located.data if isinstance(located.data, dict) else {}
    for kind, keys in _SIGNS:
        if any(key in data for key in keys):
            return kind
    if "ranges" in data or "meter" in data:
        # A procedure lists its ranges; a virtual meter maps range ids to their models.
        return "virtual meter" if isinstance(data.get("ranges"), dict) else "procedure"
    raise ProcedureError(
        f"{path}:1: not a file verirun reads: a procedure has 'procedure' and 'ranges',"
        " a bench file 'bench' and 'calibrator', a driver profile 'commands' and 'functions',"
        " a lab profile 'lab', a virtual meter 'meter' and 'ranges' (each with 'format');"
        " a readings file ends in .csv"
    )


def rest_warnings(points) -> list[str]:
    """A warning for each point whose tolerance holds the pointer's rest position on an ohms
    scale: a meter whose circuit is open (the pointer never moves) would pass there."""
    return [
        f"range {point.range.id}, step {point.index + 1} at {point.stimulus_text()}: the tolerance"
        f" ({point.accuracy_text}) holds the pointer's rest position, so a meter whose circuit is"
        " open would pass; choose a point further up the arc"
        for point in points
        if point.window.admits_rest
    ]


def check(
    paths: list[Path], *, bench_path: Path | None = None, today: dt.date | None = None
) -> Report:
    """Check every file of ``paths`` (and, with ``bench_path``, each procedure's preflight on
    it)."""
    from verirun.bench.config import load_bench
    from verirun.bench.profile import load_profile
    from verirun.lab import load_lab
    from verirun.procedure.load import load_procedure
    from verirun.procedure.plan import plan

    report = Report()
    today = today or dt.date.today()
    kinds: dict[Path, str] = {}
    for path in paths:
        try:
            kinds[path] = kind_of(path)
        except ProcedureError as exc:
            report.problems(exc.problems)
    bench = profile = None
    if bench_path is not None:
        try:
            bench = load_bench(bench_path)
            profile = load_profile(bench.file.calibrator.profile)
        except ProcedureError as exc:
            report.problems(exc.problems)
            bench = None
    procedures, given = [], any(kind == "procedure" for kind in kinds.values())
    for path, kind in kinds.items():
        try:
            if kind == "procedure":
                procedure = load_procedure(path)
                points = plan(procedure)
                procedures.append(procedure)
                report.lines.extend(f"{path}: warning: {text}" for text in rest_warnings(points))
                report.lines.append(
                    f"{path}: ok: procedure {procedure.id} revision {procedure.revision},"
                    f" {len(procedure.ranges)} ranges,"
                    f" {sum(len(r.points) for r in procedure.ranges)} points"
                )
            elif kind == "bench file":
                loaded = load_bench(path)
                load_profile(loaded.file.calibrator.profile)
                report.lines.append(
                    f"{path}: ok: bench file {loaded.file.bench.id}, calibrator"
                    f" {loaded.file.calibrator.asset}, profile {loaded.file.calibrator.profile}"
                )
            elif kind == "driver profile":
                loaded = load_profile(path)
                report.lines.append(f"{path}: ok: driver profile {loaded.name}")
            elif kind == "lab profile":
                loaded = load_lab(path)
                report.lines.append(f"{path}: ok: lab profile {loaded.lab.name}")
        except ProcedureError as exc:
            report.problems(exc.problems)
    for path, kind in kinds.items():
        if kind in ("readings", "virtual meter"):
            _check_source(path, kind, procedures, bench, report, given=given)
    if bench is not None:
        from verirun.review import review

        for procedure in procedures:
            found = review(procedure, bench, profile, today=today)
            report.problems([f"{procedure.source}: {text}" for text in found.problems])
            report.lines.extend(f"{procedure.source}: warning: {text}" for text in found.warnings)
            if not found.problems:
                report.lines.append(
                    f"{procedure.source}: ok on bench {bench.file.bench.id}: every point"
                    " within the calibrator's limits and covered by its specification"
                )
    return report


def _check_source(path: Path, kind: str, procedures, bench, report: Report, *, given: bool) -> None:
    """A readings or virtual-meter file, checked against each procedure given with it."""
    from verirun.procedure.plan import plan
    from verirun.readings import ScriptedReadings, VirtualMeter

    try:
        source = ScriptedReadings(path) if kind == "readings" else VirtualMeter(path)
    except ProcedureError as exc:
        report.problems(exc.problems)
        return
    if not procedures:
        report.problems(
            [
                f"{path}:1: not checked against a procedure: the procedure given has problems"
                " (above); check again once it loads"
                if given
                else f"{path}:1: a {kind} file is checked against its procedure: give the procedure"
                " file too (verirun check PROCEDURE FILE)"
            ]
        )
        return
    for procedure in procedures:
        found = source.check(plan(procedure, bench))
        report.problems(found)
        if not found:
            report.lines.append(f"{path}: ok: {kind} for every point of {procedure.id}")
