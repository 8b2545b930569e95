"""The lab profile: who issues certificates, from where, signed by whom, in which words."""

from __future__ import annotations

from pathlib import Path

from pydantic import StrictStr

from verirun import yamlfile
from verirun.procedure.model import Strict

#: The lab profile format version this verirun reads.
FORMAT = 1


class Signatory(Strict):
    """The person who authorises certificates."""

    name: StrictStr
    title: StrictStr


class LabInfo(Strict):
    """The laboratory's identity as printed on its certificates."""

    name: StrictStr
    address: list[StrictStr]
    accreditation: StrictStr | None = None
    certificate_prefix: StrictStr
    signatory: Signatory
    traceability: StrictStr
    conditions: StrictStr | None = None


class LabFile(Strict):
    """A whole lab profile file."""

    format: int
    lab: LabInfo


def load_lab(path: str | Path) -> LabFile:
    """Load and validate a lab profile (``file:line: field: message`` on any problem)."""
    located = yamlfile.load_file(path)
    yamlfile.check_format(located, FORMAT, "lab profile")
    return yamlfile.validate(LabFile, located)
