"""The lab profile: who issues certificates, from where, signed by whom, in which words."""

from __future__ import annotations

from pathlib import Path
from typing import Literal

from pydantic import StrictStr, field_validator

from verirun import yamlfile
from verirun.procedure.model import Strict

#: The lab profile format version this verirun reads.
FORMAT = 1


class Signatory(Strict):
    """The person who authorises certificates (profiles written before ``people`` existed)."""

    name: StrictStr
    title: StrictStr


class Person(Strict):
    """One member of staff the lab has authorised to issue certificates, and in which role."""

    name: StrictStr
    role: StrictStr


class Wording(Strict):
    """Standard sentences of the lab's certificates; each has a plain default."""

    relate_only: StrictStr = "The results relate only to the item calibrated."
    reproduction: StrictStr = (
        "This certificate shall not be reproduced except in full without the"
        " written approval of the laboratory."
    )
    #: The bench's safety caution: for the people at the bench, not printed on certificates
    #: (kept so that profiles which set it still load).
    safety: StrictStr = (
        "Safety: meters and calibrators used at these levels can present a shock"
        " hazard. Follow local electrical-safety codes, the makers' instructions and"
        " licensed practice."
    )


class LabInfo(Strict):
    """The laboratory's identity as printed on its certificates."""

    name: StrictStr
    address: list[StrictStr]
    accreditation: StrictStr | None = None
    certificate_prefix: StrictStr
    #: Older profiles name one signatory; a profile now lists everyone who may issue.
    signatory: Signatory | None = None
    #: Who may review and issue certificates, each with the role they sign in.
    people_who_issue: list[Person] = []
    traceability: StrictStr
    conditions: StrictStr | None = None
    #: The paper the lab prints its certificates on.
    paper: Literal["A4", "letter"] = "A4"
    wording: Wording = Wording()

    @field_validator("certificate_prefix")
    @classmethod
    def _not_a_dry_run_prefix(cls, value: str) -> str:
        if value.strip().upper().startswith("DRYRUN"):
            raise ValueError(
                "DRYRUN begins the numbers of dry runs on the simulated calibrator;"
                " the lab's own numbers need another prefix"
            )
        return value

    @field_validator("people_who_issue")
    @classmethod
    def _each_person_once(cls, value: list[Person]) -> list[Person]:
        names = [" ".join(p.name.split()) for p in value]
        twice = sorted({n for n in names if names.count(n) > 1})
        if twice:
            raise ValueError(
                f"{', '.join(twice)} listed more than once; list each person once, with"
                " the role they issue in"
            )
        if any(not n for n in names):
            raise ValueError("a person with no name")
        return value

    #: The spelling of the lab's certificates: "british" (authorised, centre) or "american".
    spelling: Literal["british", "american"] = "british"
    #: Remarks printed on every certificate, in the lab's own words.
    remarks: list[StrictStr] = []


class LabFile(Strict):
    """A whole lab profile file."""

    format: int
    lab: LabInfo


def load_lab(path: str | Path) -> LabFile:
    """Load and validate a lab profile (``file:line: field: message`` on any problem)."""
    located = yamlfile.load_file(path)
    yamlfile.check_format(located, FORMAT, "lab profile")
    return yamlfile.validate(LabFile, located)


def people_who_issue(lab: dict) -> list[dict]:
    """Who may issue, from the lab as a run record holds it: its list of people, or the single
    signatory of an older profile."""
    people = lab.get("people_who_issue") or []
    if not people and lab.get("signatory"):
        people = [{"name": lab["signatory"]["name"], "role": lab["signatory"]["title"]}]
    return people
