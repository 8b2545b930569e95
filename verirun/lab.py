"""The lab profile: who issues certificates, from where, signed by whom, in which words."""

from __future__ import annotations

from pathlib import Path
from typing import Literal

from pydantic import StrictStr

from verirun import yamlfile
from verirun.procedure.model import Strict

#: The lab profile format version this verirun reads.
FORMAT = 1


class Signatory(Strict):
    """The person who authorises certificates."""

    name: StrictStr
    title: StrictStr


class Wording(Strict):
    """Standard sentences of the lab's certificates; each has a plain default."""

    relate_only: StrictStr = "The results relate only to the item calibrated."
    reproduction: StrictStr = ("This certificate shall not be reproduced except in full without the"
                               " written approval of the laboratory.")
    safety: StrictStr = ("Safety: meters and calibrators used at these levels can present a shock"
                         " hazard. Follow local electrical-safety codes, the makers' instructions and"
                         " licensed practice.")


class LabInfo(Strict):
    """The laboratory's identity as printed on its certificates."""

    name: StrictStr
    address: list[StrictStr]
    accreditation: StrictStr | None = None
    certificate_prefix: StrictStr
    signatory: Signatory
    traceability: StrictStr
    conditions: StrictStr | None = None
    #: The paper the lab prints its certificates on.
    paper: Literal["A4", "letter"] = "A4"
    wording: Wording = Wording()


class LabFile(Strict):
    """A whole lab profile file."""

    format: int
    lab: LabInfo


def load_lab(path: str | Path) -> LabFile:
    """Load and validate a lab profile (``file:line: field: message`` on any problem)."""
    located = yamlfile.load_file(path)
    yamlfile.check_format(located, FORMAT, "lab profile")
    return yamlfile.validate(LabFile, located)
