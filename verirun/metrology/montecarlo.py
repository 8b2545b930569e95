"""Monte Carlo validation of a point's uncertainty (JCGM 101:2008, clauses 7 and 8).

The GUM uncertainty framework combines a budget's terms linearly (the sensitivity of a value
term along the arc is the scale law's slope at the nominal) and expands with ``k``. On an ohms
scale that linear result carried into ohms (``R0 ± U / |df/dR|``) is symmetric while the scale
law is not, so it may not cover what it claims. This module propagates the terms' distributions
through the scale law itself and compares:

- the model: the meter's indication, as a fraction of scale length, is
  ``f(x0 + Σ value terms) + Σ deflection terms``; in the range's unit it is the scale law's
  value at that deflection (a monotonic map, so the coverage interval in ohms is the interval
  along the arc mapped through the law, open where it reaches an end of the arc);
- the coverage probability is the one the GUM result claims: ``p = 2Φ(k) - 1`` for ``k``
  (95.45 % for k = 2), and the coverage interval is the probabilistically symmetric one
  (JCGM 101 7.7);
- the adaptive procedure of JCGM 101 7.9: batches of ``M = max(100 / (1 - p), 10^4)`` trials,
  until twice the standard deviation of the batch means of ``y``, ``u(y)`` and both interval
  ends is within the numerical tolerance ``δ`` of ``u(y)`` to ``ndig`` significant digits
  (JCGM 101 7.2: ``u(y) = c × 10^l`` with ``c`` of ``ndig`` digits, ``δ = 10^l / 2``);
- validation (JCGM 101 8.2): with the GUM interval ``y ± U`` and the Monte Carlo interval
  ``[y_low, y_high]``, ``d_low = |y - U - y_low|`` and ``d_high = |y + U - y_high|``; the GUM
  result is validated when both are at most ``δ``.

The random generator is numpy's PCG64 from ``seed``; the seed is returned with the result so
that a validation can be repeated exactly. numpy is imported only when a validation is asked for.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

from verirun.metrology.scales import ScaleLaw, SeriesOhms, ShuntOhms
from verirun.metrology.uncertainty import Budget

#: Batches beyond which the adaptive procedure stops without reaching its tolerance.
MAX_BATCHES = 100
#: Batches before the adaptive procedure may stop. JCGM 101 7.9.4 allows two; the standard
#: deviation of two batch means is too rough a guide, so we ask for ten (our choice).
MIN_BATCHES = 10


@dataclass(frozen=True, kw_only=True, slots=True)
class Comparison:
    """The GUM interval ``y ± U`` against the Monte Carlo interval, in one unit (JCGM 101 8.2).

    ``d_low`` / ``d_high`` are ``math.inf`` when the Monte Carlo interval is open at that end
    (it reaches an end of the arc of an ohms scale).
    """

    unit: str
    y: float
    expanded: float
    gum_low: float
    gum_high: float
    mc_low: float
    mc_high: float
    d_low: float
    d_high: float
    tolerance: float

    @property
    def validated(self) -> bool:
        """True when both ends agree within the numerical tolerance (JCGM 101 8.2 b)."""
        return self.d_low <= self.tolerance and self.d_high <= self.tolerance


@dataclass(frozen=True, kw_only=True, slots=True)
class Validation:
    """The result of :func:`validate`.

    ``along`` compares in the tolerance's own domain (the range's unit for a tolerance on the
    value; degrees of arc or percent of length for one along the scale); ``in_value`` compares
    the linear result carried into the range's unit (``None`` when the tolerance is stated on
    the value: it is the same comparison). ``mc_u`` is the Monte Carlo standard uncertainty in
    the domain, ``trials`` the number of trials, ``batches`` the batches of the adaptive
    procedure, ``converged`` whether it reached its tolerance within :data:`MAX_BATCHES`.
    """

    seed: int
    trials: int
    batches: int
    converged: bool
    probability: float
    ndig: int
    mc_u: float
    along: Comparison
    in_value: Comparison | None


def _tolerance(u: float, ndig: int) -> float:
    """JCGM 101 7.2: ``u = c × 10^l`` with ``c`` an ``ndig``-digit integer; ``δ = 10^l / 2``."""
    if u <= 0 or not math.isfinite(u):
        return 0.0
    exponent = math.floor(math.log10(u)) - (ndig - 1)
    return 0.5 * 10.0**exponent


def _fraction(law: ScaleLaw, x):
    if isinstance(law, SeriesOhms):
        return law.centre / (law.centre + x)
    if isinstance(law, ShuntOhms):
        return x / (x + law.centre)
    return (x - law.low) / (law.high - law.low)


def _value(law: ScaleLaw, f: float) -> float:
    return law.value(f)


def _draw(np, rng, term, size: int):
    u = abs(term.sensitivity) * term.standard_uncertainty
    if term.distribution == "normal":
        return rng.normal(0.0, u, size)
    if term.distribution == "rectangular":
        a = math.sqrt(3.0) * u
        return rng.uniform(-a, a, size)
    a = math.sqrt(6.0) * u  # symmetric triangular of half-width a
    return rng.triangular(-a, 0.0, a, size)


def validate(
    budget: Budget, law: ScaleLaw, *, per_unit: float = 1.0, seed: int = 1, ndig: int = 2
) -> Validation:
    """Validate the GUM result of ``budget`` by Monte Carlo (JCGM 101:2008 7.9 and 8.2).

    Parameters
    ----------
    budget
        The point's budget, combined in the tolerance's domain.
    law
        The range's scale law.
    per_unit
        Reporting units per unit of the domain (the arc in degrees, 100 for percent of length,
        1 on the value); the comparison along the scale is made in the reporting unit.
    seed
        The seed of the random generator, recorded with the result.
    ndig
        Significant digits of ``u(y)`` the numerical tolerance is formed from (JCGM 101 7.2).

    Raises
    ------
    ValueError
        If the budget has no uncertainty to validate.
    """
    import numpy as np

    if budget.combined <= 0:
        raise ValueError("the budget has no uncertainty to validate")
    k = budget.k
    p = 2.0 * NormalDist().cdf(k) - 1.0
    lo_q, hi_q = (1.0 - p) / 2.0, (1.0 + p) / 2.0
    m = max(math.ceil(100.0 / (1.0 - p)), 10_000)
    rng = np.random.Generator(np.random.PCG64(seed))
    deflection = budget.domain == "deflection"
    x0 = budget.nominal
    f0 = law.fraction(x0) if deflection else x0

    def batch():
        x = np.full(m, x0, dtype=float)
        extra = np.zeros(m)
        for term in budget.terms:
            draw = _draw(np, rng, term, m)
            if term.domain == "value":
                x = x + draw
            elif deflection:
                extra = extra + draw
            else:  # a deflection term on a value-domain budget: through the slope (linear scale)
                extra = extra + draw / budget.slope if budget.slope else extra
        y = (_fraction(law, x) + extra) if deflection else x + extra
        return y * per_unit if deflection else y

    results, samples = [], []
    converged = False
    while len(results) < MAX_BATCHES:
        y = batch()
        samples.append(y)
        results.append((y.mean(), y.std(ddof=1), *np.quantile(y, [lo_q, hi_q])))
        if len(results) < MIN_BATCHES:
            continue
        table = np.array(results)
        h = len(results)
        s = table.std(axis=0, ddof=1) / math.sqrt(h)  # standard deviations of the means
        u_all = float(np.concatenate(samples).std(ddof=1))
        if np.all(2.0 * s <= _tolerance(u_all, ndig)):
            converged = True
            break
    every = np.concatenate(samples)
    mc_u = float(every.std(ddof=1))
    q_low, q_high = (float(v) for v in np.quantile(every, [lo_q, hi_q]))
    y_gum = f0 * per_unit if deflection else x0
    big_u = budget.expanded * per_unit if deflection else budget.expanded
    along = _compare(
        "domain",
        y_gum,
        big_u,
        q_low,
        q_high,
        budget.combined * (per_unit if deflection else 1.0),
        ndig,
    )
    in_value = None
    if deflection:
        slope = budget.slope
        u_value = budget.combined / slope if slope > 0 else math.inf
        a, b = _value(law, q_low / per_unit), _value(law, q_high / per_unit)
        in_value = _compare("value", x0, budget.expanded_value, min(a, b), max(a, b), u_value, ndig)
    return Validation(
        seed=seed,
        trials=every.size,
        batches=len(results),
        converged=converged,
        probability=p,
        ndig=ndig,
        mc_u=mc_u,
        along=along,
        in_value=in_value,
    )


def _compare(
    unit: str, y: float, expanded: float, mc_low: float, mc_high: float, u: float, ndig: int
) -> Comparison:
    gum_low, gum_high = y - expanded, y + expanded
    d_low = abs(gum_low - mc_low) if math.isfinite(mc_low) and math.isfinite(gum_low) else math.inf
    d_high = (
        abs(gum_high - mc_high) if math.isfinite(mc_high) and math.isfinite(gum_high) else math.inf
    )
    return Comparison(
        unit=unit,
        y=y,
        expanded=expanded,
        gum_low=gum_low,
        gum_high=gum_high,
        mc_low=mc_low,
        mc_high=mc_high,
        d_low=d_low,
        d_high=d_high,
        tolerance=_tolerance(u, ndig),
    )
