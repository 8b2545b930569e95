"""Correct a stored run: a new revision that keeps the old one.

A correction is a document appended to the run's journal (chained like every other), naming the
point, the reading as it should have been, the reason and who made it. The run record is built
again as the next revision; the previous record is kept beside it as ``record.r<N>.json`` and
its certificate stays where it was, so every amendment stays traceable to the version before it.
"""

from __future__ import annotations

import math
from pathlib import Path

from verirun import storage
from verirun.bench.config import load_bench_text
from verirun.clock import SystemClock, iso
from verirun.errors import RecordError, UnitError
from verirun.locks import run_lock
from verirun.procedure.load import load_procedure_text
from verirun.procedure.plan import TestPoint, plan
from verirun.readings import parse_entry
from verirun.record.build import close_record
from verirun.record.documents import Record, compose
from verirun.record.journal import JOURNAL_NAME, RECORD_NAME, Journal, latest_time, read_journal
from verirun.record.verify import run_folder, verified_record
from verirun.units import parse_value


def find_point(points: list[TestPoint], which: str) -> TestPoint:
    """The step named by ``which``: its number (``"7"``, ``"step 7"``), or its label
    (``"dca-50u@10uA"``, also written ``dca-50u@10 uA``, ``dca-50u@1e-05``) when only one
    step has it.

    Raises
    ------
    RecordError
        If no step, or more than one, answers to ``which``.
    """
    text = " ".join(which.split())
    number = text[5:].strip() if text.lower().startswith("step ") else text
    if number.isdigit():
        step = int(number)
        if not 1 <= step <= len(points):
            raise RecordError(f"there is no step {step}; the run has steps 1 to {len(points)}")
        return points[step - 1]
    matches = [p for p in points if _names(p, text)]
    if len(matches) == 1:
        return matches[0]
    if matches:
        steps = ", ".join(str(p.step) for p in matches)
        raise RecordError(
            f"{text!r} is at steps {steps} of this run; name the step by its number"
            f" (--point {matches[0].step})"
        )
    raise RecordError(
        f"the run has no point {text!r}; name it by step number (1 to {len(points)}) or by"
        f" its label (e.g. {points[0].key!r})"
    )


def _names(point: TestPoint, text: str) -> bool:
    """True when ``text`` is the point's label, as written or as a value of the same quantity."""
    if text in (point.key, point.legacy_key):
        return True
    range_id, _, rest = text.partition("@")
    if range_id != point.range.id or not rest:
        return False
    at, _, freq = rest.partition("@")
    try:
        nominal = parse_value(at.strip(), point.unit)
        frequency = parse_value(freq.strip(), "Hz") if freq else None
    except UnitError:
        return False
    if (frequency is None) != (point.frequency is None):
        return False
    return math.isclose(nominal, point.nominal, rel_tol=1e-12, abs_tol=0.0) and (
        frequency is None or math.isclose(frequency, point.frequency, rel_tol=1e-12)
    )


def amend(
    path: str | Path, *, point: str, reading: str, reason: str, operator: str, clock=None
) -> Record:
    """Correct the reading of one point; return the new revision's run record.

    Raises
    ------
    RecordError
        If the run does not verify, is not complete, or the point or reading is wrong.
    """
    clock = clock or SystemClock()
    folder = run_folder(path)
    with run_lock(folder):
        return _amend_locked(
            folder, point=point, reading=reading, reason=reason, operator=operator, clock=clock
        )


def _amend_locked(
    folder: Path, *, point: str, reading: str, reason: str, operator: str, clock
) -> Record:
    record = verified_record(folder)
    if record.run.status != "complete":
        raise RecordError(
            f"{folder}: the run is {record.run.status}; resume it rather than correct it"
        )
    if not reason.strip():
        raise RecordError("give the reason for the correction (it is printed on the certificate)")
    read = read_journal(folder / JOURNAL_NAME)
    start = read.start  # verified_record has read it: the journal begins with a start
    points = plan(
        load_procedure_text(start.procedure.text, start.procedure.source),
        load_bench_text(start.bench.text, start.bench.source),
    )
    target = find_point(points, point)
    try:
        entry = parse_entry(reading, target)
    except UnitError as exc:
        raise RecordError(f"the corrected reading: {exc}") from None
    if entry.kind != "reading":
        raise RecordError("the corrected reading must be a value, not an operator command")
    revision = record.run.revision
    kept = folder / f"record.r{revision}.json"
    if not kept.exists():
        storage.write_new(kept, (folder / RECORD_NAME).read_bytes())
    journal_format = start.journal_format or 1
    with Journal(folder / JOURNAL_NAME) as journal:
        # Never dated before what the journal already holds (a clock set back).
        now = max(iso(clock.now()), latest_time(read.models) or "")
        journal.append(
            compose(
                "correction",
                time=now,
                point=target.key_in(journal_format),
                index=target.index,
                typed=entry.typed,
                reading=entry.value,
                reason=reason.strip(),
                operator=operator,
            )
        )
    from verirun.register.closing import after_close

    return after_close(folder, close_record(folder))[0]
