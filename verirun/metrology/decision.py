"""Decision rules: from a reading, its tolerance and its uncertainty to a statement of conformity.

Every rule works in one dimension: tolerance limits ``low`` .. ``high`` (either may be infinite
for a one-sided requirement), an expanded uncertainty ``U`` with its coverage factor ``k`` and a
reading, all in the same domain. :func:`judge` puts a :class:`~verirun.metrology.tolerance.Window`
and a :class:`~verirun.metrology.uncertainty.Budget` into the domain the tolerance is stated in
(degrees of arc on an ohms scale are compared as fractions of scale length, never as ohms) and
maps the acceptance limits back to the value domain only for reporting.

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
from statistics import NormalDist
from typing import Literal

from verirun.metrology.scales import Linear, ScaleLaw
from verirun.metrology.tolerance import Window
from verirun.metrology.uncertainty import Budget

Verdict = Literal["pass", "conditional-pass", "conditional-fail", "fail"]

_NORMAL = NormalDist()


def _check_zone(low: float, high: float, expanded: float, k: float) -> None:
    if math.isnan(low) or math.isnan(high) or low > high:
        raise ValueError(f"tolerance limits must satisfy low <= high, got {low!r}..{high!r}")
    if not (math.isfinite(expanded) and expanded >= 0):
        raise ValueError(f"the expanded uncertainty must be finite and not negative, got {expanded!r}")
    if not (math.isfinite(k) and k > 0):
        raise ValueError(f"the coverage factor k must be positive and finite, got {k!r}")
    if not math.isfinite(expanded / k):  # the standard uncertainty every rule works with
        raise ValueError(f"the standard uncertainty U / k must be finite, got {expanded!r} / {k!r}")


def tur(*, low: float, high: float, expanded: float) -> float | None:
    """Test uncertainty ratio: ``(high - low) / (2 U)``, as ANSI/NCSL Z540.3 defines it.

    ``expanded`` should be the 95 % expanded uncertainty of the measurement process (k = 2 is
    the usual stand-in). Returns ``None`` when a limit is infinite (a one-sided requirement has
    no span) and ``math.inf`` when ``expanded`` is zero.
    """
    _check_zone(low, high, expanded, 1.0)
    return _tur(low, high, expanded)


def _tur(low: float, high: float, expanded: float) -> float | None:
    # tur() on numbers already checked.
    if not (math.isfinite(low) and math.isfinite(high)):
        return None
    if expanded == 0.0:
        return math.inf
    return (high - low) / (2.0 * expanded)


def conformance_probability(*, low: float, high: float, reading: float, u: float) -> float:
    """Probability that the measurand lies within ``low`` .. ``high`` given ``reading``.

    JCGM 106:2012, normal model: ``pc = Φ((TU - y)/u) - Φ((TL - y)/u)`` with ``y`` the reading
    and ``u`` its standard uncertainty; an infinite limit contributes 0 or 1. With ``u = 0`` the
    measurand is the reading itself: ``pc`` is 1 inside the limits (included) and 0 outside.
    """
    if not math.isnan(reading):  # a NaN reading is refused first, by _pc
        _check_zone(low, high, u, 1.0)
    return _pc(low, high, reading, u)


def _pc(low: float, high: float, reading: float, u: float) -> float:
    # conformance_probability() on limits and an uncertainty already checked.
    if math.isnan(reading):
        raise ValueError("a reading must be a number, got nan")
    if u == 0.0 or math.isinf(reading):
        return 1.0 if low <= reading <= high else 0.0
    return _NORMAL.cdf((high - reading) / u) - _NORMAL.cdf((low - reading) / u)


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
class Acceptance:
    """The acceptance zone ``low`` .. ``high`` (limits included) a rule gives.

    ``guard`` is how far each acceptance limit lies inside its tolerance limit (``w``). When the
    guard band swallows the whole tolerance zone the zone is empty (``low > high``) and no
    reading can pass.
    """

    low: float
    high: float
    guard: float

    @property
    def empty(self) -> bool:
        """True when no reading can be accepted."""
        return self.low > self.high

    def contains(self, reading: float) -> bool:
        """True when ``reading`` lies in the zone, limits included."""
        return self.low <= reading <= self.high


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
class Outcome:
    """A rule's statement about one reading: the verdict, the zone used, and ``pc``."""

    verdict: Verdict
    acceptance: Acceptance
    conformance: float


def _binary(zone: "Acceptance", *, low: float, high: float, reading: float, u: float) -> "Outcome":
    """A pass/fail outcome: pass within ``zone``, limits included; pc reported either way.
    The rule has checked the limits and the uncertainty in making ``zone``."""
    pc = _pc(low, high, reading, u)
    return Outcome(verdict="pass" if zone.contains(reading) else "fail", acceptance=zone, conformance=pc)


def _shrunk(low: float, high: float, w: float) -> Acceptance:
    return Acceptance(low=low + w, high=high - w, guard=w)


@dataclass(frozen=True, kw_only=True)
class SimpleAcceptance:
    """Simple acceptance, ILAC-G8:09/2019 4.2.1 (``w = 0``).

    A reading within the tolerance limits, limits included, passes; any other fails.
    """

    name = "simple"

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return ("Simple acceptance (ILAC-G8:09/2019 4.2.1, w = 0): a result passes when the measured"
                " value lies within the tolerance limits, limits included, and fails otherwise;"
                " the measurement uncertainty does not move the acceptance limits.")

    def acceptance(self, *, low: float, high: float, expanded: float, k: float = 2.0) -> Acceptance:
        """The acceptance zone: the tolerance zone itself."""
        _check_zone(low, high, expanded, k)
        return _shrunk(low, high, 0.0)

    def decide(self, *, low: float, high: float, reading: float, expanded: float,
               k: float = 2.0) -> Outcome:
        """``"pass"`` or ``"fail"`` for ``reading``; on a tolerance limit it passes."""
        return _binary(self.acceptance(low=low, high=high, expanded=expanded, k=k),
                       low=low, high=high, reading=reading, u=expanded / k)


@dataclass(frozen=True, kw_only=True)
class GuardedAcceptance:
    """Binary statement with a guard band, ILAC-G8:09/2019 4.2.2 (``w = ratio × U``).

    The acceptance limits are the tolerance limits each moved inward by ``w``. A reading within
    them, limits included, passes; any other fails.
    """

    ratio: float = 1.0
    name = "guarded"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.ratio) and self.ratio >= 0):
            raise ValueError(f"the guard-band ratio must be finite and not negative, got {self.ratio!r}")

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return (f"Guarded acceptance (ILAC-G8:09/2019 4.2.2, w = {self.ratio:g} × U): a result passes"
                " when the measured value lies within the acceptance limits, each tolerance limit moved"
                " inward by w, limits included, and fails otherwise; U is the expanded uncertainty"
                " of measurement.")

    def acceptance(self, *, low: float, high: float, expanded: float, k: float = 2.0) -> Acceptance:
        """The tolerance zone shrunk by ``w = ratio × U`` on each side."""
        _check_zone(low, high, expanded, k)
        return _shrunk(low, high, self.ratio * expanded)

    def decide(self, *, low: float, high: float, reading: float, expanded: float,
               k: float = 2.0) -> Outcome:
        """``"pass"`` or ``"fail"``; a reading on an acceptance limit passes."""
        return _binary(self.acceptance(low=low, high=high, expanded=expanded, k=k),
                       low=low, high=high, reading=reading, u=expanded / k)


@dataclass(frozen=True, kw_only=True)
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
        return (f"Non-binary statement with guard band (ILAC-G8:09/2019 4.2.3, w = {self.ratio:g} × U):"
                " pass within the acceptance limits (each tolerance limit moved inward by w);"
                " conditional pass within the tolerance limits but outside the acceptance limits;"
                " conditional fail outside the tolerance limits by no more than w; fail beyond;"
                " a value on a boundary takes the more favourable statement.")

    def decide(self, *, low: float, high: float, reading: float, expanded: float,
               k: float = 2.0) -> Outcome:
        """One of the four statements for ``reading``."""
        zone = self.acceptance(low=low, high=high, expanded=expanded, k=k)  # checks the numbers
        pc = _pc(low, high, reading, expanded / k)
        w = zone.guard
        if zone.contains(reading):
            verdict: Verdict = "pass"
        elif low <= reading <= high:
            verdict = "conditional-pass"
        elif low - w <= reading <= high + w:
            verdict = "conditional-fail"
        else:
            verdict = "fail"
        return Outcome(verdict=verdict, acceptance=zone, conformance=pc)


@dataclass(frozen=True, kw_only=True)
class RiskAcceptance:
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
            raise ValueError("the false-accept target must lie strictly between 0 and 0.5,"
                             f" got {self.target!r}")

    def describe(self) -> str:
        """One sentence naming the rule, for the certificate (ISO/IEC 17025 7.8.6.2)."""
        return (f"Guarded acceptance by specific risk (JCGM 106:2012, normal model; ILAC-G8:09/2019 4.2.2):"
                f" a result passes when the probability that the measured quantity lies outside the"
                f" tolerance limits, 1 − pc, is at most {100 * self.target:g} %, and fails otherwise.")

    def acceptance(self, *, low: float, high: float, expanded: float, k: float = 2.0) -> Acceptance:
        """The readings at which the specific false-accept risk is at most ``target``."""
        _check_zone(low, high, expanded, k)
        u = expanded / k
        if u == 0.0 or (math.isinf(low) and math.isinf(high)):
            return _shrunk(low, high, 0.0)
        if math.isinf(low) or math.isinf(high):
            return _shrunk(low, high, u * _NORMAL.inv_cdf(1.0 - self.target))
        half = (high - low) / 2.0
        mid = low + half

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
        return Acceptance(low=mid - inside, high=mid + inside, guard=half - inside)

    def decide(self, *, low: float, high: float, reading: float, expanded: float,
               k: float = 2.0) -> Outcome:
        """``"pass"`` or ``"fail"``; a reading on an acceptance limit passes."""
        return _binary(self.acceptance(low=low, high=high, expanded=expanded, k=k),
                       low=low, high=high, reading=reading, u=expanded / k)


Rule = SimpleAcceptance | GuardedAcceptance | NonBinaryStatement | RiskAcceptance

_RULES: dict[str, type] = {cls.name: cls for cls in
                           (SimpleAcceptance, GuardedAcceptance, NonBinaryStatement, RiskAcceptance)}


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
        raise ValueError(f"decision rule {name!r} takes {', '.join(allowed) or 'no parameters'};"
                         f" got {', '.join(sorted(params))}") from None


# Made afresh for every reading and never changed after; not frozen because a frozen
# dataclass takes twice as long to build.
@dataclass(kw_only=True, slots=True)
class Decision:
    """A rule applied to one test point.

    ``outcome`` is in the domain the tolerance is stated in (``domain``), as are ``tur`` and
    ``outcome.acceptance``. ``acceptance`` is the same zone in the value domain (sorted, for
    reporting), or ``None`` when the zone is empty.
    """

    verdict: Verdict
    conformance: float
    tur: float | None
    domain: str
    outcome: Outcome
    acceptance: tuple[float, float] | None


def judge(rule: Rule, *, window: Window, law: ScaleLaw, budget: Budget, reading: float) -> Decision:
    """Apply ``rule`` to ``reading`` against ``window`` with the uncertainty of ``budget``.

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
    if budget.domain != window.domain:
        raise ValueError(f"the budget is in the {budget.domain} domain but the tolerance is stated in"
                         f" the {window.domain} domain; combine the budget in the tolerance's domain")
    if window.domain == "value":
        low, high, y = window.low, window.high, reading
    else:
        f0 = law.fraction(window.nominal)
        low, high, y = f0 - window.half_width, f0 + window.half_width, law.fraction(reading)
        if not isinstance(law, Linear):
            # An ohms scale ends at 0 Ω and at ∞: a limit at or past an end of the arc is no
            # limit at all (the pointer cannot go there), so that side of the tolerance is open.
            if low <= 0.0:
                low = -math.inf
            if high >= 1.0:
                high = math.inf
    outcome = rule.decide(low=low, high=high, reading=y, expanded=budget.expanded, k=budget.k)
    zone = outcome.acceptance
    if zone.empty:
        acceptance = None
    elif window.domain == "value":
        acceptance = (zone.low, zone.high)
    else:
        a, b = law.value(zone.low), law.value(zone.high)
        acceptance = (min(a, b), max(a, b))
    return Decision(verdict=outcome.verdict, conformance=outcome.conformance,
                    tur=_tur(low, high, budget.expanded), domain=window.domain,  # checked by the rule
                    outcome=outcome, acceptance=acceptance)
