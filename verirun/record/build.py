"""Close a journal into a run record: the whole run, every point evaluated, in one document.

The points are evaluated again from the procedure text embedded in the journal's start document,
by the same functions the run used, so a record built today and one rebuilt in ten years from
the same journal are the same.
"""

from __future__ import annotations

import contextlib
import functools
from pathlib import Path

from pydantic import ValidationError

from verirun.bench.config import Bench, load_bench_text
from verirun.errors import ProcedureError, RecordError
from verirun.evaluation import Result, evaluate, shown
from verirun.functions import words_for
from verirun.metrology.summary import Judged, Summary, summarise
from verirun.procedure.load import Procedure, load_procedure_text
from verirun.procedure.plan import TestPoint, plan
from verirun.record import documents
from verirun.record.documents import (
    PointResult,
    Record,
    record_document,
    validate_row,
    validation_text,
)
from verirun.record.journal import (
    JOURNAL_NAME,
    RECORD_FORMAT,
    RECORD_NAME,
    dumps,
    json_number,
    line_hash,
    read_journal,
    verify_chain,
    write_record,
)


@functools.lru_cache(maxsize=16)
def _planned(
    procedure_text: str, procedure_source: str, bench_text: str, bench_source: str
) -> tuple[Procedure, Bench, tuple[TestPoint, ...]]:
    """The procedure and bench a journal's start document holds, loaded and planned.

    Kept for the last few (procedure, bench) texts: the runs of one procedure on one bench share
    them, and loading and planning is most of the time a rebuild of many folders takes
    (``benchmarks/register.py``). What it returns is never changed after planning.

    Raises
    ------
    ProcedureError
        If either does not load.
    """
    procedure = load_procedure_text(procedure_text, procedure_source)
    bench = load_bench_text(bench_text, bench_source)
    return procedure, bench, tuple(plan(procedure, bench))


#: What a run that has just ended planned: its procedure, its bench and its plan.
Made = tuple[Procedure, Bench, "list[TestPoint] | tuple[TestPoint, ...]"]


def _plan_of(start: dict, made: Made | None) -> tuple[Procedure, Bench, tuple[TestPoint, ...]]:
    """The procedure, bench and plan of the journal whose start document is ``start``: those
    the run ``made``, when the texts it journaled are theirs, else loaded and planned from the
    texts (see :func:`_planned`).

    A procedure and a bench are loaded from their text alone (a file's is its text and its
    name), so those the run loaded from the journaled texts plan as these would: the closing of
    a long run holds one plan, not two, and does not load and plan again what the run did.
    """
    procedure, bench = start["procedure"], start["bench"]
    if made is not None and (made[0].text, made[0].source, made[1].text, made[1].source) == (
        procedure["text"],
        procedure["source"],
        bench["text"],
        bench["source"],
    ):
        return made[0], made[1], tuple(made[2])
    return _planned(procedure["text"], procedure["source"], bench["text"], bench["source"])


def build_record(documents: list[dict], source: str = "journal") -> Record:
    """The run record of a journal's ``documents`` (see :func:`_build`), every part checked
    against its model (:mod:`verirun.record.documents`) as it is made.

    Raises
    ------
    RecordError
        If the journal is not one verirun writes, saying where.
    """
    with _not_fitting(source):
        return _build(documents, source)


def build_record_document(documents: list[dict], source: str = "journal") -> dict:
    """The run record of a journal's ``documents`` as the dict ``record.json`` holds (see
    :func:`build_record`): for comparing it with a stored record key by key.

    Raises
    ------
    RecordError
        If the journal is not one verirun writes, saying where.
    """
    return record_document(build_record(documents, source))


def close_record(run_dir: Path, made: Made | None = None) -> Record | None:
    """Build and write the run record of the journal in ``run_dir`` (``None`` if it is empty),
    and return it; ``record.json`` is written from the model, a row at a time. ``made`` is what
    the run that has just ended planned (its procedure, bench and plan): closing plans again only
    what it did not."""
    # The journal's lines are held by the build alone (a long run's journal is large).
    record = close_journal(Path(run_dir) / JOURNAL_NAME, made)
    if record is not None:
        write_record(record, Path(run_dir) / RECORD_NAME)
    return record


def close_journal(path, made: Made | None = None) -> Record | None:
    """The run record of the journal at ``path`` (``None`` when it holds no line), as
    :func:`build_record` builds it; the journal's parsed lines are held by the build
    alone, so each is let go once its row is made (a long run's lines are megabytes).

    ``made`` is what the run that has just ended planned (see :func:`_plan_of`).

    Raises
    ------
    RecordError
        If the journal cannot be read, or is not one verirun writes, saying where.
    """
    source = str(path)
    with _not_fitting(source):
        # The list goes straight to the build: no frame here keeps it (nor the typed models
        # that checked each line, which the build does not read).
        return _build(read_journal(path, models=False).documents, source, empty=True, made=made)


@contextlib.contextmanager
def _not_fitting(source: str):
    """Journal documents that each passed their own checks, yet do not close into a record,
    reported as a :class:`RecordError` naming ``source``."""
    try:
        yield
    except RecordError:
        raise
    except ValidationError as exc:
        # The documents passed the checks of each one alone, yet close into no record.
        raise RecordError(
            f"{source}: not a journal verirun writes (its record would not fit:"
            f" {validation_text(exc)})"
        ) from None
    except (KeyError, TypeError, ValueError, AttributeError, IndexError, ArithmeticError) as exc:
        # The documents passed the checks of each one alone, yet do not fit together.
        raise RecordError(
            f"{source}: not a journal verirun writes ({type(exc).__name__}: {exc})"
        ) from None


def _build(
    documents: list[dict], source: str = "journal", *, empty: bool = False, made: Made | None = None
) -> Record | None:
    """The run record of a journal's ``documents``: the same code path for the first closing of
    a run, a resume, an amendment and a rebuild (every reading is evaluated here, from the
    procedure and bench the journal holds).

    Once the confirmed entries are taken, the list is let go here, and each entry once its row
    is made: when no caller holds the list (:func:`close_journal`), the documents are freed as
    the rows take their place.

    Raises
    ------
    RecordError
        If the journal does not start with a start document, its chain is broken, or it names
        points its own procedure does not have.
    """
    if not documents and empty:  # a journal with no whole line closes into no record
        return None
    if not documents or documents[0].get("kind") != "start":
        raise RecordError(f"{source}: the journal does not begin with a start document")
    problems = verify_chain(documents, source)
    if problems:
        raise RecordError("\n".join(problems))
    start = documents[0]
    try:
        procedure, bench, planned = _plan_of(start, made)
    except ProcedureError as exc:
        raise RecordError(
            f"{source}: the procedure or bench stored in the journal does not load: {exc}"
        ) from None
    journal_format = start.get("journal_format", 1)
    after = _AfterTheRun(start, source)
    entries, corrections, notes, stop, revision, number = _entries(
        documents, planned, journal_format, source, after
    )
    last_line, count = line_hash(dumps(documents[-1])), len(documents)
    del documents
    rows = [
        _row(point, entries.pop(point.index, None), journal_format, corrections.get(point.index))
        for point in planned
    ]
    summary = summarise([row_judged(row) for row in rows], procedure.rule.name)
    status = stop["status"] if stop else "resumable"
    if status == "complete" and summary.not_measured:
        status = "incomplete"
    return Record.model_validate(
        {
            "record_format": 1 if journal_format < 2 else RECORD_FORMAT,
            "run": {
                "uid": start["uid"],
                "started": start["time"],
                "ended": stop["time"] if stop else None,
                "status": status,
                "reason": stop.get("reason") if stop else None,
                "operator": start["operator"],
                "software": start["software"],
                "journal_sha256_last": last_line,
                "documents": count,
                "revision": revision,
                **({"certificate_number": number} if number is not None else {}),
            },
            "lab": start["lab"],
            "customer": {"name": None, "address": [], **start["customer"]},
            "item": {
                "serial": None,
                "asset": None,
                "condition": None,
                "received": None,
                **start["item"],
            },
            "environment": start.get("environment", {}),
            **({"as_found": after.as_found} if after.as_found else {}),
            "procedure": start["procedure"],
            "bench": start["bench"],
            "meter": procedure.file.meter.model_dump(by_alias=True),
            "decision_rule": {
                "rule": procedure.rule.name,
                "statement": procedure.rule.describe(),
                "parameters": procedure.file.decision.model_dump(by_alias=True, exclude_none=True),
            },
            "ranges": [_range(rng) for rng in procedure.ranges],
            "points": rows,
            "notes": notes,
            "summary": summary_document(summary),
            **after.extra(),
        }
    )


def as_found_part(record: Record, *, adjustment: str) -> documents.AsFound:
    """What an as-left run's journal carries of the as-found run of ``record``: its uid,
    certificate number and date, its result rows and summary as its record holds them, and
    ``adjustment``, what was adjusted between the two runs."""
    from verirun.certificate.render import certificate_number

    return documents.AsFound(
        run=record.run.uid,
        certificate=certificate_number(record),
        date=record.run.started[:10],
        adjustment=adjustment,
        points=record.points,
        summary=record.summary,
    )


def record_judged(record: Record) -> list[Judged]:
    """The points of ``record`` as :func:`~verirun.metrology.summary.summarise` takes them (see
    :func:`row_judged`)."""
    return [row_judged(row) for row in record.points]


def row_judged(row: PointResult) -> Judged:
    """One row as :func:`~verirun.metrology.summary.summarise` takes it: a row of a record
    written before rows said whether the reading lies within tolerance is compared with its
    limits, exactly, as the numbers are written (see :meth:`PointResult.is_within_tolerance`)."""
    return Judged(key=row.key, verdict=row.verdict, within_tolerance=row.is_within_tolerance())


def summary_document(summary: Summary) -> documents.Summary:
    """The record's summary: every count, the overall outcome, the rejections by cause and the
    statement of conformity in words, all from :func:`~verirun.metrology.summary.summarise`."""
    return documents.Summary.model_validate(
        {
            **summary.counts(),
            "overall": summary.overall,
            "rejections": [
                {"key": r.key, "verdict": r.verdict, "cause": r.cause} for r in summary.rejections
            ],
            "guard_band_rejections": list(summary.guard_band_rejections),
            "statement": summary.statement(),
        }
    )


class _AfterTheRun:
    """What a journal says after (and about) its run, beyond the readings: who issued which
    revision (``issue``), an as-found run revised under an as-left run (``as-found``), and which
    notes are the lab's internal log rather than the customer's (journals of format 3 on)."""

    KINDS = ("issue", "as-found")  # the certificate number is taken by _entries itself

    def __init__(self, start: dict, source: str):
        self.source = source
        self.simulated = bool(start["bench"].get("simulated"))
        self.as_found = start.get("as_found")
        #: Journals of format 3 on keep the internal run log apart from the customer's notes.
        self.split = start.get("journal_format", 1) >= 3
        self.issues: list[dict] = []
        self.revisions: list[dict] = []
        self.log: list[dict] = []

    def note(self, notes: list, note: dict, *, internal: bool) -> None:
        (self.log if self.split and internal else notes).append(note)

    def take(self, doc: dict, revision: int, notes: list) -> int:
        """Take one ``issue`` or ``as-found`` document; return the revision after it."""
        where = f"{self.source}:{doc['seq'] + 1}: {doc['kind']}"
        if doc["kind"] == "issue":
            if self.simulated:
                raise RecordError(
                    f"{where}: issues a dry run on the simulated calibrator,"
                    " which is not a calibration"
                )
            if doc.get("revision") != revision:
                raise RecordError(
                    f"{where}: issues revision {doc.get('revision')!r},"
                    f" but the run is at revision {revision}"
                )
            if any(issue["revision"] == revision for issue in self.issues):
                raise RecordError(f"{where}: revision {revision} was issued already")
            self.issues.append(
                {key: doc.get(key) for key in ("revision", "time", "by", "role", "certificate")}
            )
            return revision
        revision += 1
        self.as_found = doc["as_found"]
        self.revisions.append(
            {
                "revision": revision,
                "time": doc["time"],
                "by": doc["operator"],
                "reason": doc["reason"],
                "what": "as-found results",
            }
        )
        notes.append(
            {
                "time": doc["time"],
                "point": None,
                "text": f"revision {revision}: the as-found results replaced by those of"
                f" certificate {doc['as_found'].get('certificate')} by {doc['operator']}:"
                f" {doc['reason']}",
            }
        )
        return revision

    def extra(self) -> dict:
        """The record's entries for these documents (none for a journal that has none of them,
        so a record of an earlier format is built as it was)."""
        out: dict = {}
        if self.issues:
            out["issues"] = self.issues
        if self.revisions:
            out["as_found_revisions"] = self.revisions
        if self.split:
            out["run_log"] = self.log
        return out


def _range(rng) -> dict:
    return {
        "id": rng.id,
        "function": rng.function,
        "function_name": words_for(rng.function),
        "unit": rng.unit,
        "scale": rng.law.name,
        "full_scale": rng.full_scale,
        "centre": getattr(rng.law, "centre", None),
        "arc": rng.arc,
        "accuracy": [b.text for b in rng.bands],
        "read_on": rng.read_on,
    }


def _entries(
    documents: list[dict],
    planned: list[TestPoint],
    journal_format: int,
    source: str,
    after: _AfterTheRun,
):
    """Each step's confirmed entry, the corrections, notes, last stop, revision and certificate
    number (the lab register's, or None) of a journal.

    A journal is a start, then sessions: entries and notes up to a stop; after a stop that is
    not complete, only a resume begins the next session; after a complete stop, only
    corrections (each a new revision), issues and revised as-found results, which ``after``
    takes, and at most one certificate-number document, before any issue (an issued
    certificate's number never changes). One entry per step: a second is an edit, not a reading.

    Raises
    ------
    RecordError
        Naming the document that breaks these rules.
    """
    entries: dict[int, dict] = {}
    corrections: dict[int, dict] = {}
    notes: list[dict] = []
    stop = None
    revision = 1
    number = None
    for doc in documents[1:]:
        kind = doc["kind"]
        where = f"{source}:{doc['seq'] + 1}: {kind}"
        if kind == "certificate-number":  # given by the lab register after the run closed complete
            if stop is None or stop["status"] != "complete":
                raise RecordError(
                    f"{where}: a certificate number for a run that is not closed complete;"
                    " the journal was edited"
                )
            if number is not None:
                raise RecordError(
                    f"{where}: a second certificate number (the run already has"
                    f" {number}); the journal was edited"
                )
            if after.issues:
                raise RecordError(
                    f"{where}: a certificate number given after the certificate was issued"
                    " (an issued certificate keeps its number); the journal was edited"
                )
            number = doc["number"]
            continue
        if (
            stop is not None
            and stop["status"] == "complete"
            and kind not in ("correction", *_AfterTheRun.KINDS)
        ):
            raise RecordError(
                f"{where}: written after the run was closed complete (only a"
                " correction, an issue, revised as-found results or the certificate"
                " number may follow); the journal was edited"
            )
        if stop is not None and stop["status"] != "complete" and kind != "resume":
            raise RecordError(
                f"{where}: written after a stop without a resume between; the journal was edited"
            )
        if kind in ("correction", *_AfterTheRun.KINDS) and (
            stop is None or stop["status"] != "complete"
        ):
            raise RecordError(
                f"{where}: written for a run that is not closed complete; the journal was edited"
            )
        if kind in _AfterTheRun.KINDS:
            revision = after.take(doc, revision, notes)
            continue
        if kind in ("observation", "skip", "correction"):
            point = _step_of(doc, planned, journal_format, where)
            if kind != "correction" and point.index in entries:
                raise RecordError(
                    f"{where}: a second entry for step {point.step}"
                    f" ({point.key_in(journal_format)});"
                    " a step has one confirmed entry, so the journal was edited"
                )
            if kind == "correction":
                revision += 1
                previous = entries.get(point.index)
                label = doc["point"]
                corrections[point.index] = {
                    "revision": revision,
                    "time": doc["time"],
                    "reason": doc["reason"],
                    "by": doc["operator"],
                    "previous_typed": previous.get("typed") if previous else None,
                }
                notes.append(
                    {
                        "time": doc["time"],
                        "point": label,
                        "text": f"revision {revision}: reading of"
                        f" {_step_label(point, label, journal_format)}"
                        f" corrected from {corrections[point.index]['previous_typed']!r} to"
                        f" {doc['typed']!r} by {doc['operator']}: {doc['reason']}",
                    }
                )
            entries[point.index] = doc  # a correction supersedes the entry it corrects
        elif kind == "withdrawal":
            point = _step_of(doc, planned, journal_format, where)
            withdrawn = entries.pop(point.index, None)
            after.note(
                notes,
                {
                    "time": doc["time"],
                    "point": doc["point"],
                    "text": f"entry {doc.get('typed')!r} of step {point.step} withdrawn by the"
                    " operator before the run went on, and measured again"
                    if withdrawn is not None
                    else "a withdrawal of an entry the journal does not hold",
                },
                internal=True,
            )
        elif kind == "note":
            after.note(
                notes,
                {"time": doc["time"], "point": doc.get("point"), "text": doc["text"]},
                internal=doc.get("by") != "operator",
            )
        elif kind == "resume":
            stop = None
            if doc["pending"] == 0 and doc.get("identity") is None:
                text = (
                    "run closed after an interruption: every step already had a confirmed entry,"
                    " so nothing was measured again"
                )
            else:
                text = f"run resumed after an interruption with {doc['pending']} points to go"
            renewed = doc.get("standard_renewed")
            if isinstance(renewed, dict):
                text += (
                    f"; the standard's calibration was renewed before it resumed: certificate"
                    f" {renewed.get('certificate')}, due {renewed.get('calibration_due')}"
                )
            anew = (
                _conditions(doc.get("environment"))
                if doc.get("environment") != documents[0].get("environment")
                else ""
            )
            after.note(
                notes,
                {
                    "time": doc["time"],
                    "point": None,
                    "text": text
                    + (
                        "; a cut-off last journal line was dropped"
                        if doc.get("recovered_torn_line")
                        else ""
                    )
                    + anew,
                },
                internal=True,
            )
            standard = (
                " with the standard's calibration renewed: certificate"
                f" {renewed.get('certificate')}, due {renewed.get('calibration_due')}"
                if isinstance(renewed, dict)
                else ""
            )
            if (
                anew or standard
            ) and after.split:  # the measurements' conditions are the customer's to read
                notes.append(
                    {
                        "time": doc["time"],
                        "point": None,
                        "text": f"the measurements continued after a pause{standard}{anew}",
                    }
                )
        elif kind == "stop":
            stop = doc
        else:
            raise RecordError(f"{where}: a second start document; the journal was edited")
    return entries, corrections, notes, stop, revision, number


def _step_label(point: TestPoint, label: str, journal_format: int) -> str:
    # Records of the first format named the point by its label alone; kept so they rebuild the same.
    return label if journal_format < 2 else f"step {point.step} ({label})"


def _step_of(doc: dict, planned: list[TestPoint], journal_format: int, where: str) -> TestPoint:
    """The step a journal entry is for: its ``index``, which must carry the step's label."""
    index = doc.get("index")
    if index is None and journal_format < 2:  # the first format's entries may lack it
        index = next((p.index for p in planned if p.legacy_key == doc["point"]), None)
    if index is None or not 0 <= index < len(planned):
        raise RecordError(
            f"{where}: names step {'?' if index is None else index + 1} ({doc['point']!r}),"
            f" which the procedure does not have (it has steps 1 to {len(planned)})"
        )
    point = planned[index]
    if doc["point"] != point.key_in(journal_format):
        raise RecordError(
            f"{where}: names point {doc['point']!r} at step {point.step}, which is"
            f" {point.key_in(journal_format)!r} in the procedure"
        )
    return point


def _row(
    point, doc: dict | None, journal_format: int = 2, correction: dict | None = None
) -> PointResult:
    """The record's row of ``point``, from its confirmed entry ``doc`` (none: not measured)."""
    extra = {} if correction is None else {"correction": correction}
    win = point.window
    row = {
        "index": point.index,
        "key": point.key_in(journal_format),
        "range": point.range.id,
        "unit": point.unit,
        "nominal": point.nominal,
        "frequency": point.frequency,
        "stimulus": point.stimulus_text(),
        "low": json_number(win.low),
        "high": json_number(win.high),
        "domain": win.domain,
        "half_width": win.half_width,
        "accuracy": point.accuracy_text,
        "limits_text": "{low} to {high}".format(**shown(point)),
        # Filled in below for a measured point; present (as None) for every row so that a
        # certificate template never meets a missing key.
        "reading": None,
        "typed": None,
        "time": None,
        "error": None,
        "error_unit": None,
        "percent_of_tolerance": None,
        "U": None,
        "U_spec": None,
        "k": None,
        "tur": None,
        "conformance": None,
        "accept_low": None,
        "accept_high": None,
        "U_pct": None,
        "accept_low_pct": None,
        "accept_high_pct": None,
        "budget": [],
        "reported": None,
    }
    if doc is None:
        return validate_row({**row, "verdict": "not-measured", **extra})
    if doc["kind"] not in ("observation", "correction"):
        return validate_row(
            {
                **row,
                "verdict": "skipped",
                "time": doc["time"],
                "skip_reason": doc["reason"],
                **extra,
            }
        )
    reading = doc["reading"]
    result = evaluate(point, reading)
    interval = result.interval
    return validate_row(
        {
            **row,
            "verdict": result.verdict,
            "within_tolerance": result.within_tolerance,
            "interval": [json_number(interval[0]), json_number(interval[1])] if interval else None,
            "reading": reading,
            "typed": doc["typed"],
            "time": doc["time"],
            "error": result.error,
            "error_unit": result.error_unit,
            "percent_of_tolerance": result.percent_of_tolerance,
            "U": json_number(result.expanded_value),
            "U_spec": result.expanded,
            "k": result.k,
            "tur": json_number(result.tur),
            "conformance": result.conformance,
            "accept_low": json_number(result.acceptance[0]) if result.acceptance else None,
            "accept_high": json_number(result.acceptance[1]) if result.acceptance else None,
            # Acceptance limits as percent of tolerance only where the rule moves them off the
            # tolerance limits (they are drawn on the error chart).
            "U_pct": result.expanded_pct,
            "accept_low_pct": result.accept_low_pct if point.rule.name != "simple" else None,
            "accept_high_pct": result.accept_high_pct if point.rule.name != "simple" else None,
            "budget": [
                {
                    "name": t.name,
                    "u": t.standard_uncertainty,
                    "domain": t.domain,
                    "distribution": t.distribution,
                    "contribution": c,
                }
                for t, c in zip(point.budget.terms, point.budget.contributions)
            ],
            "reported": reported(point, result, doc["typed"]),
            **extra,
        }
    )


def reported(point: TestPoint, result: Result, typed: str) -> dict:
    """The row's numbers as printed (see :func:`verirun.evaluation.shown`): the reading as
    typed, the limits, the error and U (GUM 7.2.6), under one SI prefix."""
    return shown(point, result, typed)


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
