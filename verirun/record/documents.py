"""Every kind of document a run's journal holds, and the run record it closes into, as one
strict model each: the one module a reader needs for what a run is, as stored.

A journal is a sequence of small documents, one per line, each chained to the line before it
(see :mod:`verirun.record.journal`). This module is the one place that says what each document holds
and what every field means; :data:`Document` is the union of them all, told apart by ``kind``.

========== ==================================================================================
kind        written when
========== ==================================================================================
start       a run begins: the procedure and bench as run, the lab, customer, item, operator
resume      a stopped run is continued (by ``verirun resume``)
observation the operator (or a replay file, or a virtual meter) gave a reading at a step
skip        a step was skipped, with the operator's reason
note        a remark at a step or for the run (operator notes, hazardous output confirmed,
            errors cleared from the calibrator's queue, an abort)
withdrawal  the operator withdrew the last entry (``undo``) before the run went on; the
            step is measured again
correction  a reading of a finished run was corrected (``verirun amend``): a new revision
stop        the run ended: complete, aborted or failed, with the reason
issue       a person the lab profile lists issued a revision's certificate (``verirun issue``)
as-found    the as-found run of an as-left run was amended: its results, a new revision
certificate-number
            the lab register gave the complete run its certificate number
========== ==================================================================================

Documents are made here (:func:`compose`, validated against their model as they are made) and
validated again when they are read back (:func:`read_document`, after the strict parse of
:func:`parse_json`), so a damaged or crafted journal is reported by file and line before
anything reads it. What is read back is these models, frozen (no field can be set again; the
lists a field holds are not copied, so nothing here changes them): code outside this package
reads a document by attribute (``start.procedure.text``), never by key. The JSON Schema of the union
(:func:`journal_schema`) ships with the package as ``schema/journal.schema.json``.

Journal formats: 3 marks an operator's note ``by: operator``, so the run's internal log (every
other note) is kept apart from what the customer reads; 2 (``journal_format`` in the start
document) labels points by their values as the procedure writes them (``dca-50u@10uA``) and
identifies them by step; 1 (no ``journal_format``) labelled them by the float's repr
(``dca-50u@9.999999999999999e-06``). All are read as they are.

The run record (``record.json``, built from a journal by :mod:`verirun.record.build`: the whole
run, every point evaluated, in one document) has one model per part; the parts of the start
document it carries as journaled (lab, customer, item, environment, procedure, bench) are the
journal's own models:

======================== ===========================================================================
part                     what it is
======================== ===========================================================================
:class:`Record`          the whole record: the run, who and what, the method, every point, the
                         summary
:class:`RunPart`         the run: its identity, times, status, revision and the journal it closes
:class:`MeterPart`       the kind of meter the procedure verifies
:class:`DecisionRule`    the decision rule, in words and as the procedure states it
:class:`RangeEntry`      one range of the meter, as the procedure describes it
:class:`PointResult`     one row per test point: limits, reading, error, U, TUR, verdict
:class:`Reported`        a row's numbers as printed (:class:`EarlierReported` in formats 1 and 2)
:class:`BudgetTerm`      one contribution to a point's uncertainty
:class:`CorrectionEntry` a reading corrected after the run (a new revision)
:class:`NoteEntry`       a note for a point or for the run
:class:`Summary`         the counts by verdict, the overall outcome and the statement of conformity
:class:`Rejection`       one point not accepted, and why
:class:`IssueEntry`      a revision's certificate issued, by whom
:class:`Revision`        the as-found results of an as-left run revised
:class:`AsFound`         for an as-left run: the as-found run's results and what was adjusted
======================== ===========================================================================

Record formats (``record_format``): 3, the current one, is what journals of format 2 on close
into: rows say whether the reading lies within tolerance (``within_tolerance``), carry the
coverage interval (``interval``) and every number as printed (:class:`Reported`, all its keys),
and the summary counts all four statements and names each rejection by its cause. 2 (records
written while journals of format 2 were new) and 1 (journals of format 1) lack those; their rows
are otherwise the same. Every field that only some formats hold is optional here, and says so;
an absent key stays absent when a record is written again (see :func:`record_document`).

Records are checked against their models when read (:func:`validate_record`, by
:func:`verirun.record.journal.load_record`) and when built; the JSON Schema of :class:`Record`
(:func:`record_schema`) ships with the package as ``schema/record.schema.json``.
"""

from __future__ import annotations

import dataclasses
import functools
import json
import math
from typing import Annotated, Any, Literal, Union, get_args

from pydantic import MISSING, BaseModel, ConfigDict, Field, Strict, TypeAdapter, ValidationError
from pydantic.dataclasses import dataclass

#: Version of the journal document layout described here (see the module's docstring).
JOURNAL_FORMAT = 3
#: Version of the run record layout. 3: rows say whether the reading lies within tolerance and
#: carry its coverage interval and every number as printed; U is the reported U (GUM 7.2.6);
#: the summary counts all four statements and names the rejections by cause.
RECORD_FORMAT = 3

Sha256 = Annotated[str, Field(pattern=r"^[0-9a-f]{64}$", description="a SHA-256 digest, hex")]
Time = Annotated[
    str,
    Field(
        pattern=r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?Z$",
        description="UTC time, ISO 8601 with a Z",
    ),
]
Date = Annotated[str, Field(pattern=r"^\d{4}-\d\d-\d\d$", description="a calendar date, ISO 8601")]
Reading = Annotated[float, Field(allow_inf_nan=False)]


def _kind() -> Any:
    """The ``kind`` field of a document: its literal names the kind (see the table above)."""
    return Field(description="the kind of document, as the table of kinds names it")


class Part(BaseModel):
    """A part of a document: strict, frozen, no keys but those described."""

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class Chained(Part):
    """What every document carries, added by the journal as it writes the line."""

    seq: int = Field(ge=0, description="position in the journal, from 0, no gaps")
    prev: Sha256 = Field(description="SHA-256 of the line before (64 zeros for the first)")
    time: Time = Field(description="when the document was written")


# --- the start document and its parts ---------------------------------------------------------


class Software(Part):
    """The program that wrote the journal."""

    name: str = Field(description="the program that wrote the journal")
    version: str = Field(description="its version")


class ProcedureAsRun(Part):
    """The procedure the run followed, its whole text included."""

    id: str = Field(description="the procedure's identifier")
    title: str = Field(description="its title")
    revision: str = Field(description="its revision")
    sha256: Sha256 = Field(description="SHA-256 of the procedure file's text")
    source: str = Field(description="where the file was read from")
    text: str = Field(description="the whole procedure file, as run")


class CalibratorAsRun(Part):
    """The reference standard (the calibrator) the run used, and what it answered to *IDN?."""

    description: str = Field(description="what the reference standard is")
    asset: str = Field(description="the lab's asset number of the standard")
    identity: str | None = Field(
        description="what the instrument answered to *IDN? (none when it did not answer)"
    )
    resource: str = Field(description="its VISA resource string")
    certificate: str = Field(description="the standard's own calibration certificate")
    calibration_due: Date = Field(description="when the standard's calibration is due")
    traceability: str | None = Field(
        description="the traceability statement of the standard (none if the bench file gives none)"
    )


class BenchAsRun(Part):
    """The bench the run was made on, its whole bench file included."""

    id: str = Field(description="the bench's identifier")
    location: str | None = Field(
        description="where the bench is (none if the bench file names no place)"
    )
    sha256: Sha256 = Field(description="SHA-256 of the bench file's text")
    source: str = Field(description="where the file was read from")
    text: str = Field(description="the whole bench file, as run")
    simulated: bool = Field(description="true for a dry run on the simulated calibrator")
    calibrator: CalibratorAsRun


class Signatory(Part):
    """The one signatory of an older lab profile."""

    name: str = Field(description="who signs the lab's certificates")
    title: str = Field(description="their title")


class Wording(Part):
    """The lab's standard sentences printed on its certificates."""

    relate_only: str = Field(description="the results relate only to the item calibrated")
    reproduction: str = Field(description="the certificate may be reproduced only in full")
    safety: str = Field(description="the lab's safety caution")


class Person(Part):
    """A person the lab authorises to issue certificates."""

    name: str = Field(description="a person the lab authorises to issue certificates")
    role: str = Field(description="the role they issue in")


class LabAsRun(Part):
    """The calibration laboratory, as its lab profile stood when the run began."""

    name: str = Field(description="the lab's name, as its certificates give it")
    address: list[str] = Field(description="lines of the lab's address")
    accreditation: str | None = Field(
        description="the lab's accreditation (null when its profile gives none)"
    )
    certificate_prefix: str = Field(description="prefix of the lab's certificate numbers")
    signatory: Signatory | None = Field(
        default=None, description="an older profile's one signatory"
    )
    people_who_issue: list[Person] = Field(default=[], description="who may issue certificates")
    traceability: str = Field(description="the lab's statement of metrological traceability")
    conditions: str | None = Field(
        description="the lab's stated environmental conditions (null when its profile states none)"
    )
    paper: Literal["A4", "letter"] = Field(description="paper size of printed certificates")
    wording: Wording
    spelling: Literal["british", "american"] = Field(
        default="british", description="the certificates' spelling"
    )
    remarks: list[str] = Field(default=[], description="remarks printed on every certificate")


class Customer(Part):
    """Whose meter is calibrated."""

    name: str = Field(description="the customer's name")
    address: list[str] = Field(default=[], description="lines of the customer's address")


class Item(Part):
    """The meter under test."""

    serial: str = Field(description="serial number of the meter under test")
    asset: str | None = Field(default=None, description="the customer's asset number, if given")
    condition: str | None = Field(
        default=None, description="condition of the item as received (none: not recorded)"
    )
    received: Date | None = Field(default=None, description="date the item was received")


class Environment(Part):
    """The laboratory's conditions as the run began (each absent when not recorded)."""

    temperature_c: float | None = Field(
        default=None, allow_inf_nan=False, description="laboratory temperature at the start, °C"
    )
    humidity_pct: float | None = Field(
        default=None, allow_inf_nan=False, description="relative humidity at the start, %"
    )


class AsFound(Part):
    """For an as-left run: the as-found run it follows, its results as its record holds them
    (the record's own models, :class:`PointResult` and :class:`Summary`, defined below) and
    what was adjusted."""

    run: str = Field(description="uid of the as-found run")
    certificate: str = Field(description="the as-found run's certificate number")
    date: str = Field(description="when the as-found run was made")
    adjustment: str = Field(description="what was adjusted between the two runs")
    points: list[PointResult] = Field(description="the as-found record's result rows")
    summary: Summary = Field(description="the as-found record's summary")


class Start(Chained):
    """A run begins: everything needed to replay and certify it."""

    kind: Literal["start"] = _kind()
    journal_format: int | None = Field(
        default=None, ge=2, description="the journal's format (absent in format 1)"
    )
    uid: str = Field(pattern=r"^[0-9a-f]{32}$", description="the run's identity")
    software: Software
    procedure: ProcedureAsRun
    bench: BenchAsRun
    lab: LabAsRun
    customer: Customer
    item: Item
    operator: str = Field(description="who ran it")
    environment: Environment
    as_found: AsFound | None = Field(default=None, description="set for an as-left run")
    reports: str | None = Field(
        default=None, description="the folder the run's certificate goes to"
    )


# --- documents written during the run ---------------------------------------------------------

PointKey = Annotated[
    str,
    Field(
        description="the test point's label: range@nominal[@frequency], as"
        " the procedure writes them (format 1: their float repr)"
    ),
]
Step = Annotated[int, Field(ge=0, description="the step's index in the plan, from 0")]


class Renewal(Part):
    """The standard's calibration renewed between a stop and the resume (its bench file then
    differs from the run's only in these)."""

    certificate: str = Field(description="the standard's new calibration certificate")
    calibration_due: Date = Field(description="when the renewed calibration is due")
    traceability: str | None = Field(description="the traceability statement of the standard")
    bench_sha256: Sha256 = Field(description="SHA-256 of the bench file resumed with")
    bench_source: str = Field(description="where that file was read from")
    bench_text: str = Field(description="the whole bench file resumed with")


class Resume(Chained):
    """A stopped run is continued; with ``pending`` 0 and no ``identity``, a run whose every step
    had an entry is closed without the bench."""

    kind: Literal["resume"] = _kind()
    identity: str | None = Field(
        description="the calibrator's identity, as it answered now (none"
        " when the run was closed without the bench)"
    )
    pending: int = Field(ge=0, description="how many steps were still to be measured")
    recovered_torn_line: bool = Field(description="whether a torn last line was cut off")
    recovered_text: str | None = Field(description="the text of that torn line, kept")
    environment: Environment | None = Field(
        default=None, description="the conditions when it was continued"
    )
    standard_renewed: Renewal | None = Field(
        default=None,
        description="set when the standard's calibration was renewed before the resume",
    )


class Applied(Part):
    """The stimulus the calibrator applied at the step."""

    value: Reading = Field(description="the stimulus the calibrator was set to, SI units")
    frequency: Reading | None = Field(description="its frequency in Hz (AC), or none")


class Observation(Chained):
    """A reading at a step, as it was typed (or replayed) and as it was understood."""

    kind: Literal["observation"] = _kind()
    point: PointKey
    index: Step
    range: str = Field(description="the range's id")
    function: str = Field(description="the measurement function")
    applied: Applied
    typed: str = Field(description="exactly what was typed or replayed")
    reading: Reading = Field(description="the reading, in SI units")


class Skip(Chained):
    """A step skipped by the operator."""

    kind: Literal["skip"] = _kind()
    point: PointKey
    index: Step
    reason: str | None = Field(description="why it was skipped")
    typed: str = Field(description="exactly what was typed")


class Note(Chained):
    """A remark at a step (``point``) or for the run as a whole (``point`` none)."""

    kind: Literal["note"] = _kind()
    point: PointKey | None = Field(description="the step it is for (none: the run as a whole)")
    text: str = Field(description="the remark")
    hazardous: bool | None = Field(
        default=None, description="true when it records hazardous output permitted"
    )
    clock_went_back: Time | None = Field(
        default=None,
        description="set when the computer's clock"
        " went back: the time it then gave (the note is dated at"
        " the latest time journaled before)",
    )
    by: Literal["operator"] | None = Field(
        default=None,
        description="set on an operator's note"
        " (journal format 3): the rest is the run's internal log",
    )


class Withdrawal(Chained):
    """The operator withdrew the last entry (``undo``) before the run went on; a later entry for
    the step replaces it, and until there is one the step counts as not measured."""

    kind: Literal["withdrawal"] = _kind()
    point: PointKey
    index: Step
    typed: str = Field(description="what was typed for the entry withdrawn")
    reason: str = Field(description="why it was withdrawn")


class Correction(Chained):
    """A reading of a finished run corrected, making the record's next revision."""

    kind: Literal["correction"] = _kind()
    point: PointKey
    index: Step
    typed: str = Field(description="the corrected reading as typed")
    reading: Reading = Field(description="the corrected reading, SI units")
    reason: str = Field(description="why it was corrected")
    operator: str = Field(description="who corrected it")


class Stop(Chained):
    """The run ended."""

    kind: Literal["stop"] = _kind()
    status: Literal["complete", "aborted", "failed"] = Field(
        description="how the run ended: complete (every step done), aborted (by the operator or a"
        " signal) or failed (by a fault of the bench, the disk or the program)"
    )
    reason: str | None = Field(description="why it stopped, naming the step (none when complete)")
    counts: dict[str, int] = Field(description="results so far by verdict, and skipped steps")


class Issue(Chained):
    """A revision's certificate issued, after review, by a person the lab profile lists."""

    kind: Literal["issue"] = _kind()
    by: str = Field(description="who issued it, as the lab profile names them")
    role: str = Field(description="the role they issued it in, from the lab profile")
    revision: int = Field(ge=1, description="the revision of the record issued")
    certificate: str = Field(description="the number of the certificate issued")


class AsFoundRevised(Chained):
    """The as-found run of this (as-left) run was amended: its new results, a new revision."""

    kind: Literal["as-found"] = _kind()
    as_found: AsFound
    reason: str = Field(description="why the as-found run was amended")
    operator: str = Field(description="who amended it")


class CertificateNumber(Chained):
    """The certificate number the lab register gave the complete run (once; written after its
    stop document, when the run is sent to the register, and before any issue)."""

    kind: Literal["certificate-number"] = _kind()
    number: str = Field(description="the certificate number, in the lab's sequence")
    register_url: str = Field(description="the register that gave it (its URL without a password)")


Document = Annotated[
    Union[
        Start,
        Resume,
        Observation,
        Skip,
        Note,
        Withdrawal,
        Correction,
        Stop,
        Issue,
        AsFoundRevised,
        CertificateNumber,
    ],
    Field(discriminator="kind"),
]


def validate_document(data: Any) -> BaseModel:
    """The document model of ``data`` (a parsed journal line).

    Raises
    ------
    pydantic.ValidationError
        If it is not one of the document kinds, or a field does not fit.
    """
    return _ADAPTER.validate_python(data)


def read_document(data: Any) -> BaseModel:
    """The document model of one parsed journal line, validated once.

    Raises
    ------
    ValueError
        Saying in one line what is wrong, when it is not a document of one of the kinds
        described here.
    """
    if not isinstance(data, dict):
        raise ValueError("not a journal document (not a JSON object)")
    kind = data.get("kind")
    if kind not in KINDS:
        raise ValueError(f"unknown document kind {kind!r}")
    try:
        return validate_document(data)
    except ValidationError as exc:
        error = exc.errors()[0]
        where = ".".join(str(part) for part in error["loc"][1:]) or kind
        raise ValueError(
            f"{kind}: field {where}: {error['msg']}"
            + (f" (got {_shown(error['input'])})" if error["type"] != "missing" else "")
        ) from None


def document_problem(data: Any) -> str | None:
    """What is wrong with one parsed journal line, in one line (``None`` when it is a document
    of one of the kinds described here)."""
    try:
        read_document(data)
    except ValueError as exc:
        return str(exc)
    return None


def as_journaled(part: BaseModel) -> dict:
    """A document, or a part of one, as the journal holds it: the fields it was made or read
    with, and no others (an optional field left out stays out, rather than becoming null)."""
    return part.model_dump(by_alias=True, exclude_unset=True)


def compose(kind: str, *, time: str, **fields: Any) -> dict:
    """A new document of ``kind``, as :meth:`verirun.record.journal.Journal.append` takes it.

    The one place documents are made: ``time`` is the caller's (from its clock), the keys are
    the fields given and no others (an optional field not given stays absent, never null), a
    part may be given as its model (:class:`Environment`, :class:`Renewal`...), and the whole is
    validated against the kind's model here, as it would be when read back (the journal adds
    ``seq`` and ``prev``).

    Raises
    ------
    ValueError
        If the fields do not make a document of that kind (a bug in the caller).
    """
    doc = {
        "kind": kind,
        "time": time,
        **{
            name: as_journaled(value) if isinstance(value, BaseModel) else value
            for name, value in fields.items()
        },
    }
    try:
        read_document({**doc, "seq": 0, "prev": "0" * 64})
    except ValueError as exc:
        raise ValueError(f"not a document verirun writes: {exc}") from None
    return doc


#: Every document kind, from the models (so a new kind cannot be left out here).
KINDS = tuple(
    get_args(model.model_fields["kind"].annotation)[0] for model in get_args(get_args(Document)[0])
)


def _shown(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    seen: dict = {}
    for key, value in pairs:
        if key in seen:
            raise ValueError(f"the key {key!r} appears twice")
        seen[key] = value
    return seen


def _no_constant(name: str):
    raise ValueError(f"{name} is not a number verirun writes")


def parse_json(text: str) -> Any:
    """Parse stored JSON strictly: no NaN or infinity, no key twice, no runaway nesting.

    Raises
    ------
    ValueError
        Saying what is wrong.
    """
    try:
        return json.loads(text, object_pairs_hook=_no_duplicates, parse_constant=_no_constant)
    except RecursionError:  # the parser recurses once per level of nesting
        raise ValueError("nested too deep to be a document verirun writes") from None


def journal_schema() -> dict:
    """The JSON Schema of one journal line."""
    return _ADAPTER.json_schema()


# === the run record =============================================================================
#
# A journal closes into a run record (record.json, built by verirun.record.build): the whole run,
# every point evaluated, in one document. Its parts follow, one model each; the parts of the start
# document it carries as journaled (lab, customer, item, environment, procedure, bench) are the
# journal's own models above.


#: A number as the record writes it: an int stays an int and a float a float (so a record reads
#: back to the same bytes); never NaN or infinite (an unbounded limit is ``None``).
Number = Annotated[float, Field(allow_inf_nan=False)] | int
#: A :data:`Number` checked strictly where no strict model's configuration says so.
StrictNumber = Annotated[float, Strict(), Field(allow_inf_nan=False)] | Annotated[int, Strict()]
#: A statement a decision rule makes about one result (ILAC-G8:09/2019 4.2.3).
Statement = Literal["pass", "conditional-pass", "conditional-fail", "fail"]
#: What a row shows: a statement, or that the point was skipped or not measured.
Verdict = Literal["pass", "conditional-pass", "conditional-fail", "fail", "skipped", "not-measured"]
Domain = Literal["value", "deflection"]
Key = Annotated[
    str,
    Field(
        description="the test point's label: range@nominal[@frequency], as the procedure writes"
        " them (record format 1: their float repr)"
    ),
]


# --- the run ----------------------------------------------------------------------------------


class RunPart(Part):
    """The run: who ran it, when, how it ended, and the journal the record closes."""

    uid: str = Field(pattern=r"^[0-9a-f]{32}$", description="the run's identity")
    started: Time = Field(description="when the run began (its start document's time)")
    ended: Time | None = Field(
        description="when it last stopped (none while it can still be resumed)"
    )
    status: Literal["complete", "incomplete", "aborted", "failed", "resumable"] = Field(
        description="how it ended: complete; incomplete (stopped complete with points not"
        " measured); aborted; failed; resumable (no stop journaled: interrupted)"
    )
    reason: str | None = Field(description="why it stopped, naming the step (none when complete)")
    operator: str = Field(description="who ran it")
    software: Software = Field(description="the program that wrote the journal")
    journal_sha256_last: Sha256 = Field(
        description="SHA-256 of the last journal line the record was closed from"
    )
    documents: int = Field(ge=1, description="how many journal documents it was closed from")
    revision: int = Field(
        ge=1,
        description="the record's revision: 1, and one more per correction or as-found revision",
    )
    certificate_number: str | None = Field(
        default=None,
        description="the number the lab register gave the run (absent until it gave one)",
    )


class MeterPart(Part):
    """The kind of meter the procedure verifies, as its file states it."""

    kind: str = Field(description="what kind of meter it is")
    maker: str | None = Field(description="who makes it (none if the procedure does not say)")
    model: str | None = Field(description="its model (none if the procedure does not say)")


class RuleParameters(Part):
    """The decision rule as the procedure file states it (keys with hyphens, as in the file)."""

    rule: Literal["simple", "guarded", "non-binary", "risk"] = Field(description="the rule")
    guard_ratio: Number | None = Field(
        default=None,
        alias="guard-ratio",
        description="r in w = r U (guarded and non-binary rules; absent when not stated)",
    )
    risk_target: str | Number | None = Field(
        default=None,
        alias="risk-target",
        description="the largest probability of false accept the risk rule allows, as written"
        " (absent when not stated)",
    )


class DecisionRule(Part):
    """The decision rule the verdicts were made under (ISO/IEC 17025:2017 7.1.3)."""

    rule: Literal["simple", "guarded", "non-binary", "risk"] = Field(description="its name")
    statement: str = Field(description="the rule in words, as the certificate prints it")
    parameters: RuleParameters = Field(description="the rule as the procedure states it")


class RangeEntry(Part):
    """One range of the meter, as the procedure describes it."""

    id: str = Field(description="the range's id")
    function: str = Field(description="the measurement function (dc-voltage, resistance, ...)")
    function_name: str = Field(description="the function in words")
    unit: str = Field(description="the range's unit")
    scale: Literal["linear", "series-ohms", "shunt-ohms"] = Field(
        description="the scale law the pointer follows"
    )
    full_scale: Number | None = Field(description="full-scale value (linear scales; else none)")
    centre: Number | None = Field(description="centre-scale value (ohms scales; else none)")
    arc: Number | None = Field(description="the scale's arc in degrees (none if not stated)")
    accuracy: list[str] = Field(description="the accuracy statements, as written")
    read_on: str | None = Field(description="which scale of the dial the range is read on")


# --- a row ------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, config=ConfigDict(extra="forbid"))
class BudgetTerm:
    """One contribution to the uncertainty of a point (JCGM 100 5.1)."""

    # A validated, frozen dataclass with slots rather than a model: every row holds a few, and
    # a model keeps a set of the names of its fields given, with its own dict, in each one
    # (about 1 KB a term). Every field is always given, so there is nothing for that set to
    # tell; each field is strict, as a part's are.
    name: Annotated[str, Strict()] = Field(
        description="what contributes (the calibrator, readability, ...)"
    )
    u: StrictNumber = Field(description="its standard uncertainty, in the unit of its domain")
    domain: Domain = Field(description="the domain it is stated in: value or deflection")
    distribution: Annotated[str, Strict()] = Field(
        description="its assumed distribution (normal, rectangular, ...)"
    )
    contribution: StrictNumber = Field(description="its contribution to the combined uncertainty")


#: A text as a record writes it, checked strictly where no strict model's configuration says so.
Text = Annotated[str, Strict()]


@dataclass(frozen=True, slots=True, config=ConfigDict(extra="forbid"))
class Reported:
    """A measured row's numbers as printed (see :func:`verirun.evaluation.shown`), under one SI
    prefix: every key, in records of format 3 (records of formats 1 and 2 hold
    :class:`EarlierReported`).

    A validated, frozen dataclass with slots, as :class:`BudgetTerm` is: every measured row holds
    one, and every field is always given."""

    reading: Text | None = Field(description="the reading as typed, its digits kept")
    error: Text = Field(description="the error, rounded to U's last digit, in the error's unit")
    U_spec: Text = Field(description="U (k = 2) in the error's unit, two significant digits")
    U: Text | None = Field(
        description="U in the range's unit where the tolerance is stated on the value, else none"
    )
    unit: Text | None = Field(description="the row's prefixed unit")
    nominal: Text | None = Field(description="the nominal value")
    low: Text | None = Field(description="the lower tolerance limit")
    high: Text | None = Field(description="the upper tolerance limit")
    accept_low: Text | None = Field(
        description="lower acceptance limit; none when the rule leaves none"
    )
    accept_high: Text | None = Field(
        description="upper acceptance limit; none when the rule leaves none"
    )
    outer_low: Text | None = Field(description="non-binary rule: the limit w below the tolerance")
    outer_high: Text | None = Field(description="non-binary rule: the limit w above the tolerance")
    interval: Text | None = Field(
        description="the reading's coverage interval in the range's unit, as the scale law maps"
        " it (none when U is zero)",
    )


@dataclass(frozen=True, slots=True, config=ConfigDict(extra="forbid"))
class EarlierReported:
    """A measured row's numbers as printed, in records of formats 1 and 2: the reading, the
    error and U only (see :class:`Reported`)."""

    reading: Text | None = Field(description="the reading as typed, its digits kept")
    error: Text = Field(description="the error, rounded to U's last digit, in the error's unit")
    U_spec: Text = Field(description="U (k = 2) in the error's unit, two significant digits")
    U: Text | None = Field(
        description="U in the range's unit where the tolerance is stated on the value, else none"
    )


class CorrectionEntry(Part):
    """A reading corrected after the run closed: the record's next revision."""

    revision: int = Field(ge=2, description="the revision the correction made")
    time: Time = Field(description="when it was corrected")
    reason: str = Field(description="why")
    by: str = Field(description="who corrected it")
    previous_typed: str | None = Field(
        description="the entry corrected, as typed (none if the step had no reading)"
    )


@dataclass(frozen=True, slots=True, config=ConfigDict(extra="forbid"))
class PointResult:
    """One test point of the plan, with its result: a row of the certificate's results table.

    Every row holds every key up to ``reported`` (``None`` where there is nothing: an unmeasured
    point has no reading); ``within_tolerance`` and ``interval`` are in measured rows of format
    3, ``skip_reason`` in skipped rows, ``correction`` in corrected ones.
    """

    # A validated, frozen dataclass with slots, as BudgetTerm is: a record holds one row per
    # step, and a model would keep in each a set of the names of the keys it was given (2.2 KB
    # for a row's 34). A key a row does not hold is pydantic's MISSING (never written), not
    # None: read those through is_within_tolerance, reason_skipped and corrected. Every field
    # is strict, as a part's are.

    index: Annotated[int, Strict()] = Field(
        ge=0, description="the step's index in the plan, from 0"
    )
    key: Annotated[Key, Strict()] = Field()
    range: Text = Field(description="the range's id")
    unit: Text = Field(description="the range's unit")
    nominal: StrictNumber = Field(description="the nominal value applied, in the range's unit")
    frequency: StrictNumber | None = Field(description="its frequency in Hz (AC), or none")
    stimulus: Text = Field(description="what the calibrator applied, in words")
    low: StrictNumber | None = Field(description="the lower tolerance limit (none: unbounded)")
    high: StrictNumber | None = Field(description="the upper tolerance limit (none: unbounded)")
    domain: Domain = Field(
        description="where the tolerance is stated: on the value, or along the scale (deflection)"
    )
    half_width: StrictNumber = Field(description="the tolerance's half-width, in its domain's unit")
    accuracy: Text = Field(description="the accuracy statement that sets the tolerance")
    limits_text: Text = Field(description="the tolerance limits as printed")
    verdict: Verdict = Field(description="the statement made, or skipped, or not-measured")
    reading: StrictNumber | None = Field(description="the reading, SI units (none: not measured)")
    typed: Text | None = Field(description="the reading exactly as typed or replayed")
    time: Annotated[Time, Strict()] | None = Field(description="when it was read or skipped")
    error: StrictNumber | None = Field(description="reading minus nominal, in the error's unit")
    error_unit: Text | None = Field(
        description="the error's unit: the range's, or deg / % of length along the scale"
    )
    percent_of_tolerance: StrictNumber | None = Field(
        description="the error as percent of the tolerance's half-width (none for a zero tolerance)"
    )
    U: StrictNumber | None = Field(
        description="the expanded uncertainty (k = 2) in the range's unit (none: unbounded);"
        " from format 3, U as reported (JCGM 100 7.2.6)"
    )
    U_spec: StrictNumber | None = Field(description="the expanded uncertainty in the error's unit")
    k: StrictNumber | None = Field(description="the coverage factor")
    tur: StrictNumber | None = Field(
        description="test uncertainty ratio: the tolerance's span over 2U (none: U is zero)"
    )
    conformance: StrictNumber | None = Field(
        description="probability that the true value lies within the tolerance"
    )
    accept_low: StrictNumber | None = Field(
        description="lower acceptance limit (none: none or unbounded)"
    )
    accept_high: StrictNumber | None = Field(
        description="upper acceptance limit (none: none or unbounded)"
    )
    U_pct: StrictNumber | None = Field(description="U as percent of the tolerance's half-width")
    accept_low_pct: StrictNumber | None = Field(
        description="lower acceptance limit as percent of tolerance, where the rule moves it"
    )
    accept_high_pct: StrictNumber | None = Field(
        description="upper acceptance limit as percent of tolerance, where the rule moves it"
    )
    budget: Annotated[list[BudgetTerm], Strict()] = Field(
        description="the uncertainty budget (empty: not measured)"
    )
    reported: Reported | EarlierReported | None = Field(
        description="the numbers as printed (none: not measured; formats 1 and 2: fewer of them)"
    )
    within_tolerance: Annotated[bool, Strict()] | None | MISSING = Field(
        default=MISSING,
        description="whether the reading lies within the tolerance limits, limits included"
        " (measured rows of format 3)",
    )
    interval: Annotated[list[StrictNumber | None], Strict()] | None | MISSING = Field(
        default=MISSING,
        min_length=2,
        max_length=2,
        description="the reading's coverage interval in the range's unit, low and high (none:"
        " unbounded) (measured rows of format 3)",
    )
    skip_reason: Text | None | MISSING = Field(
        default=MISSING, description="why the operator skipped the point (skipped rows only)"
    )
    correction: CorrectionEntry | None | MISSING = Field(
        default=MISSING, description="the correction of its reading (corrected rows only)"
    )

    def is_within_tolerance(self) -> bool | None:
        """Whether the reading lies within the tolerance limits (``None``: not measured); a row
        of a format that does not say is compared with its limits, exactly, as written."""
        given = None if self.within_tolerance is MISSING else self.within_tolerance
        if given is not None or self.reading is None:
            return given
        return within_limits(self.low, self.high, self.reading)

    def reason_skipped(self) -> str | None:
        """Why the operator skipped the point (``None``: not skipped, or no reason given)."""
        return None if self.skip_reason is MISSING else self.skip_reason

    def corrected(self) -> CorrectionEntry | None:
        """The correction of the row's reading (``None``: never corrected)."""
        return None if self.correction is MISSING else self.correction


def within_limits(low, high, reading) -> bool:
    """``low <= reading <= high`` exactly as the numbers are written (``high`` None: unbounded)."""
    from verirun.metrology.exact import as_written

    return (
        as_written(low) <= as_written(reading) <= (math.inf if high is None else as_written(high))
    )


class NoteEntry(Part):
    """A note of the run: an operator's remark, a correction's or revision's account, or (in
    ``run_log``) a line of the run's internal log."""

    time: Time = Field(description="when it was written")
    point: Key | None = Field(description="the point it is for (none: the run as a whole)")
    text: str = Field(description="the note")


# --- the summary ------------------------------------------------------------------------------


class Rejection(Part):
    """A point not accepted, and why."""

    key: Key
    verdict: Literal["fail", "conditional-fail"] = Field(description="its statement")
    cause: Literal["outside-tolerance", "guard-band"] = Field(
        description="outside its tolerance limits, or within them but outside the acceptance"
        " limits the guard band sets"
    )


class Summary(Part):
    """The counts by verdict, the overall outcome and the statement of conformity, from
    :func:`verirun.metrology.summary.summarise` (keys with hyphens, as the verdicts)."""

    points: int = Field(ge=0, description="how many points the procedure has")
    passed: int = Field(ge=0, alias="pass", description="points that pass")
    conditional_pass: int | None = Field(
        default=None,
        ge=0,
        alias="conditional-pass",
        description="points that pass conditionally (formats 1 and 2: only when there are some)",
    )
    conditional_fail: int | None = Field(
        default=None,
        ge=0,
        alias="conditional-fail",
        description="points that fail conditionally (formats 1 and 2: only when there are some)",
    )
    failed: int = Field(ge=0, alias="fail", description="points that fail")
    skipped: int = Field(ge=0, description="points skipped")
    not_measured: int = Field(ge=0, alias="not-measured", description="points not measured")
    overall: Statement | Literal["none"] = Field(
        description="the least favourable statement of any point (none: nothing measured)"
    )
    rejections: list[Rejection] | None = Field(
        default=None, description="every point not accepted, in order (format 3)"
    )
    guard_band_rejections: list[Key] | None = Field(
        default=None,
        description="the keys of points rejected within their tolerance, by the guard band"
        " alone (format 3)",
    )
    statement: str | None = Field(
        default=None,
        description="the statement of conformity in words, ISO/IEC 17025:2017 7.8.6 (format 3)",
    )


# --- after the run ----------------------------------------------------------------------------


class IssueEntry(Part):
    """A revision's certificate issued, after review."""

    revision: int = Field(ge=1, description="the revision issued")
    time: Time = Field(description="when it was issued")
    by: str = Field(description="who issued it, as the lab profile names them")
    role: str = Field(description="the role they issued it in")
    certificate: str = Field(description="the number of the certificate issued")


class Revision(Part):
    """The as-found results of an as-left run revised: a new revision."""

    revision: int = Field(ge=2, description="the revision it made")
    time: Time = Field(description="when")
    by: str = Field(description="who amended the as-found run")
    reason: str = Field(description="why")
    what: Literal["as-found results"] = Field(description="what changed")


# The journal's documents that carry an as-found run's rows and summary, once those are defined.
for _model in (AsFound, Start, AsFoundRevised):
    _model.model_rebuild()
_ADAPTER: TypeAdapter = TypeAdapter(Document)


# --- the whole --------------------------------------------------------------------------------


class Record(Part):
    """A run record: the whole run, every point evaluated, in one document (``record.json``)."""

    record_format: int = Field(
        ge=1, le=RECORD_FORMAT, description="the record's format (see the module's description)"
    )
    run: RunPart
    lab: LabAsRun = Field(description="the lab, as its profile was when the run started")
    customer: Customer = Field(description="the customer")
    item: Item = Field(description="the item calibrated")
    environment: Environment = Field(description="the laboratory's conditions at the start")
    as_found: AsFound | None = Field(
        default=None, description="an as-left run's as-found results (absent for any other run)"
    )
    procedure: ProcedureAsRun = Field(description="the procedure as run, its whole text")
    bench: BenchAsRun = Field(description="the bench as run, its whole text")
    meter: MeterPart
    decision_rule: DecisionRule
    ranges: list[RangeEntry] = Field(description="the meter's ranges, in the procedure's order")
    points: list[PointResult] = Field(description="one row per step of the plan, in order")
    notes: list[NoteEntry] = Field(description="the notes the customer reads, in order")
    summary: Summary
    issues: list[IssueEntry] | None = Field(
        default=None, description="each revision issued, in order (absent until one is)"
    )
    as_found_revisions: list[Revision] | None = Field(
        default=None,
        description="each revision of the as-found results (absent until there is one)",
    )
    run_log: list[NoteEntry] | None = Field(
        default=None,
        description="the run's internal log, kept apart from the notes (journals of format 3"
        " on; absent before, when such notes are among the notes)",
    )


_RECORD_ADAPTER: TypeAdapter = TypeAdapter(Record)


def validate_record(data: Any) -> Record:
    """The :class:`Record` of ``data`` (a parsed ``record.json``).

    Raises
    ------
    pydantic.ValidationError
        If a field is missing, unknown or does not fit.
    """
    return Record.model_validate(data)


def record_problem(data: Any) -> str | None:
    """What is wrong with a parsed record, in one line naming the field (``None`` when it is a
    record of a format described here)."""
    try:
        validate_record(data)
    except ValidationError as exc:
        return validation_text(exc)
    return None


_MEMBERS = {"float", "int", "str", "bool", "Reported", "EarlierReported"}


def validation_text(exc: ValidationError) -> str:
    """The first problem of ``exc`` in one line: ``field points.3.verdict: ... (got 'x')``."""
    error = exc.errors()[0]
    # A union's member ("float", "list[...]") is part of the error's location; not of the field's.
    parts = [p for p in error["loc"] if p not in _MEMBERS and "[" not in str(p)]
    where = ".".join(str(part) for part in parts) or "record"
    text = f"field {where}: {error['msg']}"
    if error["type"] != "missing":
        shown = repr(error["input"])
        text += f" (got {shown if len(shown) <= 40 else shown[:37] + '...'})"
    return text


def record_document(record: Record) -> dict:
    """``record`` as the dict ``record.json`` holds: keys as written (with hyphens where the
    format has them), and no key that the record did not hold (an older format stays itself)."""
    return record.model_dump(by_alias=True, exclude_unset=True)


def part_document(part: Any) -> Any:
    """A part of a record (or any value one holds) as :func:`record_document` writes it within
    the whole: a model or dataclass with keys as written and no key it did not hold; any other
    value as it is."""
    if isinstance(part, BaseModel):
        return part.model_dump(by_alias=True, exclude_unset=True)
    if dataclasses.is_dataclass(part):
        return _adapter(type(part)).dump_python(part, by_alias=True, exclude_unset=True)
    return part


@functools.cache
def _adapter(kind: type) -> TypeAdapter:
    return TypeAdapter(kind)


def validate_row(data: Any) -> PointResult:
    """The :class:`PointResult` of ``data`` (a row as ``record.json`` holds it).

    Raises
    ------
    pydantic.ValidationError
        If a field is missing, unknown or does not fit.
    """
    return _adapter(PointResult).validate_python(data)


def record_schema() -> dict:
    """The JSON Schema of a run record."""
    return _RECORD_ADAPTER.json_schema(by_alias=True)


if __name__ == "__main__":
    # python -m verirun.record.documents journal > verirun/schema/journal.schema.json
    # python -m verirun.record.documents record > verirun/schema/record.schema.json
    import sys

    schemas = {"journal": journal_schema, "record": record_schema}
    if sys.argv[1:] not in ([name] for name in schemas):
        raise SystemExit("usage: python -m verirun.record.documents journal|record")
    sys.stdout.write(
        json.dumps(schemas[sys.argv[1]](), indent=1, sort_keys=True, ensure_ascii=False) + "\n"
    )
