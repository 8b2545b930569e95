"""The bench file: which calibrator, how to reach it, its own calibration, and safety settings."""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from pydantic import StrictStr

from verirun import yamlfile
from verirun.errors import ProcedureError, UnitError
from verirun.procedure.model import QuantityText, Strict
from verirun.units import parse_value

#: The bench format version this verirun reads.
FORMAT = 1


class BenchInfo(Strict):
    """Where the work is done."""

    id: StrictStr
    location: StrictStr | None = None


class CalibratorInfo(Strict):
    """The reference standard: identity, its VISA address and its own calibration status."""

    description: StrictStr
    asset: StrictStr
    resource: StrictStr
    visa_library: StrictStr = ""
    profile: StrictStr = "scpi-generic"
    identity: StrictStr
    certificate: StrictStr
    calibration_due: dt.date
    traceability: StrictStr | None = None
    timeout: QuantityText = "2 s"


class SafetyInfo(Strict):
    """Hazardous-live thresholds and whether a scripted run may switch on above them."""

    hazardous_dc: QuantityText = "60 V"
    hazardous_ac_rms: QuantityText = "30 V"
    hazardous_ac_peak: QuantityText = "42.4 V"
    scripted_hazardous: Literal["refuse", "allow"] = "refuse"


class BenchFile(Strict):
    """A whole bench file."""

    format: int
    bench: BenchInfo
    calibrator: CalibratorInfo
    settle: QuantityText = "0 s"
    safety: SafetyInfo = SafetyInfo()


@dataclass(frozen=True, kw_only=True)
class Bench:
    """A loaded bench file, with quantities in SI floats."""

    file: BenchFile
    text: str
    source: str
    settle_s: float
    timeout_s: float
    hazardous_dc: float
    hazardous_ac_rms: float
    hazardous_ac_peak: float

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()


def load_bench(path: str | Path) -> Bench:
    """Load and validate a bench file.

    Raises
    ------
    ProcedureError
        Listing every problem as ``file:line: field: message``.
    """
    return _resolve(yamlfile.load_file(path))


def load_bench_text(text: str, source: str = "<bench>") -> Bench:
    """Load a bench file from its text (as stored in a run record)."""
    return _resolve(yamlfile.load_text(text, source))


def _resolve(located: yamlfile.LocatedData) -> Bench:
    yamlfile.check_format(located, FORMAT, "bench file")
    model = yamlfile.validate(BenchFile, located)
    problems = []

    def quantity(loc: tuple, text, unit: str) -> float:
        try:
            value = parse_value(text, unit)
        except UnitError as exc:
            problems.append(located.problem(loc, str(exc)))
            return 0.0
        if value < 0:
            problems.append(located.problem(loc, f"must be zero or more, got {text!r}"))
        return value

    settle = quantity(("settle",), model.settle, "s")
    timeout = quantity(("calibrator", "timeout"), model.calibrator.timeout, "s")
    dc = quantity(("safety", "hazardous-dc"), model.safety.hazardous_dc, "V")
    rms = quantity(("safety", "hazardous-ac-rms"), model.safety.hazardous_ac_rms, "V")
    peak = quantity(("safety", "hazardous-ac-peak"), model.safety.hazardous_ac_peak, "V")
    if timeout == 0 and not problems:
        problems.append(located.problem(("calibrator", "timeout"), "must be more than zero"))
    if problems:
        raise ProcedureError(problems)
    return Bench(file=model, text=located.text, source=located.source, settle_s=settle,
                 timeout_s=timeout, hazardous_dc=dc, hazardous_ac_rms=rms, hazardous_ac_peak=peak)
