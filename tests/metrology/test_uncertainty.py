"""Uncertainty terms, budgets and GUM rounding."""

from __future__ import annotations

import math

import pytest
from scipy.stats import norm

from verirun.metrology.scales import Linear, SeriesOhms
from verirun.metrology.uncertainty import (
    Budget,
    CalibratorSpec,
    Term,
    budget,
    coverage_factor,
    readability_term,
    resolution_uncertainty,
    round_result,
    standard_from_limit,
)


class TestCoverageFactor:
    def test_common_levels(self):
        """99 % and 95 % two-sided normal coverage need k = 2.576 and 1.960."""
        assert coverage_factor(0.99) == pytest.approx(
            norm.ppf(0.995), rel=1e-12
        )  # scipy cross-check
        assert coverage_factor(0.99) == pytest.approx(2.576, abs=5e-4)  # GUM table G.1
        assert coverage_factor(0.95) == pytest.approx(1.960, abs=5e-4)  # GUM table G.1

    @pytest.mark.parametrize("level", [0.0, 1.0, -0.5, 95.0])
    def test_refuses_levels_outside_zero_one(self, level):
        """A level that is not a probability strictly between 0 and 1 is refused."""
        with pytest.raises(ValueError, match="strictly between 0 and 1"):
            coverage_factor(level)


class TestStandardFromLimit:
    def test_rectangular_and_triangular(self):
        """Rectangular limits divide by sqrt 3, triangular by sqrt 6."""
        assert standard_from_limit(1.0, distribution="rectangular") == pytest.approx(
            0.57735027
        )  # GUM 4.3.7
        assert standard_from_limit(1.0, distribution="triangular") == pytest.approx(
            0.40824829
        )  # GUM 4.3.9

    def test_normal_needs_a_level(self):
        """A normal limit without its confidence level is refused."""
        with pytest.raises(ValueError, match="confidence level"):
            standard_from_limit(1.0, distribution="normal")

    def test_refuses_negative_limit(self):
        """A negative limit is refused."""
        with pytest.raises(ValueError, match="not negative"):
            standard_from_limit(-1.0, distribution="rectangular")


class TestCalibratorSpec:
    spec = CalibratorSpec(output_ppm=10.0, floor=5e-6, level=0.99)

    def test_limit_at_ten_volts(self):
        """±(10 ppm of output + 5 µV) at 10 V is ±105 µV."""
        assert self.spec.limit(output=10.0) == pytest.approx(
            105e-6, rel=1e-12
        )  # by hand: 100 + 5 µV

    def test_standard_uncertainty_at_99_percent(self):
        """At 99 % the 105 µV limit is a standard uncertainty of 40.8 µV (k = 2.576)."""
        u = self.spec.standard_uncertainty(output=10.0)
        assert u == pytest.approx(105e-6 / norm.ppf(0.995), rel=1e-12)  # scipy cross-check
        assert u == pytest.approx(40.8e-6, abs=0.05e-6)  # by hand: 105 / 2.576 = 40.76

    def test_limits_are_rectangular(self):
        """A specification stated as bare limits divides by sqrt 3."""
        spec = CalibratorSpec(output_ppm=10.0, floor=5e-6, level="limits")
        assert spec.standard_uncertainty(output=10.0) == pytest.approx(
            105e-6 / math.sqrt(3)
        )  # GUM 4.3.7

    def test_range_term_and_percent_form(self):
        """0.01 % of output + 0.005 % of a 20 V range at 10 V is 2 mV, as ppm or as percent."""
        spec = CalibratorSpec.from_percent(output_percent=0.01, range_percent=0.005, level=0.95)
        assert spec == CalibratorSpec(output_ppm=100.0, range_ppm=50.0, level=0.95)
        assert spec.limit(output=10.0, range_value=20.0) == pytest.approx(
            2e-3
        )  # by hand: 1 mV + 1 mV

    def test_term(self):
        """The calibrator's term is a normal value-domain contribution."""
        term = self.spec.term(output=-10.0)
        assert term.domain == "value" and term.distribution == "normal"
        assert term.standard_uncertainty == pytest.approx(
            self.spec.standard_uncertainty(output=10.0)
        )

    def test_refuses_bad_level(self):
        """A level given in percent rather than as a fraction is refused."""
        with pytest.raises(ValueError, match="strictly between 0 and 1"):
            CalibratorSpec(output_ppm=10.0, level=99.0)


class TestResolutionUncertainty:
    def test_one_millivolt_digit(self):
        """A 1 mV digit gives u = 0.2887 mV."""
        # GUM F.2.2.1: rectangular, half-width res/2, u = res / (2 sqrt 3) = 0.001 / 3.4641
        assert resolution_uncertainty(0.001) == pytest.approx(0.0002887, abs=5e-8)
        assert resolution_uncertainty(0.001) == pytest.approx(0.001 / math.sqrt(12), rel=1e-12)


class TestReadabilityTerm:
    def test_fraction_of_a_division_in_value(self):
        """A fifth of a 1 V division is a 0.2 V resolution, u = 57.7 mV."""
        term = readability_term(division=1.0, fraction=0.2)
        assert term.domain == "value"
        assert term.standard_uncertainty == pytest.approx(0.2 / math.sqrt(12))  # GUM F.2.2.1

    def test_degrees_become_fraction_of_length(self):
        """Half a degree on a 90 degree arc is a deflection-domain term of (0.5/90)/(2 sqrt 3)."""
        term = readability_term(division=1.0, fraction=0.5, unit="degrees", arc=90.0)
        assert term.domain == "deflection"
        assert term.standard_uncertainty == pytest.approx(
            (0.5 / 90.0) / math.sqrt(12)
        )  # GUM F.2.2.1

    def test_degrees_need_the_arc(self):
        """A resolution in degrees without the arc span is refused."""
        with pytest.raises(ValueError, match="arc span"):
            readability_term(division=1.0, unit="degrees")


class TestTerm:
    def test_refuses_negative_uncertainty(self):
        """A negative standard uncertainty is refused, naming the term."""
        with pytest.raises(ValueError, match="'drift'"):
            Term(name="drift", standard_uncertainty=-1.0, domain="value", distribution="normal")

    def test_refuses_unknown_domain(self):
        """A domain other than value or deflection is refused."""
        with pytest.raises(ValueError, match="'value' or 'deflection'"):
            Term(name="x", standard_uncertainty=1.0, domain="ohms", distribution="normal")


def _term(name: str, u: float, domain: str = "value", c: float = 1.0) -> Term:
    return Term(
        name=name, standard_uncertainty=u, domain=domain, distribution="normal", sensitivity=c
    )


class TestBudget:
    def test_root_sum_square_in_value_domain(self):
        """3 mV and 4 mV combine to 5 mV and expand to 10 mV with k = 2."""
        b = budget(
            terms=[_term("a", 3e-3), _term("b", 4e-3)],
            nominal=5.0,
            law=Linear(high=10.0),
            domain="value",
        )
        assert isinstance(b, Budget)
        assert b.combined == pytest.approx(5e-3)  # common practice, no source: 3-4-5
        assert b.expanded == pytest.approx(10e-3)
        assert b.expanded_value == pytest.approx(10e-3)

    def test_sensitivity_scales_a_term(self):
        """A sensitivity of -2 doubles a term's contribution."""
        b = budget(
            terms=[_term("a", 1e-3, c=-2.0)], nominal=1.0, law=Linear(high=2.0), domain="value"
        )
        assert b.contributions == pytest.approx((2e-3,))  # GUM 5.1.3: |c_i| u(x_i)

    def test_ohms_carried_into_arc_on_series_scale(self):
        """10 mΩ at a 10 Ω centre is 2.5e-4 of the scale length, and back to 10 mΩ for reporting."""
        law = SeriesOhms(centre=10.0)
        b = budget(terms=[_term("calibrator", 0.01)], nominal=10.0, law=law, domain="deflection")
        # derived from f = Rc/(Rc+Rx): |df/dRx| = Rc/(Rc+Rx)^2 = 10/400 = 0.025 per ohm
        assert b.contributions[0] == pytest.approx(0.01 * 0.025)
        # cross-check: the same shift in ohms, read off the law, moves the pointer by that much
        shift = law.fraction(10.0) - law.fraction(10.01)
        assert b.contributions[0] == pytest.approx(shift, rel=1e-3)
        assert b.expanded == pytest.approx(2 * 2.5e-4)
        assert b.expanded_value == pytest.approx(0.02)

    def test_mixed_domains_combine_in_the_tolerance_domain(self):
        """A degree readability term and an ohms calibrator term combine along the arc."""
        law = SeriesOhms(centre=10.0)
        read = readability_term(division=1.0, fraction=0.2, unit="degrees", arc=90.0)
        b = budget(
            terms=[_term("calibrator", 0.01), read], nominal=10.0, law=law, domain="deflection"
        )
        expected = math.hypot(0.01 * 0.025, (0.2 / 90) / math.sqrt(12))  # by hand, GUM 5.1.2
        assert b.combined == pytest.approx(expected)
        assert b.expanded_value == pytest.approx(2 * expected / 0.025)

    def test_deflection_term_carried_into_value_domain(self):
        """On a 0..10 V scale 0.1 % of length is 10 mV in a value-domain budget."""
        b = budget(
            terms=[_term("parallax", 1e-3, domain="deflection")],
            nominal=3.0,
            law=Linear(high=10.0),
            domain="value",
        )
        assert b.combined == pytest.approx(0.01)  # derived from f = x / 10

    def test_infinity_end_of_an_ohms_scale(self):
        """At an open circuit the slope is zero: ohms terms vanish along the arc, U in ohms is
        infinite."""
        law = SeriesOhms(centre=10.0)
        b = budget(
            terms=[_term("cal", 0.01), _term("read", 1e-3, domain="deflection")],
            nominal=math.inf,
            law=law,
            domain="deflection",
        )
        assert b.contributions == (0.0, 1e-3)  # derived: df/dRx -> 0 as Rx -> infinity
        assert b.expanded_value == math.inf

    def test_empty_budget(self):
        """A budget with no terms has zero uncertainty."""
        b = budget(terms=[], nominal=1.0, law=Linear(high=2.0), domain="deflection")
        assert b.combined == 0.0 and b.expanded_value == 0.0

    def test_refuses_bad_k(self):
        """A coverage factor that is not positive is refused."""
        with pytest.raises(ValueError, match="coverage factor"):
            budget(terms=[], nominal=1.0, law=Linear(high=2.0), domain="value", k=0.0)


class TestRoundResult:
    def test_gum_example(self):
        """10.057 62 Ω with U = 27 mΩ is reported as 10.058 Ω."""
        r = round_result(value=10.05762, uncertainty=0.027)
        assert (r.value, r.uncertainty, r.decimals) == (10.058, 0.027, 3)  # GUM 7.2.6
        assert (r.value_text, r.uncertainty_text) == ("10.058", "0.027")

    def test_two_significant_digits(self):
        """An uncertainty with many digits is cut to two significant digits."""
        r = round_result(value=1.234567, uncertainty=0.0012345)
        assert (r.uncertainty, r.decimals, r.value) == (0.0012, 4, 1.2346)  # GUM 7.2.6

    def test_round_up(self):
        """10.47 mΩ rounded up is 11 mΩ."""
        r = round_result(value=1.0, uncertainty=10.47e-3, mode="up")
        assert r.uncertainty == 0.011  # GUM 7.2.6
        assert round_result(value=1.0, uncertainty=10.47e-3).uncertainty == 0.010  # nearest

    def test_nearest_rounds_down(self):
        """28.05 kHz to the nearest two digits is 28 kHz."""
        assert round_result(value=1000.0, uncertainty=28.05).uncertainty == 28.0  # GUM 7.2.6

    def test_carry_keeps_two_digits(self):
        """0.0996 rounds to 0.10, two significant digits, and the value to two decimals."""
        r = round_result(value=1.23456, uncertainty=0.0996)
        assert (r.uncertainty_text, r.decimals, r.value_text) == ("0.10", 2, "1.23")  # GUM 7.2.6

    def test_tens_place(self):
        """U = 270.4 rounds the value to the tens place, written without an exponent."""
        r = round_result(value=12345.6, uncertainty=270.4)
        assert (r.decimals, r.value_text, r.uncertainty_text) == (-1, "12350", "270")  # GUM 7.2.6

    def test_trailing_zero_kept_in_text(self):
        """A value that rounds to a trailing zero keeps it in its text."""
        r = round_result(value=10.0501, uncertainty=0.0021)
        assert r.value_text == "10.0501" and r.uncertainty_text == "0.0021"
        r = round_result(value=10.04998, uncertainty=0.021)
        assert r.value_text == "10.050"  # common practice, no source

    @pytest.mark.parametrize("u", [0.0, -1.0, math.inf, math.nan])
    def test_refuses_unusable_uncertainty(self, u):
        """A zero, negative or non-finite uncertainty cannot set a decimal place."""
        with pytest.raises(ValueError, match="positive finite"):
            round_result(value=1.0, uncertainty=u)
