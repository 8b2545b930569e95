"""Accuracy statements, the windows they give, and deviations."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from verirun.metrology.scales import (
    Linear,
    SeriesOhms,
    ShuntOhms,
    series_pointer_current,
    series_resistance_from_current,
)
from verirun.metrology.tolerance import (
    ClassIndex,
    DegreesOfArc,
    PercentOfFullScale,
    PercentOfLength,
    RangeContext,
    ValueStatement,
    deviation,
    window,
)

FAST = settings(max_examples=150, deadline=None)


def series(centre: float, arc: float = 90.0) -> RangeContext:
    return RangeContext(law=SeriesOhms(centre=centre), arc=arc)


def shunt(centre: float, arc: float = 90.0) -> RangeContext:
    return RangeContext(law=ShuntOhms(centre=centre), arc=arc)


class TestWindowSeriesOhms:
    def test_three_degrees_at_centre(self):
        """3 degrees of a 90 degree arc at the 10 ohm centre gives 8.75 .. 11.4286 ohm."""
        win = window(DegreesOfArc(degrees=3.0), 10.0, series(10.0))
        # derived from f = Rc/(Rc+Rx): f0 = 0.5, df = 1/30,
        # low = 10 (1 - 16/30) / (16/30) = 8.75, high = 10 (1 - 14/30) / (14/30) = 80/7
        assert win.low == pytest.approx(8.75, rel=1e-12)
        assert win.high == pytest.approx(80.0 / 7.0, rel=1e-12)
        assert win.high == pytest.approx(11.4286, abs=5e-5)
        assert win.domain == "deflection"
        assert win.half_width == pytest.approx(1.0 / 30.0)

    def test_worked_range_through_the_circuit(self):
        """On the 1.5 V, 12 ohm, 100 degree range, 2.5 degrees is 3.125 mA either side of
        62.5 mA."""
        win = window(DegreesOfArc(degrees=2.5), 12.0, series(12.0, arc=100.0))
        # common practice, no source: 1.25 mA per degree, so the limits draw 62.5 -/+ 3.125 mA,
        # and Rx = E/I - Rc turns those currents into the window's ohms.
        assert win.high == pytest.approx(
            series_resistance_from_current(1.5, 12.0, 0.0625 - 0.003125)
        )
        assert win.low == pytest.approx(
            series_resistance_from_current(1.5, 12.0, 0.0625 + 0.003125)
        )
        assert win.high == pytest.approx(13.2632, abs=5e-5)  # by hand: 1.5/0.059375 - 12
        assert win.low == pytest.approx(10.8571, abs=5e-5)  # by hand: 1.5/0.065625 - 12
        assert series_pointer_current(1.5, 12.0, win.high) == pytest.approx(0.059375)

    def test_upper_limit_unbounded_past_the_infinity_end(self):
        """Once f - df < 0 the upper limit is infinite and the window says it is unbounded."""
        win = window(DegreesOfArc(degrees=10.0), 90.0, series(10.0))
        # derived from f = Rc/(Rc+Rx): f0 = 0.1, df = 1/9 > f0; low = value(0.1 + 1/9)
        assert win.high == math.inf
        assert not win.bounded
        assert win.low == pytest.approx(10.0 * (1 - (0.1 + 1 / 9)) / (0.1 + 1 / 9))

    def test_upper_limit_unbounded_exactly_at_the_infinity_end(self):
        """When f - df is exactly 0 the upper limit is infinite."""
        win = window(DegreesOfArc(degrees=10.0), 80.0, series(10.0))
        assert 10.0 / 90.0 - 10.0 / 90.0 == 0.0  # f0 = 10/90 = df, derived from f = Rc/(Rc+Rx)
        assert win.high == math.inf

    def test_lower_limit_clamped_at_zero(self):
        """Once f + df >= 1 the lower limit is 0 ohm."""
        win = window(DegreesOfArc(degrees=10.0), 1.0, series(10.0))
        # derived from f = Rc/(Rc+Rx): f0 = 10/11, f0 + 1/9 > 1; high = value(10/11 - 1/9)
        assert win.low == 0.0
        f = 10 / 11 - 1 / 9
        assert win.high == pytest.approx(10.0 * (1 - f) / f)

    def test_class_index_on_ohms_is_percent_of_length(self):
        """A class index on an ohms scale is a percent of scale length."""
        win = window(ClassIndex(index=2.5), 10.0, series(10.0))
        assert win.domain == "deflection"  # IEC 60051-1: fiducial length on a non-linear scale
        assert win.half_width == pytest.approx(0.025)

    def test_percent_of_full_scale_refused(self):
        """Percent of full scale on an ohms scale is refused with a hint."""
        with pytest.raises(ValueError, match="degrees of arc"):
            window(PercentOfFullScale(percent=2.0), 10.0, series(10.0))

    def test_degrees_need_the_arc(self):
        """A degree statement on a range without an arc span is refused."""
        with pytest.raises(ValueError, match="arc span"):
            window(DegreesOfArc(degrees=3.0), 10.0, RangeContext(law=SeriesOhms(centre=10.0)))


class TestWindowShuntOhms:
    def test_three_degrees_at_centre(self):
        """3 degrees of 90 at the 10 ohm centre of a shunt scale mirrors the series case."""
        win = window(DegreesOfArc(degrees=3.0), 10.0, shunt(10.0))
        # derived from f = Rx/(Rx+Rc): low = 10 (14/30)/(16/30) = 8.75, high = 10 (16/30)/(14/30)
        assert win.low == pytest.approx(8.75, rel=1e-12)
        assert win.high == pytest.approx(80.0 / 7.0, rel=1e-12)

    def test_upper_limit_unbounded_past_full_deflection(self):
        """Once f + df >= 1 the upper limit is infinite."""
        win = window(DegreesOfArc(degrees=10.0), 90.0, shunt(10.0))
        assert win.high == math.inf  # derived from f = Rx/(Rx+Rc): f0 = 0.9, df = 1/9

    def test_lower_limit_clamped_at_zero(self):
        """Once f - df <= 0 the lower limit is 0 ohm."""
        win = window(DegreesOfArc(degrees=10.0), 1.0, shunt(10.0))
        assert win.low == 0.0  # derived from f = Rx/(Rx+Rc): f0 = 1/11 < df = 1/9


class TestWindowLinear:
    ctx = RangeContext(law=Linear(high=10.0))

    def test_percent_of_full_scale(self):
        """2 % of a 10 V full scale is 0.2 V at any point."""
        win = window(PercentOfFullScale(percent=2.0), 5.0, self.ctx)
        assert (win.low, win.high) == pytest.approx((4.8, 5.2))  # common practice, no source

    def test_percent_of_length(self):
        """1 % of scale length on a 0..10 V linear scale is 0.1 V."""
        win = window(PercentOfLength(percent=1.0), 3.0, self.ctx)
        assert win.domain == "deflection"
        assert (win.low, win.high) == pytest.approx((2.9, 3.1))  # derived from f = x / 10

    def test_percent_of_reading(self):
        """1 % of reading at 5 V is 0.05 V."""
        win = window(ValueStatement(reading=1.0), 5.0, self.ctx)
        assert (win.low, win.high) == pytest.approx((4.95, 5.05))  # common practice, no source

    def test_class_index(self):
        """Class 1.5 on a 150 V range allows 2.25 V either side."""
        win = window(ClassIndex(index=1.5), 100.0, RangeContext(law=Linear(high=150.0)))
        # IEC 60051-1: class index is a percent of the fiducial value, 1.5 % of 150 V = 2.25 V
        assert win.half_width == pytest.approx(2.25)
        assert (win.low, win.high) == pytest.approx((97.75, 102.25))

    def test_degrees_on_linear_scale(self):
        """1 degree of a 100 degree arc on a 0..10 V scale is 0.1 V."""
        win = window(DegreesOfArc(degrees=1.0), 4.0, RangeContext(law=Linear(high=10.0), arc=100.0))
        assert (win.low, win.high) == pytest.approx((3.9, 4.1))  # derived from f = x / 10


class TestWindowDigital:
    ctx = RangeContext(law=Linear(high=2.0), full_scale=2.0, count=0.001)

    def test_percent_of_reading_plus_counts(self):
        """±(0.5 % of reading + 1 count) at 1.755 V on a 2000-count range is ±9.775 mV."""
        win = window(ValueStatement(reading=0.5, counts=1), 1.755, self.ctx)
        # common practice, no source: 0.005 * 1.755 + 0.001 = 0.009775
        assert win.half_width == pytest.approx(0.009775, rel=1e-12)
        assert win.low == pytest.approx(1.745225, abs=1e-12)
        assert win.high == pytest.approx(1.764775, abs=1e-12)

    def test_usual_quoted_limits_are_the_exact_ones_rounded_to_a_count(self):
        """The often-quoted 1.745 .. 1.765 V are the exact limits rounded to the nearest count."""
        win = window(ValueStatement(reading=0.5, counts=1), 1.755, self.ctx)
        # The quoted figures agree with the exact window only to half a count (0.5 mV) ...
        assert win.low == pytest.approx(1.745, abs=0.0005)
        assert win.high == pytest.approx(1.765, abs=0.0005)
        assert round(win.low / 0.001) * 0.001 == pytest.approx(1.745)
        assert round(win.high / 0.001) * 0.001 == pytest.approx(1.765)
        # ... and are not the window itself: a display of 1.745 V lies outside it.
        assert abs(win.low - 1.745) > 1e-4
        assert not win.contains(1.745)
        assert win.contains(1.746) and win.contains(1.764)

    def test_percent_of_reading_plus_percent_of_range(self):
        """0.1 % of reading + 0.05 % of a 2 V range at 1 V is ±2 mV."""
        win = window(ValueStatement(reading=0.1, range=0.05), 1.0, self.ctx)
        assert win.half_width == pytest.approx(0.002)  # common practice, no source: 0.001 + 0.001

    def test_counts_need_a_count_value(self):
        """A statement in counts on a range without a count value is refused."""
        with pytest.raises(ValueError, match="value of one count"):
            window(ValueStatement(counts=2), 1.0, RangeContext(law=Linear(high=2.0)))

    def test_value_domain_ohms_cannot_go_below_zero(self):
        """A value-domain window on an ohms law never reaches below 0 ohm."""
        win = window(ValueStatement(absolute=5.0), 2.0, RangeContext(law=SeriesOhms(centre=10.0)))
        assert win.low == 0.0 and win.high == 7.0  # common practice, no source


class TestStatementValidation:
    @pytest.mark.parametrize(
        "make",
        [
            lambda: PercentOfFullScale(percent=-1.0),
            lambda: ClassIndex(index=math.nan),
            lambda: DegreesOfArc(degrees=math.inf),
            lambda: PercentOfLength(percent=-0.5),
            lambda: ValueStatement(reading=-0.5, counts=2),
        ],
    )
    def test_refuses_negative_or_non_finite_terms(self, make):
        """A negative or non-finite term, which would silently narrow a window, is refused."""
        with pytest.raises(ValueError, match="finite and not negative"):
            make()


class TestRangeContext:
    def test_refuses_non_positive_arc_and_count(self):
        """An arc or a count value that is not positive is refused, naming the field."""
        with pytest.raises(ValueError, match="arc"):
            RangeContext(law=Linear(high=1.0), arc=-90.0)
        with pytest.raises(ValueError, match="count"):
            RangeContext(law=Linear(high=1.0), count=0.0)


statements = st.one_of(
    st.builds(DegreesOfArc, degrees=st.floats(min_value=0, max_value=20)),
    st.builds(PercentOfLength, percent=st.floats(min_value=0, max_value=20)),
    st.builds(ClassIndex, index=st.floats(min_value=0, max_value=5)),
)
laws = st.one_of(
    st.builds(Linear, high=st.floats(min_value=0.1, max_value=1e3)),
    st.builds(SeriesOhms, centre=st.floats(min_value=0.1, max_value=1e5)),
    st.builds(ShuntOhms, centre=st.floats(min_value=0.1, max_value=1e5)),
)


class TestWindowProperties:
    @FAST
    @given(statement=statements, law=laws, f=st.floats(min_value=0.02, max_value=0.98))
    def test_contains_the_nominal(self, statement, law, f):
        """Every window contains its nominal value."""
        nominal = law.value(f)
        win = window(statement, nominal, RangeContext(law=law, arc=90.0))
        assert win.low <= nominal <= win.high

    @FAST
    @given(
        law=laws,
        f=st.floats(min_value=0.02, max_value=0.98),
        d1=st.floats(min_value=0, max_value=30),
        d2=st.floats(min_value=0, max_value=30),
    )
    def test_widens_with_the_tolerance(self, law, f, d1, d2):
        """A larger tolerance gives a window that contains the smaller one's."""
        small, large = sorted((d1, d2))
        ctx = RangeContext(law=law, arc=90.0)
        nominal = law.value(f)
        a = window(DegreesOfArc(degrees=small), nominal, ctx)
        b = window(DegreesOfArc(degrees=large), nominal, ctx)
        assert b.low <= a.low and a.high <= b.high

    @FAST
    @given(
        nominal=st.floats(min_value=-1e3, max_value=1e3),
        p1=st.floats(min_value=0, max_value=10),
        p2=st.floats(min_value=0, max_value=10),
    )
    def test_value_windows_widen_with_the_tolerance(self, nominal, p1, p2):
        """A larger percent of reading gives a window that contains the smaller one's."""
        small, large = sorted((p1, p2))
        ctx = RangeContext(law=Linear(high=1e3))
        a = window(
            ValueStatement(reading=small, counts=1), nominal, RangeContext(law=ctx.law, count=1e-3)
        )
        b = window(
            ValueStatement(reading=large, counts=1), nominal, RangeContext(law=ctx.law, count=1e-3)
        )
        assert b.low <= a.low <= nominal <= a.high <= b.high


class TestDeviation:
    def test_value_domain(self):
        """A value-domain deviation is reading minus nominal and its share of the tolerance."""
        win = window(ValueStatement(reading=1.0), 5.0, RangeContext(law=Linear(high=10.0)))
        dev = deviation(win, 5.025, Linear(high=10.0))
        assert dev.error == pytest.approx(0.025)
        assert dev.percent_of_tolerance == pytest.approx(50.0)  # 0.025 / 0.05, by hand

    def test_deflection_domain_on_series_scale(self):
        """On a series scale a reading above nominal is a negative deflection error."""
        law = SeriesOhms(centre=10.0)
        win = window(DegreesOfArc(degrees=3.0), 10.0, series(10.0))
        dev = deviation(win, win.high, law)
        # derived from f = Rc/(Rc+Rx): at the upper ohms limit the deflection is f0 - df
        assert dev.error == pytest.approx(-1.0 / 30.0)
        assert dev.percent_of_tolerance == pytest.approx(-100.0)

    def test_zero_tolerance_has_no_percentage(self):
        """A zero-width window gives no percent of tolerance."""
        win = window(ValueStatement(), 1.0, RangeContext(law=Linear(high=2.0)))
        assert deviation(win, 1.0, Linear(high=2.0)).percent_of_tolerance is None
