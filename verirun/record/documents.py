"""Every kind of document a run's journal holds, as one strict model each.

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
anything reads it. What is read back is these models, frozen: code outside this package reads a
document by attribute (``start.procedure.text``), never by key. The JSON Schema of the union
(:func:`journal_schema`) ships with the package as ``schema/journal.schema.json``.

Journal formats: 3 marks an operator's note ``by: operator``, so the run's internal log (every
other note) is kept apart from what the customer reads; 2 (``journal_format`` in the start
document) labels points by their values as the procedure writes them (``dca-50u@10uA``) and
identifies them by step; 1 (no ``journal_format``) labelled them by the float's repr
(``dca-50u@9.999999999999999e-06``). All are read as they are.
"""

from __future__ import annotations

import json
from typing import Annotated, Any, Literal, Union, get_args

from pydantic import BaseModel, ConfigDict, Field, TypeAdapter, ValidationError

#: Version of the journal document layout described here (see the module's docstring).
JOURNAL_FORMAT = 3

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
    name: str = Field(description="the program that wrote the journal")
    version: str = Field(description="its version")


class ProcedureAsRun(Part):
    id: str = Field(description="the procedure's identifier")
    title: str = Field(description="its title")
    revision: str = Field(description="its revision")
    sha256: Sha256 = Field(description="SHA-256 of the procedure file's text")
    source: str = Field(description="where the file was read from")
    text: str = Field(description="the whole procedure file, as run")


class CalibratorAsRun(Part):
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
    name: str = Field(description="who signs the lab's certificates")
    title: str = Field(description="their title")


class Wording(Part):
    relate_only: str = Field(description="the results relate only to the item calibrated")
    reproduction: str = Field(description="the certificate may be reproduced only in full")
    safety: str = Field(description="the lab's safety caution")


class Person(Part):
    name: str = Field(description="a person the lab authorises to issue certificates")
    role: str = Field(description="the role they issue in")


class LabAsRun(Part):
    name: str
    address: list[str]
    accreditation: str | None = Field(
        description="the lab's accreditation (null when its profile gives none)"
    )
    certificate_prefix: str = Field(description="prefix of the lab's certificate numbers")
    signatory: Signatory | None = Field(
        default=None, description="an older profile's one signatory"
    )
    people_who_issue: list[Person] = Field(default=[], description="who may issue certificates")
    traceability: str
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
    name: str
    address: list[str] = Field(default=[], description="lines of the customer's address")


class Item(Part):
    serial: str = Field(description="serial number of the meter under test")
    asset: str | None = Field(default=None, description="the customer's asset number, if given")
    condition: str | None = Field(
        default=None, description="condition of the item as received (none: not recorded)"
    )
    received: Date | None = Field(default=None, description="date the item was received")


class Environment(Part):
    temperature_c: float | None = Field(
        default=None, allow_inf_nan=False, description="laboratory temperature at the start, °C"
    )
    humidity_pct: float | None = Field(
        default=None, allow_inf_nan=False, description="relative humidity at the start, %"
    )


class AsFound(Part):
    """For an as-left run: the as-found run it follows and what was adjusted."""

    model_config = ConfigDict(extra="forbid", frozen=True, strict=False)

    run: str = Field(description="uid of the as-found run")
    certificate: str = Field(description="the as-found run's certificate number")
    date: str = Field(description="when the as-found run was made")
    adjustment: str = Field(description="what was adjusted between the two runs")
    points: list[dict[str, Any]] = Field(description="the as-found record's result rows")
    summary: dict[str, Any] = Field(description="the as-found record's summary")


class Start(Chained):
    """A run begins: everything needed to replay and certify it."""

    kind: Literal["start"]
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

    kind: Literal["resume"]
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
    value: Reading = Field(description="the stimulus the calibrator was set to, SI units")
    frequency: Reading | None = Field(description="its frequency in Hz (AC), or none")


class Observation(Chained):
    """A reading at a step, as it was typed (or replayed) and as it was understood."""

    kind: Literal["observation"]
    point: PointKey
    index: Step
    range: str = Field(description="the range's id")
    function: str = Field(description="the measurement function")
    applied: Applied
    typed: str = Field(description="exactly what was typed or replayed")
    reading: Reading = Field(description="the reading, in SI units")


class Skip(Chained):
    """A step skipped by the operator."""

    kind: Literal["skip"]
    point: PointKey
    index: Step
    reason: str | None = Field(description="why it was skipped")
    typed: str = Field(description="exactly what was typed")


class Note(Chained):
    """A remark at a step (``point``) or for the run as a whole (``point`` none)."""

    kind: Literal["note"]
    point: PointKey | None
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

    kind: Literal["withdrawal"]
    point: PointKey
    index: Step
    typed: str = Field(description="what was typed for the entry withdrawn")
    reason: str = Field(description="why it was withdrawn")


class Correction(Chained):
    """A reading of a finished run corrected, making the record's next revision."""

    kind: Literal["correction"]
    point: PointKey
    index: Step
    typed: str = Field(description="the corrected reading as typed")
    reading: Reading = Field(description="the corrected reading, SI units")
    reason: str = Field(description="why it was corrected")
    operator: str = Field(description="who corrected it")


class Stop(Chained):
    """The run ended."""

    kind: Literal["stop"]
    status: Literal["complete", "aborted", "failed"]
    reason: str | None = Field(description="why it stopped, naming the step (none when complete)")
    counts: dict[str, int] = Field(description="results so far by verdict, and skipped steps")


class Issue(Chained):
    """A revision's certificate issued, after review, by a person the lab profile lists."""

    kind: Literal["issue"]
    by: str = Field(description="who issued it, as the lab profile names them")
    role: str = Field(description="the role they issued it in, from the lab profile")
    revision: int = Field(ge=1, description="the revision of the record issued")
    certificate: str = Field(description="the number of the certificate issued")


class AsFoundRevised(Chained):
    """The as-found run of this (as-left) run was amended: its new results, a new revision."""

    kind: Literal["as-found"]
    as_found: AsFound
    reason: str = Field(description="why the as-found run was amended")
    operator: str = Field(description="who amended it")


class CertificateNumber(Chained):
    """The certificate number the lab register gave the complete run (once; written after its
    stop document, when the run is sent to the register, and before any issue)."""

    kind: Literal["certificate-number"]
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

_ADAPTER: TypeAdapter = TypeAdapter(Document)


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
    return part.model_dump(exclude_unset=True)


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


if (
    __name__ == "__main__"
):  # python -m verirun.record.documents > verirun/schema/journal.schema.json
    import sys

    sys.stdout.write(
        json.dumps(journal_schema(), indent=1, sort_keys=True, ensure_ascii=False) + "\n"
    )
