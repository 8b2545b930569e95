"""Decision rules: from a reading, its tolerance and its uncertainty to a statement of conformity.

Every rule works in one dimension: tolerance limits ``low`` .. ``high`` (either may be infinite
for a one-sided requirement), an expanded uncertainty ``U`` with its coverage factor ``k`` and a
reading, all in the same domain. :func:`judge` puts a :class:`~verirun.metrology.tolerance.Window`
and a :class:`~verirun.metrology.uncertainty.Budget` into the domain the tolerance is stated in
(degrees of arc on an ohms scale are compared as fractions of scale length, never as ohms) and
maps the acceptance limits back to the value domain only for reporting.

Every comparison is exact: :func:`judge` gives the rules the tolerance limits and the reading
as the numbers written (:mod:`verirun.metrology.exact`), in rational arithmetic, and the
expanded uncertainty as it is reported (two significant digits, :func:`round_uncertainty
<verirun.metrology.uncertainty.round_uncertainty>`), so a guard band ``w = r U`` is exact too.
A rule called directly reads its float arguments as written, too.

On the limits, every rule resolves a tie toward the more favourable verdict: a reading exactly on
a tolerance limit passes under simple acceptance, one exactly on an acceptance limit passes under
the guarded, non-binary and risk rules, one exactly on a tolerance limit is a conditional pass and
one exactly ``w`` outside it a conditional fail under the non-binary rule. ILAC-G8:09/2019 words
its zones as "below" and "above" a limit and leaves the tie open, so this choice is ours; it
matches :meth:`Window.contains <verirun.metrology.tolerance.Window.contains>`, which includes its
limits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from decimal import ROUND_CEILING, ROUND_FLOOR, Decimal
from fractions import Fraction
from statistics import NormalDist
from typing import Literal

from verirun.metrology.exact import Exact, as_written
from verirun.metrology.scales import ScaleLaw
from verirun.metrology.tolerance import Window
from verirun.metrology.uncertainty import Budget, round_uncertainty

Verdict = Literal["pass", "conditional-pass", "conditional-fail", "fail"]

_NORMAL = NormalDist()


def _check_zone(low: Exact, high: Exact, expanded: Exact, k: float) -> None:
    if _nan(low) or _nan(high) or low > high:
        raise ValueError(f"tolerance limits must satisfy low <= high, got {low!r}..{high!r}")
    if not (math.isfinite(expanded) and expanded >= 0):
        raise ValueError(
            f"the expanded uncertainty must be finite and not negative, got {expanded!r}"
        )
    if not (math.isfinite(k) and k > 0):
        raise ValueError(f"the coverage factor k must be positive and finite, got {k!r}")
    if not math.isfinite(float(expanded) / k):  # the standard uncertainty every rule works with
        raise ValueError(f"the standard uncertainty U / k must be finite, got {expanded!r} / {k!r}")


def _nan(x: Exact) -> bool:
    return isinstance(x, float) and math.isnan(x)


def _exact_args(low, high, expanded) -> tuple[Exact, Exact, Exact]:
    if any(_nan(x) for x in (low, high)):
        raise ValueError(f"tolerance limits must satisfy low <= high, got {low!r}..{high!r}")
    if _nan(expanded) or (isinstance(expanded, float) and math.isinf(expanded)):
        raise ValueError(
            f"the expanded uncertainty must be finite and not negative, got {expanded!r}"
        )
    return as_written(low), as_written(high), as_written(expanded)


def tur(*, low: float, high: float, expanded: float) -> float | None:
    """Test uncertainty ratio: ``(high - low) / (2 U)``, as ANSI/NCSL Z540.3 defines it.

    ``expanded`` should be the 95 % expanded uncertainty of the measurement process (k = 2 is
    the usual stand-in). Returns ``None`` when a limit is infinite (a one-sided requirement has
    no span) and ``math.inf`` when ``expanded`` is zero.
    """
    _check_zone(low, high, expanded, 1.0)
    return _tur(low, high, expanded)


def _tur(low: Exact, high: Exact, expanded: Exact) -> float | None:
    # tur() on numbers already checked.
    if not (math.isfinite(low) and math.isfinite(high)):
        return None
    if expanded == 0:
        return math.inf
    return float((high - low) / (2 * expanded))


def conformance_probability(*, low: float, high: float, reading: float, u: float) -> float:
    """Probability that the measurand lies within ``low`` .. ``high`` given ``reading``.

    JCGM 106:2012, normal model: ``pc = Φ((TU - y)/u) - Φ((TL - y)/u)`` with ``y`` the reading
    and ``u`` its standard uncertainty; an infinite limit contributes 0 or 1. With ``u = 0`` the
    measurand is the reading itself: ``pc`` is 1 inside the limits (included) and 0 outside.
    """
    if not math.isnan(reading):  # a NaN reading is refused first, by _pc
        _check_zone(low, high, u, 1.0)
    return _pc(low, high, reading, u)


def _pc(low: Exact, high: Exact, reading: Exact, u: Exact) -> float:
    # conformance_probability() on limits and an uncertainty already checked.
    if _nan(reading):
        raise ValueError("a reading must be a number, got nan")
    if u == 0 or math.isinf(reading):
        return 1.0 if low <= reading <= high else 0.0
    y, su = float(reading), float(u)
    return _NORMAL.cdf((float(high) - y) / su) - _NORMAL.cdf((float(low) - y) / su)


@dataclass(frozen=True, kw_only=True, slots=True)
class Acceptance:
    """The acceptance zone ``low`` .. ``high`` (limits included) a rule gives.

    ``guard`` is how far each acceptance limit lies inside its tolerance limit (``w``). When the
    guard band swallows the whole tolerance zone the zone is empty (``low > high``) and no
    reading can pass. The limits are exact (:class:`~fractions.Fraction`, or an infinite
    float for an open side).
    """

    low: Exact
    high: Exact
    guard: Exact

    @property
    def empty(self) -> bool:
        """True when no reading can be accepted."""
        return self.low > self.high

    def contains(self, reading: Exact) -> bool:
        """True when ``reading`` lies in the zone, limits included, in exact arithmetic."""
        return self.low <= as_written(reading) <= self.high


@dataclass(frozen=True, kw_only=True, slots=True)
class Outcome:
    """A rule's statement about one reading: the verdict, the zone used, and ``pc``."""

    verdict: Verdict
    acceptance: Acceptance
    conformance: float


class _Statement:
    """What every rule does once it has its acceptance zone (each rule gives ``acceptance``)."""

    __slots__ = ()

    def statement(self, zone: Acceptance, *, low: Exact, high: Exact, reading: Exact) -> Verdict:
        """The verdict of the exact ``reading`` with the acceptance ``zone`` of the tolerance
        limits ``low`` .. ``high``: a binary rule passes it within the zone, limits included,
        and fails it otherwise."""
        return "pass" if zone.contains(reading) else "fail"

    def decide(
        self, *, low: Exact, high: Exact, reading: Exact, expanded: Exact, k: float = 2.0
    ) -> Outcome:
        """The rule's statement for ``reading``, with its acceptance zone and ``pc`` (reported
        whatever the verdict)."""
        zone = self.acceptance(low=low, high=high, expanded=expanded, k=k)  # checks the numbers
        low, high, expanded = _exact_args(low, high, expanded)
        y = as_written(reading)
        return Outcome(
            verdict=self.statement(zone, low=low, high=high, reading=y),
            acceptance=zone,
            conformance=_pc(low, high, y, expanded / Fraction(k)),
        )


_NO_GUARD = Fraction(0)


def _shrunk(low: Exact, high: Exact, w: Exact) -> Acceptance:
    return Acceptance(low=low + w, high=high - w, guard=w)


@dataclass(frozen=True, kw_only=True, slots=True)
class SimpleAcceptance(_Statement):
    """Simple acceptance, ILAC-G8:09/2019 4.2.1 (``w = 0``).

    A reading within the tolerance limits, limits included, passes; any other fails.
    """

    name = "simple"

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return (
            "Simple acceptance (ILAC-G8:09/2019 4.2.1, w = 0): a result passes when the measured"
            " value lies within the tolerance limits, limits included, and fails otherwise;"
            " the measurement uncertainty does not move the acceptance limits."
        )

    def acceptance(self, *, low: Exact, high: Exact, expanded: Exact, k: float = 2.0) -> Acceptance:
        """The acceptance zone: the tolerance zone itself."""
        low, high, expanded = _exact_args(low, high, expanded)
        _check_zone(low, high, expanded, k)
        return Acceptance(low=low, high=high, guard=_NO_GUARD)


@dataclass(frozen=True, kw_only=True, slots=True)
class GuardedAcceptance(_Statement):
    """Binary statement with a guard band, ILAC-G8:09/2019 4.2.2 (``w = ratio × U``).

    The acceptance limits are the tolerance limits each moved inward by ``w``. A reading within
    them, limits included, passes; any other fails.
    """

    ratio: float = 1.0
    name = "guarded"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.ratio) and self.ratio >= 0):
            raise ValueError(
                f"the guard-band ratio must be finite and not negative, got {self.ratio!r}"
            )

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return (
            f"Guarded acceptance (ILAC-G8:09/2019 4.2.2, w = {self.ratio:g} × U): a result passes"
            " when the measured value lies within the acceptance limits, each tolerance limit moved"
            " inward by w, limits included, and fails otherwise; U is the expanded uncertainty"
            " of measurement."
        )

    def acceptance(self, *, low: Exact, high: Exact, expanded: Exact, k: float = 2.0) -> Acceptance:
        """The tolerance zone shrunk by ``w = ratio × U`` on each side (the ratio as written)."""
        low, high, expanded = _exact_args(low, high, expanded)
        _check_zone(low, high, expanded, k)
        return _shrunk(low, high, as_written(self.ratio) * expanded)


@dataclass(frozen=True, kw_only=True, slots=True)
class NonBinaryStatement(GuardedAcceptance):
    """Non-binary statement with a guard band, ILAC-G8:09/2019 4.2.3 (``w = ratio × U``, ratio 1).

    - ``"pass"``: within the acceptance limits (tolerance limits moved inward by ``w``);
    - ``"conditional-pass"``: within the tolerance limits but not the acceptance limits;
    - ``"conditional-fail"``: outside the tolerance limits by no more than ``w``;
    - ``"fail"``: outside the tolerance limits by more than ``w``.

    Each boundary belongs to the more favourable zone.
    """

    name = "non-binary"

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return (
            f"Non-binary statement with guard band (ILAC-G8:09/2019 4.2.3, w = {self.ratio:g} × U):"
            " pass within the acceptance limits (each tolerance limit moved inward by w);"
            " conditional pass within the tolerance limits but outside the acceptance limits;"
            " conditional fail outside the tolerance limits by no more than w; fail beyond;"
            " a value on a boundary takes the more favourable statement."
        )

    def statement(self, zone: Acceptance, *, low: Exact, high: Exact, reading: Exact) -> Verdict:
        """One of the four statements for the exact ``reading``; each boundary belongs to the
        more favourable zone."""
        w = zone.guard
        if zone.contains(reading):
            return "pass"
        if low <= reading <= high:
            return "conditional-pass"
        if low - w <= reading <= high + w:
            return "conditional-fail"
        return "fail"


@dataclass(frozen=True, kw_only=True, slots=True)
class RiskAcceptance(_Statement):
    """Guarded acceptance sized by the specific risk of false accept (JCGM 106:2012, normal model).

    For a reading ``y`` with standard uncertainty ``u = U / k``, the probability that the
    measurand lies outside the tolerance is ``1 - pc`` (see :func:`conformance_probability`).
    The acceptance limits are the outermost readings at which ``1 - pc <= target``; a reading
    within them, limits included, passes and any other fails. One-sided: ``w = u z`` with
    ``Φ(z) = 1 - target``. Two-sided, the limits are found by bisection (``pc`` falls
    monotonically away from the middle of the zone); when even the middle has ``1 - pc > target``
    the acceptance zone is empty.
    """

    target: float = 0.02
    name = "risk"

    def __post_init__(self) -> None:
        if not 0.0 < self.target < 0.5:
            raise ValueError(
                f"the false-accept target must lie strictly between 0 and 0.5, got {self.target!r}"
            )

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return (
            f"Guarded acceptance by specific risk (JCGM 106:2012, normal model;"
            f" ILAC-G8:09/2019 4.2.2):"
            f" a result passes when the probability that the measured quantity lies outside the"
            f" tolerance limits, 1 − pc, is at most {100 * self.target:g} %, and fails otherwise."
        )

    def acceptance(self, *, low: Exact, high: Exact, expanded: Exact, k: float = 2.0) -> Acceptance:
        """The readings at which the specific false-accept risk is at most ``target``.

        The limits found in floating point are rounded inward to a decimal two digits finer than
        the last digit of ``U`` reported to two significant digits, so that they can be printed
        exactly and a reading written on one is decided exactly; rounding inward keeps the
        risk at an acceptance limit within the target.
        """
        low, high, expanded = _exact_args(low, high, expanded)
        _check_zone(low, high, expanded, k)
        if expanded == 0 or (math.isinf(low) and math.isinf(high)):
            return _shrunk(low, high, _NO_GUARD)
        u = float(expanded) / k
        place = Decimal(1).scaleb(round_uncertainty(float(expanded)).as_tuple().exponent - 2)
        if math.isinf(low) or math.isinf(high):
            w = _round_to(u * _NORMAL.inv_cdf(1.0 - self.target), place, ROUND_CEILING)
            return _shrunk(low, high, w)
        fl, fh = float(low), float(high)
        half = (fh - fl) / 2.0
        mid = fl + half

        def conforms(d: float) -> bool:  # 1 - pc <= target at distance d from the middle
            return _NORMAL.cdf((half - d) / u) - _NORMAL.cdf((-half - d) / u) >= 1.0 - self.target

        if not conforms(0.0):
            return Acceptance(low=math.inf, high=-math.inf, guard=math.inf)
        inside, outside = 0.0, half  # at d = half, pc < 0.5 <= 1 - target
        while True:
            d = (inside + outside) / 2.0
            if d in (inside, outside):
                break
            if conforms(d):
                inside = d
            else:
                outside = d
        a_low = _round_to(mid - inside, place, ROUND_CEILING)
        a_high = _round_to(mid + inside, place, ROUND_FLOOR)
        if a_low > a_high:
            return Acceptance(low=math.inf, high=-math.inf, guard=math.inf)
        return Acceptance(low=a_low, high=a_high, guard=min(a_low - low, high - a_high))


def _round_to(x: float, place: Decimal, how: str) -> Fraction:
    """``x`` rounded to the decimal ``place`` in the direction ``how``, as an exact fraction."""
    return Fraction(Decimal(repr(x)).quantize(place, rounding=how))


Rule = SimpleAcceptance | GuardedAcceptance | NonBinaryStatement | RiskAcceptance

_RULES: dict[str, type] = {
    cls.name: cls
    for cls in (SimpleAcceptance, GuardedAcceptance, NonBinaryStatement, RiskAcceptance)
}


def rule_from_name(name: str, **params: float) -> Rule:
    """Build a rule from its name: ``simple``, ``guarded`` (``ratio``), ``non-binary`` (``ratio``)
    or ``risk`` (``target``).

    Raises
    ------
    ValueError
        If the name is unknown or a parameter does not belong to the rule.
    """
    cls = _RULES.get(name)
    if cls is None:
        raise ValueError(f"unknown decision rule {name!r} (use {', '.join(sorted(_RULES))})")
    try:
        return cls(**params)
    except TypeError:
        allowed = [f for f in cls.__dataclass_fields__]
        raise ValueError(
            f"decision rule {name!r} takes {', '.join(allowed) or 'no parameters'};"
            f" got {', '.join(sorted(params))}"
        ) from None


@dataclass(frozen=True, kw_only=True, slots=True)
class Decision:
    """A rule applied to one test point.

    ``outcome`` is in the domain the tolerance is stated in (``domain``), as are ``tur``,
    ``expanded`` and ``outcome.acceptance``. ``expanded`` is the expanded uncertainty as
    reported (two significant digits in the reporting unit, GUM 7.2.6), exact, carried into the
    domain: the guard bands and the TUR are worked from it. ``acceptance`` is the acceptance
    zone in the value domain (sorted, for reporting), or ``None`` when the zone is empty;
    ``exact_acceptance`` the same limits exact. ``outer`` is, under the non-binary rule, the
    limits ``w`` outside the tolerance limits in the value domain (beyond them a result fails
    outright), else ``None``. ``within_tolerance`` says whether the reading lies within the
    tolerance limits, limits included (a rejection of a reading within them is by the guard
    band alone).
    """

    verdict: Verdict
    conformance: float
    tur: float | None
    domain: str
    outcome: Outcome
    acceptance: tuple[float, float] | None
    exact_acceptance: tuple[Exact, Exact] | None = None
    outer: tuple[Exact, Exact] | None = None
    expanded: Exact = Fraction(0)
    within_tolerance: bool = True


def reported_expanded(window: Window, budget: Budget) -> Fraction:
    """The expanded uncertainty of ``budget`` as reported, exact, in the domain of ``window``.

    U is rounded to two significant digits (GUM 7.2.6, :func:`round_uncertainty
    <verirun.metrology.uncertainty.round_uncertainty>`) in the unit it is reported in: the
    quantity's unit, degrees of arc or percent of scale length.
    """
    if budget.expanded == 0.0:
        return Fraction(0)
    per_unit = window.per_unit
    return Fraction(round_uncertainty(float(budget.expanded * per_unit))) / per_unit


def _to_value(law: ScaleLaw, window: Window, a: Exact, b: Exact) -> tuple[Exact, Exact]:
    if window.domain == "value":
        return a, b
    x, y = law.exact_value(a), law.exact_value(b)
    return min(x, y), max(x, y)


def verdict(
    rule: Rule, *, window: Window, law: ScaleLaw, budget: Budget, reading: float
) -> Verdict:
    """The verdict :func:`judge` gives, without the figures it reports beside it (the acceptance
    limits carried into the value domain, the TUR): what a run counts as each reading is taken.

    Raises
    ------
    ValueError
        If the budget and the window are in different domains.
    """
    y, expanded = _in_domain(window=window, law=law, budget=budget, reading=reading)
    low, high = window.zone
    zone = rule.acceptance(low=low, high=high, expanded=expanded, k=budget.k)
    return rule.statement(zone, low=low, high=high, reading=y)


def _in_domain(
    *, window: Window, law: ScaleLaw, budget: Budget, reading: float
) -> tuple[Exact, Fraction]:
    """The reading and U as reported, exact, in the domain the tolerance is stated in."""
    if budget.domain != window.domain:
        raise ValueError(
            f"the budget is in the {budget.domain} domain but the tolerance is stated in"
            f" the {window.domain} domain; combine the budget in the tolerance's domain"
        )
    y = as_written(reading)
    if window.domain != "value":
        y = law.exact_fraction(y)
    return y, reported_expanded(window, budget)


def judge(rule: Rule, *, window: Window, law: ScaleLaw, budget: Budget, reading: float) -> Decision:
    """Apply ``rule`` to ``reading`` against ``window`` with the uncertainty of ``budget``.

    The decision is taken in exact arithmetic of the numbers as written: the reading (to 15
    significant digits), the window's exact zone, and U as reported.

    Parameters
    ----------
    rule
        The decision rule.
    window
        The tolerance window at the point (from :func:`~verirun.metrology.tolerance.window`).
    law
        The range's scale law, used to carry readings into a deflection-domain tolerance.
    budget
        The point's budget; it must be combined in ``window.domain``.
    reading
        The meter's reading, in the value domain.

    Raises
    ------
    ValueError
        If the budget and the window are in different domains.
    """
    y, expanded = _in_domain(window=window, law=law, budget=budget, reading=reading)
    low, high = window.zone
    outcome = rule.decide(low=low, high=high, reading=y, expanded=expanded, k=budget.k)
    zone = outcome.acceptance
    exact_acceptance = None if zone.empty else _to_value(law, window, zone.low, zone.high)
    outer = None
    if rule.name == "non-binary":
        outer = _to_value(law, window, low - zone.guard, high + zone.guard)
    tur = (
        _tur(*window.reachable, expanded) if window.bounded and math.isfinite(window.low) else None
    )
    return Decision(
        verdict=outcome.verdict,
        conformance=outcome.conformance,
        tur=tur,
        domain=window.domain,
        outcome=outcome,
        acceptance=None
        if exact_acceptance is None
        else (float(exact_acceptance[0]), float(exact_acceptance[1])),
        exact_acceptance=exact_acceptance,
        outer=outer,
        expanded=expanded,
        within_tolerance=low <= y <= high,
    )
