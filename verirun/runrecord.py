"""Close a journal into a run record: the whole run, every point evaluated, in one document.

The points are evaluated again from the procedure text embedded in the journal's start document,
by the same functions the run used, so a record built today and one rebuilt in ten years from
the same journal are the same.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from verirun.bench.config import Bench, load_bench_text
from verirun.errors import ProcedureError, RecordError
from verirun.evaluation import Result, evaluate
from verirun.metrology.uncertainty import round_result
from verirun.procedure.load import Procedure, load_procedure_text
from verirun.procedure.plan import TestPoint, plan
from verirun.procedure.model import FUNCTION_NAMES
from verirun.record import RECORD_FORMAT, dumps, json_number, line_hash, verify_chain
from verirun.units import format_fixed, format_quantity


@dataclass(frozen=True, kw_only=True)
class Known:
    """What a run worked out while it wrote its journal, so that closing the journal need not
    work it out again: the procedure and bench it ran, their plan, and the evaluation of each
    reading by point key. The record uses them only where they are the journal's own: the same
    procedure and bench texts, and an evaluation of the very reading the journal holds."""

    procedure: Procedure
    bench: Bench
    points: list[TestPoint]
    results: dict[str, Result] = field(default_factory=dict)

    def holds(self, start: dict) -> bool:
        """True when the procedure and bench are those of the journal's start document."""
        return (self.procedure.text == start["procedure"]["text"]
                and self.bench.text == start["bench"]["text"])


def build_record(documents: list[dict], source: str = "journal", *, known: Known | None = None) -> dict:
    """The run record of a journal's ``documents``.

    ``known`` (from the run that wrote the journal) saves loading, planning and evaluating again;
    the record is the same with it or without it.

    Raises
    ------
    RecordError
        If the journal does not start with a start document, its chain is broken, or it names
        points its own procedure does not have.
    """
    if not documents or documents[0].get("kind") != "start":
        raise RecordError(f"{source}: the journal does not begin with a start document")
    problems = verify_chain(documents, source)
    if problems:
        raise RecordError("\n".join(problems))
    start = documents[0]
    if known is not None and known.holds(start):
        procedure, bench, planned, results = known.procedure, known.bench, known.points, known.results
    else:
        try:
            procedure = load_procedure_text(start["procedure"]["text"], start["procedure"]["source"])
            bench = load_bench_text(start["bench"]["text"], start["bench"]["source"])
        except ProcedureError as exc:
            raise RecordError(f"{source}: the procedure or bench stored in the journal does not load:"
                              f" {exc}") from None
        planned, results = plan(procedure, bench), {}
    points = {p.key: p for p in planned}
    entries: dict[str, dict] = {}
    notes = []
    stop = None
    number = None
    revision = 1
    corrections: dict[str, dict] = {}
    for doc in documents[1:]:
        kind = doc["kind"]
        if kind in ("observation", "skip", "correction"):
            if doc["point"] not in points:
                raise RecordError(f"{source}: document {doc['seq']} names point {doc['point']!r},"
                                  " which the procedure does not have")
            if kind == "correction":
                revision += 1
                previous = entries.get(doc["point"])
                corrections[doc["point"]] = {
                    "revision": revision, "time": doc["time"], "reason": doc["reason"],
                    "by": doc["operator"], "previous_typed": previous.get("typed") if previous else None}
                notes.append({"time": doc["time"], "point": doc["point"],
                              "text": f"revision {revision}: reading of {doc['point']} corrected from"
                                      f" {corrections[doc['point']]['previous_typed']!r} to {doc['typed']!r}"
                                      f" by {doc['operator']}: {doc['reason']}"})
            entries[doc["point"]] = doc  # a later entry for the same point supersedes
        elif kind == "withdrawal":
            withdrawn = entries.pop(doc["point"], None)
            notes.append({"time": doc["time"], "point": doc["point"],
                          "text": f"entry {doc.get('typed')!r} of step {doc.get('index', 0) + 1} withdrawn by the"
                                  " operator before the run went on, and measured again"
                                  if withdrawn is not None else "a withdrawal of an entry the journal does not hold"})
        elif kind == "note":
            notes.append({"time": doc["time"], "point": doc.get("point"), "text": doc["text"]})
        elif kind == "resume":
            notes.append({"time": doc["time"], "point": None,
                          "text": f"run resumed after an interruption with {doc['pending']} points to go"
                                  + ("; a cut-off last journal line was dropped" if doc.get("recovered_torn_line") else "")
                                  + (_conditions(doc.get("environment"))
                                     if doc.get("environment") != start.get("environment") else "")})
        elif kind == "stop":
            stop = doc
        elif kind == "certificate-number":  # given by the lab register when the run closed
            number = doc["number"]
    rows = []
    for key, point in points.items():
        doc = entries.get(key)
        row = _row(point, doc, results.get(key))
        if key in corrections:
            row["correction"] = corrections[key]
        rows.append(row)
    counts = {"points": len(rows), "pass": 0, "fail": 0, "skipped": 0, "not-measured": 0}
    for row in rows:
        counts[row["verdict"]] = counts.get(row["verdict"], 0) + 1
    status = stop["status"] if stop else "resumable"
    if status == "complete" and counts["not-measured"]:
        status = "incomplete"
    overall = ("fail" if counts["fail"] else "pass") if counts["pass"] + counts["fail"] else "none"
    return {
        "record_format": RECORD_FORMAT,
        "run": {"uid": start["uid"], "started": start["time"], "ended": stop["time"] if stop else None,
                "status": status, "reason": stop.get("reason") if stop else None,
                "operator": start["operator"], "software": start["software"],
                "journal_sha256_last": line_hash(dumps(documents[-1])),
                "documents": len(documents), "revision": revision,
                **({"certificate_number": number} if number is not None else {})},
        "lab": start["lab"],
        "customer": {"name": None, "address": [], **start["customer"]},
        "item": {"serial": None, "asset": None, "condition": None, "received": None, **start["item"]},
        "environment": start.get("environment", {}),
        **({"as_found": start["as_found"]} if start.get("as_found") else {}),
        "procedure": start["procedure"], "bench": start["bench"],
        "meter": procedure.file.meter.model_dump(by_alias=True),
        "decision_rule": {"rule": procedure.rule.name, "statement": procedure.rule.describe(),
                          "parameters": procedure.file.decision.model_dump(by_alias=True, exclude_none=True)},
        "ranges": [_range(rng) for rng in procedure.ranges],
        "points": rows,
        "notes": notes,
        "summary": {**counts, "overall": overall},
    }


def _range(rng) -> dict:
    return {"id": rng.id, "function": rng.function, "function_name": FUNCTION_NAMES[rng.function],
            "unit": rng.unit, "scale": rng.law.name,
            "full_scale": rng.full_scale, "centre": getattr(rng.law, "centre", None), "arc": rng.arc,
            "accuracy": [b.text for b in rng.bands], "read_on": rng.read_on}


def _row(point, doc: dict | None, known: Result | None = None) -> dict:
    win = point.window
    row = {"index": point.index, "key": point.key, "range": point.range.id, "unit": point.unit,
           "nominal": point.nominal, "frequency": point.frequency, "stimulus": point.stimulus_text(),
           "low": json_number(win.low), "high": json_number(win.high), "domain": win.domain,
           "half_width": win.half_width, "accuracy": point.accuracy_text,
           "limits_text": f"{format_quantity(win.low, point.unit)} to {format_quantity(win.high, point.unit)}",
           # Filled in below for a measured point; present (as None) for every row so that a
           # certificate template never meets a missing key.
           "reading": None, "typed": None, "time": None, "error": None, "error_unit": None,
           "percent_of_tolerance": None, "U": None, "U_spec": None, "k": None, "tur": None,
           "conformance": None, "accept_low": None, "accept_high": None, "U_pct": None,
           "accept_low_pct": None, "accept_high_pct": None, "budget": [], "reported": None}
    if doc is None:
        return {**row, "verdict": "not-measured"}
    if doc["kind"] not in ("observation", "correction"):
        return {**row, "verdict": "skipped", "time": doc["time"], "skip_reason": doc["reason"]}
    # The run's own evaluation when it is of this very reading (it is the same function of the
    # same point and value); otherwise, a corrected or resumed reading, evaluated here.
    reading = doc["reading"]
    same = (known is not None and known.reading == reading
            and math.copysign(1.0, known.reading) == math.copysign(1.0, reading))  # -0.0 is not 0.0
    result = known if same else evaluate(point, reading)
    return {**row, "verdict": result.verdict, "reading": reading, "typed": doc["typed"],
            "time": doc["time"], "error": result.error, "error_unit": result.error_unit,
            "percent_of_tolerance": result.percent_of_tolerance,
            "U": json_number(result.expanded_value), "U_spec": result.expanded, "k": result.k,
            "tur": json_number(result.tur), "conformance": result.conformance,
            "accept_low": json_number(result.acceptance[0]) if result.acceptance else None,
            "accept_high": json_number(result.acceptance[1]) if result.acceptance else None,
            # Acceptance limits as percent of tolerance only where the rule moves them off the
            # tolerance limits (they are drawn on the error chart).
            "U_pct": result.expanded_pct,
            "accept_low_pct": result.accept_low_pct if point.rule.name != "simple" else None,
            "accept_high_pct": result.accept_high_pct if point.rule.name != "simple" else None,
            "budget": [{"name": t.name, "u": t.standard_uncertainty, "domain": t.domain,
                        "distribution": t.distribution, "contribution": c}
                       for t, c in zip(point.budget.terms, point.budget.contributions)],
            "reported": reported(point.unit, result)}


def reported(unit: str, result: Result) -> dict:
    """The reading, error and U as printed: U to two significant digits, the reading and the
    error rounded to the same decimal place, each pair under one SI prefix (GUM 7.2.6)."""
    def spec_text(value: float, decimals: int | None, like: float | None) -> str:
        if result.error_unit == "deg":
            return f"{value:+.{max(decimals, 0)}f}°" if decimals is not None else f"{value:+.3g}°"
        if result.error_unit == "% of length":
            return f"{value:+.{max(decimals, 0)}f} %" if decimals is not None else f"{value:+.3g} %"
        text = (format_fixed(value, unit, decimals, like=like) if decimals is not None
                else format_quantity(value, unit))
        return text if text.startswith("-") else "+" + text

    if math.isfinite(result.expanded_value) and result.expanded_value > 0:
        value_round = round_result(value=result.reading, uncertainty=result.expanded_value)
        reading_text = format_fixed(value_round.value, unit, value_round.decimals, like=value_round.uncertainty)
        u_text = format_fixed(value_round.uncertainty, unit, value_round.decimals, like=value_round.value)
    else:
        reading_text, u_text = format_quantity(result.reading, unit), "—"
    if result.expanded > 0:
        err_round = round_result(value=result.error, uncertainty=result.expanded)
        error_text = spec_text(err_round.value, err_round.decimals, err_round.uncertainty)
        u_spec_text = spec_text(err_round.uncertainty, err_round.decimals, err_round.uncertainty).lstrip("+")
    else:
        error_text, u_spec_text = spec_text(result.error, None, None), "—"
    return {"reading": reading_text, "U": u_text, "error": error_text, "U_spec": u_spec_text}


def _conditions(environment: dict | None) -> str:
    """The conditions a resumed run was continued in, in words (empty when not known)."""
    if not environment:
        return ""
    parts = []
    if environment.get("temperature_c") is not None:
        parts.append(f"{environment['temperature_c']:g} °C")
    if environment.get("humidity_pct") is not None:
        parts.append(f"{environment['humidity_pct']:g} % relative humidity")
    return f"; conditions then {', '.join(parts)}" if parts else ""
