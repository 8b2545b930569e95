"""The plan of a run: the ordered test points of a procedure, with every window worked out.

Planning touches no instrument. A dry run iterates the plan; a limit check walks it; the engine
executes it. Every number a point carries comes from the pure metrology functions.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from verirun.metrology import decision, tolerance, uncertainty
from verirun.procedure.load import Procedure, ResolvedRange

if TYPE_CHECKING:
    from verirun.bench.config import Bench, SpecLine
from verirun.functions import is_alternating, words_for
from verirun.units import format_quantity


@dataclass(frozen=True, kw_only=True, slots=True)
class TestPoint:
    """One step of a run: a stimulus to apply and the window the reading must fall in."""

    __test__ = False  # not a pytest test class

    index: int  # 0-based position in the plan
    total: int
    range: ResolvedRange
    nominal: float
    frequency: float | None
    window: tolerance.Window
    accuracy_text: str
    first_of_range: bool
    budget: uncertainty.Budget
    rule: decision.Rule
    standard: "SpecLine | None" = None
    statement: tolerance.Statement | None = None
    #: The nominal (and, for AC, the frequency) as the procedure writes it, without spaces:
    #: ``"10uA"``, ``"10V@50Hz"``.
    written: str | None = None

    @property
    def step(self) -> int:
        """The point's identity in its run: its step number, 1-based, as the operator sees it."""
        return self.index + 1

    @property
    def key(self) -> str:
        """The point's label, ``range-id@nominal[@frequency]`` as the procedure writes them
        (``dca-50u@10uA``). Procedures may repeat a value (up-scale then down-scale), so a label
        can name more than one step; the step number is the identity."""
        if self.written is None:
            return self.legacy_key
        return f"{self.range.id}@{self.written}"

    @property
    def legacy_key(self) -> str:
        """The label of records of the first format: the nominal's float repr (``dcv-10@2.0``)."""
        text = f"{self.range.id}@{self.nominal!r}"
        return text + (f"@{self.frequency!r}Hz" if self.frequency is not None else "")

    def key_in(self, journal_format: int) -> str:
        """The label this point has in a journal of ``journal_format``."""
        return self.legacy_key if journal_format < 2 else self.key

    @property
    def function(self) -> str:
        return self.range.function

    @property
    def unit(self) -> str:
        return self.range.unit

    def stimulus_text(self) -> str:
        """The stimulus in words: ``"5 V DC"``, ``"10 V AC at 50 Hz"``, ``"16 Ω"``."""
        text = format_quantity(self.nominal, self.unit)
        if self.function.startswith("dc-"):
            text += " DC"
        elif is_alternating(self.function):
            text += f" AC at {format_quantity(self.frequency, 'Hz')}"
        return text

    def range_text(self) -> str:
        """The range in words: ``"dcv-10 (DC voltage, 10 V full scale)"``."""
        rng = self.range
        if rng.full_scale is not None and rng.law.name == "linear":
            detail = f"{format_quantity(rng.full_scale, rng.unit)} full scale"
        else:
            detail = f"centre scale {format_quantity(rng.law.centre, 'Ω')}"
        return f"{rng.id} ({words_for(rng.function)}, {detail})"


def _applied_terms(nominal: float, standard: "SpecLine | None") -> list[uncertainty.Term]:
    """The applied value's contribution to the uncertainty of a reading at ``nominal``, from the
    calibrator's specification line ``standard`` (none without one); the meter's own follow it
    (``ResolvedRange.meter_terms``)."""
    if standard is None:
        return []
    return [
        standard.spec.term(
            output=nominal, range_value=standard.range, name="applied value (calibrator)"
        )
    ]


def plan(procedure: Procedure, bench: "Bench | None" = None) -> list[TestPoint]:
    """Every test point of ``procedure`` in order, each with its window and uncertainty budget.

    Without a ``bench`` the budgets hold only the meter's own terms (readability and the
    procedure's extra terms): enough to check a procedure, not to sign a certificate.
    """
    written = _written_points(procedure)
    total = sum(len(rng.points) for rng in procedure.ranges)
    if len(written) != total:  # a procedure not made by the loader: labels from the numbers
        written = [None] * total
    points = []
    for rng in procedure.ranges:
        # The same at every point of the range: made once for all of them.
        context, meter_terms = rng.context, rng.meter_terms()
        for number, (nominal, freq) in enumerate(rng.points):
            band = rng.band_at(freq)
            win = tolerance.window(band.statement, nominal, context)
            standard = bench.spec_for(rng.function, nominal, freq) if bench is not None else None
            budget = uncertainty.budget(
                terms=_applied_terms(nominal, standard) + meter_terms,
                nominal=nominal,
                law=rng.law,
                domain=win.domain,
            )
            index = len(points)
            points.append(
                TestPoint(
                    index=index,
                    total=total,
                    range=rng,
                    nominal=nominal,
                    frequency=freq,
                    window=win,
                    accuracy_text=band.text,
                    first_of_range=number == 0,
                    budget=budget,
                    rule=procedure.rule,
                    standard=standard,
                    statement=band.statement,
                    written=written[index],
                )
            )
    return points


def _written_points(procedure: Procedure) -> list[str | None]:
    """Each point's nominal (and frequency) as its procedure file writes it, in plan order."""
    out: list[str | None] = []
    file_ranges = getattr(getattr(procedure, "file", None), "ranges", None) or []
    for model, rng in zip(file_ranges, procedure.ranges):
        if model.id != rng.id or len(model.points) != len(rng.points):
            return []
        for item, (_, freq) in zip(model.points, rng.points):
            at = item.at if hasattr(item, "at") else item
            text = _compact(at, rng.unit)
            if freq is not None:
                freq_text = getattr(item, "frequency", None)
                freq_text = freq_text if freq_text is not None else model.frequency
                text += "@" + (
                    _compact(freq_text, "Hz") if freq_text is not None else f"{freq!r}Hz"
                )
            out.append(text)
    return out


def _compact(text, unit: str) -> str:
    """A quantity as written, without spaces; a bare number gets the unit it is in."""
    compact = "".join(str(text).split())
    try:
        float(compact)
    except ValueError:
        return compact
    return compact + unit
