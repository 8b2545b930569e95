"""Correct a stored run: a new revision that keeps the old one.

A correction is a document appended to the run's journal (chained like every other), naming the
point, the reading as it should have been, the reason and who made it. The run record is built
again as the next revision; the previous record is kept beside it as ``record.r<N>.json`` and
its certificate stays where it was, so every amendment stays traceable to the version before it.
"""

from __future__ import annotations

import shutil
from pathlib import Path

from verirun.bench.config import load_bench_text
from verirun.clock import SystemClock, iso
from verirun.errors import RecordError, UnitError
from verirun.integrity import run_folder, verified_record
from verirun.procedure.load import load_procedure_text
from verirun.procedure.plan import TestPoint, plan
from verirun.readings import parse_entry
from verirun.record import JOURNAL_NAME, RECORD_NAME, Journal, read_journal


def find_point(points: list[TestPoint], which: str) -> TestPoint:
    """The point named by its step number (``"7"``) or its key (``"dcv-50@25.0"``)."""
    if which.isdigit():
        number = int(which)
        if not 1 <= number <= len(points):
            raise RecordError(f"there is no step {number}; the run has steps 1 to {len(points)}")
        return points[number - 1]
    for point in points:
        if point.key == which:
            return point
    raise RecordError(f"the run has no point {which!r}; name it by step number or by its key"
                      f" (e.g. {points[0].key!r})")


def amend(path: str | Path, *, point: str, reading: str, reason: str, operator: str, clock=None) -> dict:
    """Correct the reading of one point; return the new revision's run record.

    Raises
    ------
    RecordError
        If the run does not verify, is not complete, or the point or reading is wrong.
    """
    clock = clock or SystemClock()
    folder = run_folder(path)
    record = verified_record(folder)
    if record["run"]["status"] != "complete":
        raise RecordError(f"{folder}: the run is {record['run']['status']}; resume it rather than correct it")
    if not reason.strip():
        raise RecordError("give the reason for the correction (it is printed on the certificate)")
    docs = read_journal(folder / JOURNAL_NAME).documents
    start = docs[0]
    points = plan(load_procedure_text(start["procedure"]["text"], start["procedure"]["source"]),
                  load_bench_text(start["bench"]["text"], start["bench"]["source"]))
    target = find_point(points, point)
    try:
        entry = parse_entry(reading, target)
    except UnitError as exc:
        raise RecordError(f"the corrected reading: {exc}") from None
    if entry.kind != "reading":
        raise RecordError("the corrected reading must be a value, not an operator command")
    revision = record["run"]["revision"]
    shutil.copyfile(folder / RECORD_NAME, folder / f"record.r{revision}.json")
    with Journal(folder / JOURNAL_NAME) as journal:
        journal.append({"kind": "correction", "time": iso(clock.now()), "point": target.key,
                        "index": target.index, "typed": entry.typed, "reading": entry.value,
                        "reason": reason.strip(), "operator": operator})
    from verirun.register.closing import after_close
    from verirun.session import close_run

    return after_close(folder, close_run(folder))[0]
