"""Scale laws and the series ohmmeter circuit."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from verirun.metrology.scales import (
    Linear,
    SeriesOhms,
    ShuntOhms,
    make_law,
    series_full_scale_current,
    series_pointer_current,
    series_resistance_from_current,
)

FAST = settings(max_examples=150, deadline=None)
resistances = st.floats(min_value=1e-3, max_value=1e3)  # multiples of the centre value
centres = st.floats(min_value=1e-2, max_value=1e6)


def _numeric_slope(law, x: float) -> float:
    h = 1e-6 * max(abs(x), 1.0)
    return (law.fraction(x + h) - law.fraction(x - h)) / (2 * h)


class TestLinear:
    def test_ends_and_middle(self):
        """A 0..150 V scale is at 0, one half and full deflection at 0, 75 and 150 V."""
        law = Linear(high=150.0)
        # derived from f = (x - low) / (high - low)
        assert law.fraction(0.0) == 0.0
        assert law.fraction(75.0) == 0.5
        assert law.fraction(150.0) == 1.0

    def test_offset_scale(self):
        """A -50..+50 scale reads its centre zero at half deflection and has a 100 span."""
        law = Linear(low=-50.0, high=50.0)
        assert law.fraction(0.0) == 0.5  # derived from f = (x - low) / (high - low)
        assert law.fiducial == 100.0  # span, derived from high - low

    def test_slope_matches_finite_difference(self):
        """The slope of a linear law is one over its span, as a finite difference agrees."""
        law = Linear(high=2.0)
        assert law.slope(1.3) == pytest.approx(_numeric_slope(law, 1.3), rel=1e-9)
        assert law.slope(1.3) == 0.5  # derived from df/dx = 1 / span

    def test_refuses_zero_span(self):
        """A scale whose two ends coincide is refused."""
        with pytest.raises(ValueError, match="two different finite ends"):
            Linear(low=1.0, high=1.0)

    @FAST
    @given(
        x=st.floats(min_value=-1e3, max_value=1e3), high=st.floats(min_value=1e-3, max_value=1e4)
    )
    def test_round_trip(self, x, high):
        """Value to deflection and back returns the value."""
        law = Linear(high=high)
        assert law.value(law.fraction(x)) == pytest.approx(x, rel=1e-9, abs=1e-9 * high)


class TestSeriesOhms:
    def test_centre_scale_is_half_deflection(self):
        """At Rx = Rc the pointer sits at half the arc."""
        law = SeriesOhms(centre=12.0)
        assert law.fraction(12.0) == 0.5  # derived from f = Rc/(Rc+Rx)

    def test_ends(self):
        """Zero ohms is full deflection and an open circuit is none."""
        law = SeriesOhms(centre=10.0)
        # derived from f = Rc/(Rc+Rx)
        assert law.fraction(0.0) == 1.0
        assert law.fraction(math.inf) == 0.0
        assert law.value(0.0) == math.inf
        assert law.value(1.0) == 0.0
        assert law.value(-0.1) == math.inf
        assert law.value(1.1) == 0.0

    def test_slope_matches_finite_difference(self):
        """The analytic slope agrees with a finite difference and is negative."""
        law = SeriesOhms(centre=10.0)
        assert law.slope(10.0) == pytest.approx(_numeric_slope(law, 10.0), rel=1e-7)
        assert law.slope(10.0) == pytest.approx(-0.025)  # derived: -Rc/(Rc+Rx)^2 = -10/400

    def test_refuses_bad_centre(self):
        """A centre-scale value that is not a positive resistance is refused."""
        with pytest.raises(ValueError, match="positive resistance"):
            SeriesOhms(centre=0.0)

    @FAST
    @given(ratio=resistances, centre=centres)
    def test_round_trip(self, ratio, centre):
        """Value to deflection and back returns the resistance."""
        law = SeriesOhms(centre=centre)
        rx = ratio * centre
        assert law.value(law.fraction(rx)) == pytest.approx(rx, rel=1e-9)


class TestShuntOhms:
    def test_centre_scale_is_half_deflection(self):
        """At Rx = Rc the pointer sits at half the arc."""
        assert ShuntOhms(centre=50.0).fraction(50.0) == 0.5  # derived from f = Rx/(Rx+Rc)

    def test_ends(self):
        """Zero ohms is no deflection and an open circuit is full deflection."""
        law = ShuntOhms(centre=10.0)
        # derived from f = Rx/(Rx+Rc)
        assert law.fraction(0.0) == 0.0
        assert law.fraction(math.inf) == 1.0
        assert law.value(0.0) == 0.0
        assert law.value(1.0) == math.inf

    def test_slope_matches_finite_difference(self):
        """The analytic slope agrees with a finite difference and is positive."""
        law = ShuntOhms(centre=10.0)
        assert law.slope(30.0) == pytest.approx(_numeric_slope(law, 30.0), rel=1e-7)
        assert law.slope(30.0) == pytest.approx(10.0 / 1600.0)  # derived: Rc/(Rc+Rx)^2

    @FAST
    @given(ratio=resistances, centre=centres)
    def test_round_trip(self, ratio, centre):
        """Value to deflection and back returns the resistance."""
        law = ShuntOhms(centre=centre)
        rx = ratio * centre
        assert law.value(law.fraction(rx)) == pytest.approx(rx, rel=1e-9)


class TestMakeLaw:
    def test_builds_each_law(self):
        """Each name builds its law with the parameters given."""
        assert make_law("linear", full_scale=10.0) == Linear(high=10.0)
        assert make_law("series-ohms", centre=12.0) == SeriesOhms(centre=12.0)
        assert make_law("shunt-ohms", centre=12.0) == ShuntOhms(centre=12.0)

    def test_refuses_missing_parameter(self):
        """A law without the parameter it needs is refused with the parameter named."""
        with pytest.raises(ValueError, match="full-scale"):
            make_law("linear")
        with pytest.raises(ValueError, match="centre-scale"):
            make_law("series-ohms")

    def test_refuses_unknown_name(self):
        """An unknown law name is refused with the known names listed."""
        with pytest.raises(ValueError, match="linear, series-ohms or shunt-ohms"):
            make_law("log")


# The worked range of the trade (common practice, no source): a 1.5 V cell, 12 ohm centre
# scale, 100 degree arc. A check value only; the demo meter is built on numbers of its own.
EMF, RC, ARC = 1.5, 12.0, 100.0


class TestSeriesFullScaleCurrent:
    def test_worked_range(self):
        """1.5 V across 12 ohm drives 125 mA at full deflection, 1.25 mA per degree."""
        i_full = series_full_scale_current(EMF, RC)
        assert i_full == pytest.approx(0.125)  # common practice, no source: 1.5 / 12
        assert i_full / ARC == pytest.approx(1.25e-3)  # common practice, no source: 125 mA / 100
        assert 2.5 * i_full / ARC == pytest.approx(3.125e-3)  # common practice, no source


class TestSeriesPointerCurrent:
    def test_centre_scale_draws_half_current(self):
        """With Rx = Rc the pointer current is half the full-deflection current, half the arc."""
        i = series_pointer_current(EMF, RC, RC)
        assert i == pytest.approx(0.0625)  # derived: 1.5 / 24
        assert i / series_full_scale_current(EMF, RC) == pytest.approx(
            SeriesOhms(centre=RC).fraction(RC)
        )

    @FAST
    @given(ratio=resistances)
    def test_current_ratio_is_the_law(self, ratio):
        """The circuit's current ratio I / I_full equals the series law's deflection fraction."""
        rx = ratio * RC
        ratio_i = series_pointer_current(EMF, RC, rx) / series_full_scale_current(EMF, RC)
        assert ratio_i == pytest.approx(SeriesOhms(centre=RC).fraction(rx), rel=1e-12)


class TestSeriesResistanceFromCurrent:
    def test_centre_scale(self):
        """62.5 mA through the 12 ohm range means the unknown is 12 ohm."""
        assert series_resistance_from_current(EMF, RC, 0.0625) == pytest.approx(
            12.0
        )  # 1.5/0.0625 - 12

    def test_two_and_a_half_degrees_below_full(self):
        """2.5 degrees short of full deflection (121.875 mA) is 0.3077 ohm by both routes."""
        current = 0.125 - 3.125e-3
        rx = series_resistance_from_current(EMF, RC, current)
        assert rx == pytest.approx(1.5 / 0.121875 - 12.0)  # derived: Rx = E/I - Rc = 0.307692
        assert rx == pytest.approx(SeriesOhms(centre=RC).value(1 - 2.5 / ARC))  # f = Rc/(Rc+Rx)
        assert rx == pytest.approx(0.307692, abs=1e-6)  # by hand: 12 * 0.025 / 0.975
