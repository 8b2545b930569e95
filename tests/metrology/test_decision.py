"""TUR, conformance probability and the decision rules."""

from __future__ import annotations

import math
from fractions import Fraction

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import norm

from verirun.metrology.decision import (
    Acceptance,
    GuardedAcceptance,
    NonBinaryStatement,
    RiskAcceptance,
    SimpleAcceptance,
    conformance_probability,
    judge,
    rule_from_name,
    tur,
)
from verirun.metrology.exact import as_written
from verirun.metrology.scales import Linear, SeriesOhms
from verirun.metrology.tolerance import DegreesOfArc, RangeContext, ValueStatement, window
from verirun.metrology.uncertainty import Term, budget

FAST = settings(max_examples=150, deadline=None)


class TestTur:
    def test_ten_volt_example(self):
        """A 9.995 .. 10.005 V tolerance measured with U = 1.2 mV has a TUR of 4.17."""
        ratio = tur(low=9.995, high=10.005, expanded=0.0012)
        assert ratio == pytest.approx(0.010 / 0.0024)  # ANSI/NCSL Z540.3 definition
        assert ratio == pytest.approx(4.17, abs=5e-3)

    def test_unbounded_window_has_no_ratio(self):
        """A one-sided requirement has no span, so no TUR."""
        assert tur(low=0.0, high=math.inf, expanded=0.1) is None  # common practice, no source

    def test_zero_uncertainty_is_infinite(self):
        """With no uncertainty the ratio is infinite."""
        assert tur(low=0.0, high=1.0, expanded=0.0) == math.inf

    def test_refuses_reversed_limits(self):
        """Limits given high before low are refused."""
        with pytest.raises(ValueError, match="low <= high"):
            tur(low=1.0, high=0.0, expanded=0.1)


class TestConformanceProbability:
    def test_inside_near_the_upper_limit(self):
        """TL 9.995, TU 10.005, u 0.6 mV, y 10.004 gives pc = 0.9522."""
        pc = conformance_probability(low=9.995, high=10.005, reading=10.004, u=0.0006)
        # from memory of JCGM 106's formula pc = Φ((TU-y)/u) - Φ((TL-y)/u); scipy cross-check
        assert pc == pytest.approx(norm.cdf(0.001 / 0.0006) - norm.cdf(-0.009 / 0.0006), rel=1e-12)
        assert pc == pytest.approx(0.9522, abs=5e-5)

    def test_on_the_limit_is_one_half(self):
        """A reading exactly on a tolerance limit far from the other conforms with
        probability 1/2."""
        pc = conformance_probability(low=9.995, high=10.005, reading=10.005, u=0.0006)
        assert pc == pytest.approx(0.5, abs=1e-12)  # from memory of JCGM 106; Φ(0) - Φ(-16.7)

    def test_both_limits_count(self):
        """When both limits lie within reach, both tails are taken off: ±1 u holds 68.27 %."""
        pc = conformance_probability(low=-1.0, high=1.0, reading=0.0, u=1.0)
        assert pc == pytest.approx(norm.cdf(1.0) - norm.cdf(-1.0), rel=1e-12)  # scipy cross-check
        assert pc == pytest.approx(0.6827, abs=5e-5)  # from memory: the one-sigma interval

    def test_one_sided(self):
        """With no lower limit only the upper tail counts: two standard uncertainties in, 97.7 %."""
        pc = conformance_probability(low=-math.inf, high=10.0, reading=9.8, u=0.1)
        assert pc == pytest.approx(norm.cdf(2.0), rel=1e-12)  # scipy cross-check

    def test_zero_uncertainty(self):
        """With u = 0 the reading conforms exactly when it lies within the limits, limits
        included."""
        assert conformance_probability(low=0.0, high=1.0, reading=1.0, u=0.0) == 1.0
        assert conformance_probability(low=0.0, high=1.0, reading=1.0000001, u=0.0) == 0.0

    def test_refuses_nan_reading(self):
        """A reading that is not a number is refused."""
        with pytest.raises(ValueError, match="nan"):
            conformance_probability(low=0.0, high=1.0, reading=math.nan, u=0.1)


class TestSimpleAcceptance:
    rule = SimpleAcceptance()

    def test_on_the_limit_passes(self):
        """A reading exactly on a tolerance limit passes; one beyond it fails."""
        assert self.rule.decide(low=9.0, high=10.0, reading=10.0, expanded=0.2).verdict == "pass"
        assert (
            self.rule.decide(low=9.0, high=10.0, reading=10.0000001, expanded=0.2).verdict == "fail"
        )

    def test_acceptance_is_the_tolerance(self):
        """The acceptance zone is the tolerance zone (w = 0)."""
        zone = self.rule.acceptance(low=9.0, high=10.0, expanded=0.2)
        assert zone == Acceptance(low=9.0, high=10.0, guard=0.0)  # ILAC-G8:09/2019 4.2.1

    def test_reports_conformance_probability(self):
        """Simple acceptance still reports pc, 1/2 on a limit."""
        out = self.rule.decide(low=0.0, high=10.0, reading=10.0, expanded=0.2)
        assert out.conformance == pytest.approx(0.5)  # from memory of JCGM 106: Φ(0) - Φ(-100)

    def test_describe(self):
        """The sentence names ILAC-G8 4.2.1 and w = 0."""
        assert self.rule.describe().startswith("Simple acceptance (ILAC-G8:09/2019 4.2.1, w = 0)")


class TestGuardedAcceptance:
    def test_acceptance_limits(self):
        """With w = U = 0.2 the 9 .. 10 tolerance accepts 9.2 .. 9.8."""
        zone = GuardedAcceptance().acceptance(low=9.0, high=10.0, expanded=0.2)
        assert (zone.low, zone.high, zone.guard) == pytest.approx(
            (9.2, 9.8, 0.2)
        )  # ILAC-G8:09/2019 4.2.2

    def test_on_the_acceptance_limit_passes(self):
        """A reading exactly on an acceptance limit passes; one just beyond it fails."""
        rule = GuardedAcceptance()
        assert rule.decide(low=9.0, high=10.0, reading=9.75, expanded=0.25).verdict == "pass"
        assert rule.decide(low=9.0, high=10.0, reading=9.7500001, expanded=0.25).verdict == "fail"

    def test_risk_at_the_acceptance_limit(self):
        """At AL = TU - U with k = 2 the specific false-accept risk is 2.275 %."""
        rule = GuardedAcceptance()
        out = rule.decide(low=-math.inf, high=10.0, reading=9.8, expanded=0.2, k=2.0)
        # one-sided normal tail Φ(-2), scipy cross-check; ILAC-G8:09/2019 4.2.2: w = U gives < 2.5 %
        assert 1.0 - out.conformance == pytest.approx(norm.sf(2.0), rel=1e-9)
        assert 1.0 - out.conformance == pytest.approx(0.02275, abs=5e-6)
        assert out.verdict == "pass"

    def test_one_sided(self):
        """An unbounded upper limit stays unbounded."""
        zone = GuardedAcceptance(ratio=1.5).acceptance(low=1.0, high=math.inf, expanded=0.2)
        assert zone.low == pytest.approx(1.3) and zone.high == math.inf  # w = 1.5 U, by hand

    def test_guard_wider_than_the_zone(self):
        """A guard band wider than half the tolerance leaves nothing to accept."""
        rule = GuardedAcceptance()
        zone = rule.acceptance(low=9.9, high=10.1, expanded=0.2)
        assert zone.empty
        assert rule.decide(low=9.9, high=10.1, reading=10.0, expanded=0.2).verdict == "fail"

    def test_refuses_negative_ratio(self):
        """A negative guard-band ratio is refused."""
        with pytest.raises(ValueError, match="ratio"):
            GuardedAcceptance(ratio=-1.0)

    def test_describe(self):
        """The sentence names ILAC-G8 4.2.2 and the ratio."""
        assert "(ILAC-G8:09/2019 4.2.2, w = 1.5 × U)" in GuardedAcceptance(ratio=1.5).describe()

    @FAST
    @given(
        low=st.floats(-1e3, 1e3), width=st.floats(0, 1e3), u=st.floats(0, 1e3), r=st.floats(0, 10)
    )
    def test_acceptance_within_tolerance(self, low, width, u, r):
        """The guarded acceptance zone lies within the tolerance zone."""
        high = low + width
        zone = GuardedAcceptance(ratio=r).acceptance(low=low, high=high, expanded=u)
        # the rule reads its numbers as written (15 significant digits)
        assert zone.empty or (as_written(low) <= zone.low and zone.high <= as_written(high))


class TestNonBinaryStatement:
    rule = NonBinaryStatement()

    @pytest.mark.parametrize(
        ("reading", "verdict"),
        [
            (9.7, "pass"),  # ILAC-G8:09/2019 4.2.3: below AL = TU - U = 9.8
            (9.9, "conditional-pass"),  # ILAC-G8:09/2019 4.2.3: between AL and TU
            (10.1, "conditional-fail"),  # ILAC-G8:09/2019 4.2.3: above TU by no more than U
            (10.3, "fail"),  # ILAC-G8:09/2019 4.2.3: above TU + U
        ],
    )
    def test_four_zones(self, reading, verdict):
        """With TU = 10 and U = 0.2 the four zones give the four statements."""
        out = self.rule.decide(low=-math.inf, high=10.0, reading=reading, expanded=0.2)
        assert out.verdict == verdict

    @pytest.mark.parametrize(
        ("reading", "verdict"),
        [
            (9.75, "pass"),  # on AL: more favourable zone (documented choice)
            (10.0, "conditional-pass"),  # on TU: more favourable zone (documented choice)
            (10.25, "conditional-fail"),  # on TU + w: more favourable zone (documented choice)
        ],
    )
    def test_boundaries_take_the_better_statement(self, reading, verdict):
        """A reading exactly on a boundary takes the more favourable statement."""
        # U = 0.25 is exact in binary, so the boundaries are exactly 9.75, 10 and 10.25.
        assert (
            self.rule.decide(low=-math.inf, high=10.0, reading=reading, expanded=0.25).verdict
            == verdict
        )

    @pytest.mark.parametrize(
        ("reading", "verdict"),
        [
            (0.1, "pass"),
            (-0.9, "conditional-pass"),
            (-1.1, "conditional-fail"),
            (-1.3, "fail"),
        ],
    )
    def test_lower_side_mirrors(self, reading, verdict):
        """The lower tolerance limit has the same four zones mirrored."""
        # ILAC-G8:09/2019 4.2.3 applied to a lower limit TL = -1 with U = 0.2
        assert (
            self.rule.decide(low=-1.0, high=1.0, reading=reading, expanded=0.2).verdict == verdict
        )

    def test_describe(self):
        """The sentence names ILAC-G8 4.2.3 and w = U."""
        assert "(ILAC-G8:09/2019 4.2.3, w = 1 × U)" in self.rule.describe()


class TestRiskAcceptance:
    def test_one_sided_default_target(self):
        """One-sided, a 2 % target sets the acceptance limit 2.054 u inside the tolerance limit."""
        zone = RiskAcceptance().acceptance(low=-math.inf, high=10.0, expanded=0.2)
        # scipy cross-check; the limit is rounded inward to 0.0001 (U = 0.20 reported to 0.01)
        assert 10.0 - 0.1 * norm.isf(0.02) - 0.0001 < zone.high <= 10.0 - 0.1 * norm.isf(0.02)
        assert zone.high == Fraction("9.7946")  # 10 - 0.1 × 2.0537 (z of 2 %), w rounded up

    def test_matches_guarded_at_its_own_risk(self):
        """A 2.275 % target reproduces the w = U guard band at k = 2."""
        zone = RiskAcceptance(target=norm.sf(2.0)).acceptance(
            low=-math.inf, high=10.0, expanded=0.2
        )
        assert zone.high == pytest.approx(9.8, rel=1e-9)  # ILAC-G8:09/2019 4.2.2, w = U, k = 2

    def test_two_sided_limits_carry_the_target_risk(self):
        """Two-sided, the probability of non-conformance at an acceptance limit equals the
        target."""
        low, high, u = 9.995, 10.005, 0.0006
        zone = RiskAcceptance().acceptance(low=low, high=high, expanded=2 * u)
        for y in (zone.low, zone.high):
            y = float(y)
            pfa = 1.0 - (norm.cdf((high - y) / u) - norm.cdf((low - y) / u))  # JCGM 106, scipy
            # rounded inward to 1e-6 (U = 0.0012 reported to 0.0001): within 1e-6 / u of the target
            assert pfa == pytest.approx(0.02, abs=2e-4)
            assert pfa <= 0.02 + 1e-12
        assert zone.high - 10 == 10 - zone.low  # symmetric about the middle, exactly

    def test_verdicts(self):
        """A reading inside the acceptance limits passes, limits included; outside fails."""
        rule = RiskAcceptance()
        zone = rule.acceptance(low=9.995, high=10.005, expanded=0.0012)
        on = rule.decide(low=9.995, high=10.005, reading=zone.high, expanded=0.0012)
        assert on.verdict == "pass"
        assert 1.0 - on.conformance <= 0.02 + 1e-12
        out = rule.decide(low=9.995, high=10.005, reading=10.004, expanded=0.0012)
        assert out.verdict == "fail"  # pc = 0.9522 from the JCGM 106 example, risk 4.8 % > 2 %
        assert out.conformance == pytest.approx(0.9522, abs=5e-5)

    def test_too_narrow_a_tolerance_accepts_nothing(self):
        """When even the middle of the zone carries more than the target risk, nothing passes."""
        rule = RiskAcceptance()
        zone = rule.acceptance(low=9.995, high=10.005, expanded=0.012)
        # JCGM 106 normal model: at the middle pc = 2Φ(0.005/0.006) - 1 = 0.595 < 0.98
        assert 2 * norm.cdf(0.005 / 0.006) - 1 < 0.98
        assert zone.empty
        assert rule.decide(low=9.995, high=10.005, reading=10.0, expanded=0.012).verdict == "fail"

    def test_zero_uncertainty_accepts_the_tolerance(self):
        """With no uncertainty the acceptance zone is the tolerance zone."""
        zone = RiskAcceptance().acceptance(low=1.0, high=2.0, expanded=0.0)
        assert (zone.low, zone.high) == (1.0, 2.0)

    def test_refuses_target_outside_range(self):
        """A target that is not a probability below one half is refused."""
        with pytest.raises(ValueError, match="between 0 and 0.5"):
            RiskAcceptance(target=2.0)

    def test_describe(self):
        """The sentence names JCGM 106 and the target in percent."""
        text = RiskAcceptance().describe()
        assert "JCGM 106:2012" in text and "at most 2 %" in text

    @FAST
    @given(
        low=st.floats(-1e3, 1e3),
        width=st.floats(1e-3, 1e3),
        ratio=st.floats(1e-3, 10),
        target=st.floats(1e-4, 0.4),
    )
    def test_acceptance_within_tolerance(self, low, width, ratio, target):
        """The risk-based acceptance zone lies within the tolerance zone."""
        high = low + width
        zone = RiskAcceptance(target=target).acceptance(low=low, high=high, expanded=ratio * width)
        assert zone.empty or (low <= zone.low and zone.high <= high)


@pytest.mark.parametrize(
    "rule",
    [SimpleAcceptance(), GuardedAcceptance(), NonBinaryStatement(), RiskAcceptance()],
    ids=lambda r: r.name,
)
def test_every_rule_refuses_a_standard_uncertainty_that_overflows(rule):
    """U / k is the standard uncertainty every rule works with (GUM 2.3.1, from memory: an
    uncertainty expressed as a standard deviation, so a finite number); a U and k whose quotient
    overflows is refused, not decided."""
    with pytest.raises(ValueError, match="U / k must be finite"):
        rule.decide(low=-1.0, high=1.0, reading=0.0, expanded=1e308, k=1e-10)


class TestRuleFromName:
    @pytest.mark.parametrize(
        ("name", "params", "expected"),
        [
            ("simple", {}, SimpleAcceptance()),
            ("guarded", {"ratio": 0.5}, GuardedAcceptance(ratio=0.5)),
            ("non-binary", {}, NonBinaryStatement()),
            ("risk", {"target": 0.01}, RiskAcceptance(target=0.01)),
        ],
    )
    def test_builds_each_rule(self, name, params, expected):
        """Each name builds its rule with the parameters given."""
        assert rule_from_name(name, **params) == expected

    def test_refuses_unknown_name(self):
        """An unknown rule name is refused with the known names listed."""
        with pytest.raises(ValueError, match="guarded, non-binary, risk, simple"):
            rule_from_name("shared-risk")

    def test_refuses_foreign_parameter(self):
        """A parameter that belongs to another rule is refused, naming what the rule takes."""
        with pytest.raises(ValueError, match="'guarded' takes ratio; got target"):
            rule_from_name("guarded", target=0.02)


def _term(u: float, domain: str = "value") -> Term:
    return Term(name="t", standard_uncertainty=u, domain=domain, distribution="normal")


class TestJudge:
    def test_series_ohms_in_the_arc_domain(self):
        """On a series scale the decision is taken along the arc and the limits reported in ohms."""
        law = SeriesOhms(centre=10.0)
        win = window(DegreesOfArc(degrees=3.0), 10.0, RangeContext(law=law, arc=90.0))
        b = budget(
            terms=[_term(0.5 / 90.0, "deflection")], nominal=10.0, law=law, domain="deflection"
        )
        d = judge(GuardedAcceptance(), window=win, law=law, budget=b, reading=11.0)
        # derived from f = Rc/(Rc+Rx): U = 1 degree, so acceptance is 2 degrees either side of
        # f = 0.5
        f_hi, f_lo = 0.5 + 2 / 90, 0.5 - 2 / 90
        assert d.acceptance == pytest.approx((law.value(f_hi), law.value(f_lo)))
        assert win.low < d.acceptance[0] < d.acceptance[1] < win.high
        # 11 ohm sits (0.5 - 10/21) × 90 = 2.14 degrees from centre, outside the 2 degrees
        assert d.verdict == "fail"
        assert d.tur == pytest.approx(3.0)  # Z540.3 definition: 6 degrees / (2 × 1 degree)
        assert d.domain == "deflection"

    def test_digital_value_domain(self):
        """On a digital range the decision is in volts, with the budget's U and k."""
        law = Linear(high=2.0)
        ctx = RangeContext(law=law, count=0.001)
        win = window(ValueStatement(reading=0.5, counts=1), 1.755, ctx)
        b = budget(terms=[_term(0.001)], nominal=1.755, law=law, domain="value")
        d = judge(NonBinaryStatement(), window=win, law=law, budget=b, reading=1.763)
        # ILAC-G8:09/2019 4.2.3: 1.763 is between AL = 1.762775 and TU = 1.764775
        assert d.verdict == "conditional-pass"
        assert d.acceptance == pytest.approx((1.747225, 1.762775))
        assert d.conformance == pytest.approx(
            norm.cdf(1.775) - norm.cdf(-17.775)
        )  # scipy, u = 1 mV

    def test_refuses_budget_in_another_domain(self):
        """A budget combined in ohms cannot judge a tolerance stated in degrees."""
        law = SeriesOhms(centre=10.0)
        win = window(DegreesOfArc(degrees=3.0), 10.0, RangeContext(law=law, arc=90.0))
        b = budget(terms=[_term(0.01)], nominal=10.0, law=law, domain="value")
        with pytest.raises(ValueError, match="tolerance's domain"):
            judge(SimpleAcceptance(), window=win, law=law, budget=b, reading=10.0)

    def test_empty_zone_has_no_value_limits(self):
        """When nothing can pass, no acceptance limits are reported."""
        law = Linear(high=2.0)
        win = window(ValueStatement(absolute=0.001), 1.0, RangeContext(law=law))
        b = budget(terms=[_term(0.001)], nominal=1.0, law=law, domain="value")
        d = judge(GuardedAcceptance(), window=win, law=law, budget=b, reading=1.0)
        assert d.acceptance is None and d.verdict == "fail"
