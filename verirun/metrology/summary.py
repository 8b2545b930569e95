"""The statement of conformity of a run: its judged points and its rule in, counts and words out.

One pure function, :func:`summarise`, serves the console, the run record and the certificate, so
that none of them works out a verdict's meaning for itself. It counts all four statements of
ILAC-G8:09/2019 4.2.3 (pass, conditional pass, conditional fail, fail), says for every rejection
whether the reading lies outside its tolerance limits or only outside the acceptance limits the
guard band sets, and words the statement ISO/IEC 17025:2017 7.8.6 asks for: which results it
applies to, which are met or not, and under which decision rule.

The overall outcome is the least favourable statement of any measured point: one fail makes the
item fail; with no fail, one conditional fail makes it a conditional fail; then one conditional
pass a conditional pass; only when every measured point passes does the item pass. With nothing
measured no statement is made (``"none"``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Literal

#: The statements a decision rule can make about one result, most favourable first.
VERDICTS = ("pass", "conditional-pass", "conditional-fail", "fail")
#: What a point of a run can show besides a statement: it was skipped or not measured.
UNMEASURED = ("skipped", "not-measured")

_LABELS = {
    "pass": "PASS",
    "conditional-pass": "CONDITIONAL PASS",
    "conditional-fail": "CONDITIONAL FAIL",
    "fail": "FAIL",
    "skipped": "SKIPPED",
    "not-measured": "NOT MEASURED",
    "none": "NO STATEMENT",
}

#: What each statement means, in our own words (ILAC-G8:09/2019 4.2.3 defines the zones).
MEANINGS = {
    "pass": "the measured value lies within the acceptance limits",
    "conditional-pass": (
        "the measured value lies within the tolerance limits but closer to a limit"
        " than the guard band: it conforms as measured, but with its uncertainty"
        " the chance that the true value lies outside the tolerance is larger than"
        " the rule allows for a pass"
    ),
    "conditional-fail": (
        "the measured value lies outside the tolerance limits by no more than the"
        " guard band: it does not conform as measured, but with its uncertainty the"
        " true value may still lie within the tolerance"
    ),
    "fail": "the measured value lies outside the tolerance limits by more than the guard band",
}

Cause = Literal["outside-tolerance", "guard-band"]


def label(verdict: str) -> str:
    """The word printed for ``verdict`` (``"CONDITIONAL PASS"``); never empty.

    Raises
    ------
    ValueError
        If ``verdict`` is not a statement, ``skipped``, ``not-measured`` or ``none``.
    """
    try:
        return _LABELS[verdict]
    except KeyError:
        raise ValueError(f"unknown verdict {verdict!r} (use {', '.join(_LABELS)})") from None


@dataclass(frozen=True, kw_only=True, slots=True)
class Judged:
    """One point as the summary needs it: its key, its verdict (a statement, ``skipped`` or
    ``not-measured``) and, when measured, whether its reading lies within the tolerance
    limits, limits included."""

    key: str
    verdict: str
    within_tolerance: bool | None = None


@dataclass(frozen=True, kw_only=True, slots=True)
class Rejection:
    """A point that is not accepted: its key, its statement and why.

    ``cause`` is ``"outside-tolerance"`` when the reading lies outside the tolerance limits, and
    ``"guard-band"`` when it lies within them but outside the acceptance limits.
    """

    key: str
    verdict: str
    cause: Cause


@dataclass(frozen=True, kw_only=True, slots=True)
class Summary:
    """The counts and the statement of conformity of a run (see :func:`summarise`)."""

    rule: str
    points: int
    passed: int
    conditional_pass: int
    conditional_fail: int
    failed: int
    skipped: int
    not_measured: int
    overall: str
    rejections: tuple[Rejection, ...]

    @property
    def measured(self) -> int:
        """The number of points with a statement."""
        return self.passed + self.conditional_pass + self.conditional_fail + self.failed

    def counts(self) -> dict[str, int]:
        """Every count by its verdict's name, and ``points``."""
        return {
            "points": self.points,
            "pass": self.passed,
            "conditional-pass": self.conditional_pass,
            "conditional-fail": self.conditional_fail,
            "fail": self.failed,
            "skipped": self.skipped,
            "not-measured": self.not_measured,
        }

    @property
    def guard_band_rejections(self) -> tuple[str, ...]:
        """The keys of points rejected within their tolerance limits, by the guard band alone."""
        return tuple(r.key for r in self.rejections if r.cause == "guard-band")

    @property
    def outside_tolerance(self) -> int:
        """How many readings lie outside their tolerance limits (none: found in tolerance)."""
        return sum(1 for r in self.rejections if r.cause == "outside-tolerance")

    def counts_text(self) -> str:
        """All four counts in words:
        ``"9 pass, 1 conditional pass, 0 conditional fail, 2 fail"``."""
        return (
            f"{self.passed} pass, {self.conditional_pass} conditional pass,"
            f" {self.conditional_fail} conditional fail, {self.failed} fail"
        )

    def statement(self) -> str:
        """The statement of conformity in words (ISO/IEC 17025:2017 7.8.6.2), one paragraph."""
        m = self.measured
        if m == 0:
            return "No results were measured; no statement of conformity is made."
        points = f"{self.points} point{'s' if self.points != 1 else ''}: {m} measured"
        if self.skipped:
            points += f", {self.skipped} skipped"
        if self.not_measured:
            points += f", {self.not_measured} not measured"
        head = {
            "pass": "the item conforms to its specification",
            "conditional-pass": "the item conforms to its specification as measured, with"
            " conditional results",
            "conditional-fail": "the item does not conform to its specification as measured,"
            " with conditional results",
            "fail": "the item does NOT conform to its specification",
        }[self.overall]
        parts = [
            f"Statement of conformity, under the decision rule stated above: {head}"
            f" ({points}; {self.counts_text()})."
        ]
        outside = self.outside_tolerance
        guard = len(self.rejections) - outside
        if self.rejections:
            words = []
            if outside:
                words.append(
                    f"{outside} {'lies' if outside == 1 else 'lie'} outside"
                    f" {'its' if outside == 1 else 'their'} tolerance limits"
                )
            if guard:
                words.append(
                    f"{guard} {'lies' if guard == 1 else 'lie'} within"
                    f" {'its' if guard == 1 else 'their'} tolerance limits but outside the"
                    " acceptance limits the guard band sets"
                )
            n = len(self.rejections)
            parts.append(
                f"{n} of {self.points} point{'s' if self.points != 1 else ''}"
                f" {'is' if n == 1 else 'are'} not accepted: {' and '.join(words)}."
            )
        else:
            parts.append("No result is rejected.")
        for verdict, count in (
            ("conditional-pass", self.conditional_pass),
            ("conditional-fail", self.conditional_fail),
        ):
            if count:
                parts.append(f"A {verdict.replace('-', ' ')} means that {MEANINGS[verdict]}.")
        return " ".join(parts)


def summarise(judged: Iterable[Judged], rule: str) -> Summary:
    """Count the statements of ``judged`` under the rule named ``rule`` and word their meaning.

    Parameters
    ----------
    judged
        Every point of the run, in order.
    rule
        The decision rule's name (``simple``, ``guarded``, ``non-binary``, ``risk``).

    Raises
    ------
    ValueError
        If a point's verdict is none of the known ones, or a conditional statement appears
        under a rule that makes none.
    """
    counts = dict.fromkeys((*VERDICTS, *UNMEASURED), 0)
    rejections = []
    total = 0
    for point in judged:
        total += 1
        if point.verdict not in counts:
            raise ValueError(f"point {point.key}: unknown verdict {point.verdict!r}")
        if point.verdict.startswith("conditional") and rule != "non-binary":
            raise ValueError(
                f"point {point.key}: the {rule} rule makes no {point.verdict} statement"
            )
        counts[point.verdict] += 1
        if point.verdict in ("fail", "conditional-fail"):
            cause: Cause = "guard-band" if point.within_tolerance else "outside-tolerance"
            rejections.append(Rejection(key=point.key, verdict=point.verdict, cause=cause))
    overall = "none"
    for verdict in VERDICTS:  # the least favourable statement present
        if counts[verdict]:
            overall = verdict
    return Summary(
        rule=rule,
        points=total,
        passed=counts["pass"],
        conditional_pass=counts["conditional-pass"],
        conditional_fail=counts["conditional-fail"],
        failed=counts["fail"],
        skipped=counts["skipped"],
        not_measured=counts["not-measured"],
        overall=overall,
        rejections=tuple(rejections),
    )
