"""Monte Carlo validation of the GUM result (JCGM 101:2008 clauses 7 and 8), on ohms scales.

The reference values here are worked independently of verirun: the distribution of the
indication along the arc is normal when every term is normal and the calibrator's share is
small, so its coverage interval is ``f0 ± z u`` with ``z`` from scipy, and the interval in ohms
is that interval mapped through the scale law (a monotonic map keeps quantiles). The numerical
tolerance and the comparison are formed as JCGM 101 7.2 and 8.2 state them.
"""

from __future__ import annotations

import math

import pytest
from scipy.stats import norm

from verirun.metrology import montecarlo, scales, uncertainty

ARC = 90.0


def tolerance_of(u: float, ndig: int = 2) -> float:
    """JCGM 101:2008 7.2: u = c × 10^l with c an ndig-digit integer; δ = 10^l / 2."""
    c_digits = math.floor(math.log10(u)) - (ndig - 1)
    return 0.5 * 10.0**c_digits


def budget_at(law, nominal: float, *, u_deg: float = 0.6, cal_rel: float = 1e-4):
    terms = [
        uncertainty.Term(
            name="reading",
            standard_uncertainty=u_deg / ARC,
            domain="deflection",
            distribution="normal",
        ),
        uncertainty.Term(
            name="calibrator",
            standard_uncertainty=cal_rel * nominal,
            domain="value",
            distribution="normal",
        ),
    ]
    return uncertainty.budget(terms=terms, nominal=nominal, law=law, domain="deflection")


LAWS = {"series": scales.SeriesOhms(centre=10.0), "shunt": scales.ShuntOhms(centre=10.0)}


@pytest.mark.parametrize("scale", ["series", "shunt"])
@pytest.mark.parametrize("nominal", [2.5, 10.0, 40.0])  # a quarter, one and four times centre
class TestValidationOnOhmsScales:
    def test_reproduces_jcgm_101_validation(self, scale, nominal):
        """Along the arc the GUM result is validated (JCGM 101 8.2: both d within δ of u to two
        digits); carried into ohms through the slope it is not, at any of the three points, and
        the Monte Carlo interval in ohms is the normal interval along the arc mapped through the
        scale law (f = Rc / (Rc + Rx) series, Rx / (Rx + Rc) shunt)."""
        law = LAWS[scale]
        bud = budget_at(law, nominal, u_deg=2.0)
        v = montecarlo.validate(bud, law, per_unit=ARC, seed=20261202)
        p = norm.cdf(2.0) - norm.cdf(-2.0)  # the coverage k = 2 claims for a normal: 95.45 %
        assert v.probability == pytest.approx(p, rel=1e-12)
        # JCGM 101 7.9: batches of M = max(100 / (1 - p), 10^4) trials until converged
        assert v.converged and v.trials == v.batches * max(math.ceil(100 / (1 - p)), 10_000)
        u_deg = bud.combined * ARC
        delta = tolerance_of(u_deg)
        assert v.along.tolerance == pytest.approx(delta)
        f0_deg = law.fraction(nominal) * ARC
        z = norm.ppf((1 + p) / 2)  # = 2 for the normal indication
        assert v.along.mc_low == pytest.approx(f0_deg - z * u_deg, abs=2 * delta)
        assert v.along.mc_high == pytest.approx(f0_deg + z * u_deg, abs=2 * delta)
        d_low = abs(f0_deg - bud.expanded * ARC - v.along.mc_low)  # JCGM 101 8.2
        d_high = abs(f0_deg + bud.expanded * ARC - v.along.mc_high)
        assert (v.along.d_low, v.along.d_high) == pytest.approx((d_low, d_high))
        assert v.along.validated == (d_low <= delta and d_high <= delta)
        assert v.along.validated
        # in ohms: the mapped normal interval against R0 ± U / |df/dR|
        ends = sorted(law.value((f0_deg + s * z * u_deg) / ARC) for s in (-1, 1))
        # within the Monte Carlo's own tolerance along the arc, carried to ohms at each end
        for got, end in ((v.in_value.mc_low, ends[0]), (v.in_value.mc_high, ends[1])):
            assert got == pytest.approx(end, abs=3 * delta / ARC / abs(law.slope(end)))
        u_ohm = bud.combined / bud.slope
        assert v.in_value.tolerance == pytest.approx(tolerance_of(u_ohm))
        gum = (nominal - bud.expanded_value, nominal + bud.expanded_value)
        d = (abs(gum[0] - ends[0]), abs(gum[1] - ends[1]))
        assert max(d) > 2 * v.in_value.tolerance  # well outside δ: not validated
        assert not v.in_value.validated

    def test_linear_interval_in_ohms_does_not_cover_what_it_claims(self, scale, nominal):
        """The probability that the indication lies within R0 ± U / |df/dR| is not the 95.45 %
        it claims (worked from the normal distribution along the arc; JCGM 101 5.3 for what a
        coverage interval is)."""
        law = LAWS[scale]
        bud = budget_at(law, nominal, u_deg=4.0)
        f0, u = law.fraction(nominal), bud.combined
        a, b = (
            law.fraction(max(nominal - bud.expanded_value, 0.0)),
            law.fraction(nominal + bud.expanded_value),
        )
        lo, hi = sorted((a, b))
        coverage = norm.cdf((hi - f0) / u) - norm.cdf((lo - f0) / u)
        assert coverage < norm.cdf(2) - norm.cdf(-2) - 0.002  # it covers less than it claims


class TestAdaptiveProcedure:
    def test_seed_is_recorded_and_repeats(self):
        """The same seed gives the same result, and the result names its seed."""
        law = LAWS["series"]
        bud = budget_at(law, 10.0)
        first = montecarlo.validate(bud, law, per_unit=ARC, seed=7)
        again = montecarlo.validate(bud, law, per_unit=ARC, seed=7)
        assert first == again and first.seed == 7

    def test_rectangular_readability_is_not_validated(self):
        """One rectangular term of half-width a: the 95.45 % interval is ±0.9545 a, the GUM
        k = 2 interval ±2a/√3 = ±1.1547 a (by hand from the rectangular distribution); they
        differ by 0.2 a, far more than δ, so the GUM result is not validated (JCGM 101 8.2)."""
        law = scales.Linear(high=10.0)
        a = 0.05
        term = uncertainty.Term(
            name="readability",
            standard_uncertainty=a / math.sqrt(3),
            domain="value",
            distribution="rectangular",
        )
        bud = uncertainty.budget(terms=[term], nominal=5.0, law=law, domain="value")
        v = montecarlo.validate(bud, law, seed=3)
        p = norm.cdf(2.0) - norm.cdf(-2.0)
        assert v.along.mc_high - 5.0 == pytest.approx(p * a, abs=v.along.tolerance * 2)
        assert v.along.d_high == pytest.approx(
            (2 / math.sqrt(3) - p) * a, abs=v.along.tolerance * 2
        )
        assert not v.along.validated and v.in_value is None

    def test_no_uncertainty_is_refused(self):
        """A budget with nothing in it has nothing to validate."""
        law = scales.Linear(high=10.0)
        with pytest.raises(ValueError, match="no uncertainty"):
            montecarlo.validate(
                uncertainty.budget(terms=[], nominal=5.0, law=law, domain="value"), law
            )


def test_window_prints_both_results(capsys):
    """``verirun window --monte-carlo`` prints the GUM and Monte Carlo intervals, the seed and
    trials, and whether the linear result in ohms is validated (JCGM 101 8.2)."""
    from verirun.cli import main

    assert (
        main(
            [
                "window",
                "--scale",
                "series-ohms",
                "--centre",
                "10",
                "--arc",
                "90",
                "--degrees",
                "2",
                "--at",
                "40",
                "--resolution",
                "1deg",
                "--u-applied",
                "0.04",
                "--monte-carlo",
                "--seed",
                "5",
            ]
        )
        == 0
    )
    out = capsys.readouterr().out
    assert "Monte Carlo (JCGM 101:2008 7.9, 8.2)" in out and "seed 5" in out
    assert "linear result in the range's unit is NOT validated" in out
    assert (
        main(["window", "--full-scale", "10", "--percent-fs", "1", "--at", "5", "--monte-carlo"])
        == 1
    )
