"""An item's history: its as-found errors over its calibrations, their drift, and its model's
record of being found in tolerance.

For each test point (a step of the procedure, by its key) the as-found errors, as a fraction of
the tolerance, are fitted by ordinary least squares against time in years: e(t) = a + b t. The
standard uncertainty of the slope is the textbook one, u(b) = s / sqrt(sum (t - mean t)^2) with
s^2 = sum of squared residuals / (n - 2) (the same as ``scipy.stats.linregress``'s ``stderr``
and the square root of ``numpy.polyfit(..., cov="unscaled")`` scaled by s^2; the tests check it
against both). The fitted line reaches the tolerance (|e| = 1) at t = (+-1 - a) / b, reported as
a date. Only calibrations count: complete runs that were not dry runs and are not the as-left
pass after an adjustment (that one's errors are not as found); a corrected run counts by its
latest revision.

For the item's model, the share of calibrations found in tolerance (a reading taken, and none
outside its tolerance limits) is the
observed in-tolerance reliability that interval methods act on. The adjustment shown is the
staircase method (method 1 of ILAC-G24:2022 / OIML D 10:2022, "automatic adjustment", from
memory): lengthen the interval after an as-found result in tolerance, shorten it after one out
of tolerance; by how much is the lab's own rule, so only the direction is shown.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from pathlib import Path

import sqlalchemy as sa

from verirun.register.db import RegisterError
from verirun.register.listing import latest_closings
from verirun.register.schema import points, runs

YEAR_DAYS = 365.25


@dataclass(frozen=True, kw_only=True)
class Drift:
    """The straight line fitted through one test point's as-found errors (fractions of
    tolerance)."""

    n: int
    intercept: float  # at the first calibration
    slope: float | None  # per year
    slope_u: float | None  # standard uncertainty of the slope, per year
    reaches_tolerance: dt.date | None

    def as_json(self) -> dict:
        return {
            "n": self.n,
            "intercept": self.intercept,
            "slope_per_year": self.slope,
            "slope_u_per_year": self.slope_u,
            "reaches_tolerance": self.reaches_tolerance.isoformat()
            if self.reaches_tolerance
            else None,
        }


def fit_drift(days: list[float], errors: list[float], first: dt.date) -> Drift:
    """Least-squares line through ``errors`` (fractions of tolerance) at ``days`` after ``first``.

    Fewer than two calibrations (or all on one day) give no slope; two give a slope without an
    uncertainty (no degrees of freedom are left).
    """
    import numpy as np

    t = np.asarray(days, dtype=float) / YEAR_DAYS
    e = np.asarray(errors, dtype=float)
    n = len(t)
    if n < 2 or float(np.ptp(t)) == 0.0:
        return Drift(
            n=n,
            intercept=float(e.mean()) if n else math.nan,
            slope=None,
            slope_u=None,
            reaches_tolerance=None,
        )
    design = np.column_stack([np.ones(n), t])
    (a, b), *_ = np.linalg.lstsq(design, e, rcond=None)
    u = None
    if n > 2:
        residuals = e - (a + b * t)
        s2 = float(residuals @ residuals) / (n - 2)
        u = math.sqrt(s2 / float(((t - t.mean()) ** 2).sum()))
    reach = None
    if b != 0:
        years = ((1.0 if b > 0 else -1.0) - a) / b
        if math.isfinite(years) and abs(years) < 1000:
            reach = first + dt.timedelta(days=round(years * YEAR_DAYS))
    return Drift(n=n, intercept=float(a), slope=float(b), slope_u=u, reaches_tolerance=reach)


@dataclass(frozen=True, kw_only=True)
class History:
    """One item's history (see the module's description)."""

    serial: str
    model: str
    today: dt.date
    table: object  # pandas.DataFrame, one row per as-found result
    drifts: dict[str, Drift] = field(default_factory=dict)
    model_calibrations: int = 0
    model_in_tolerance: int = 0
    #: Of ``model_calibrations``, those stored before the register counted readings outside
    #: tolerance (migration 0002): judged by their overall verdict instead.
    model_judged_by_verdict: int = 0
    last_in_tolerance: bool | None = None

    @property
    def model_share(self) -> float | None:
        return (
            self.model_in_tolerance / self.model_calibrations if self.model_calibrations else None
        )

    def staircase(self) -> str:
        if self.last_in_tolerance is None:
            return "no change (the last calibration measured no point)"
        return (
            "lengthen the interval (last found in tolerance)"
            if self.last_in_tolerance
            else "shorten the interval (last found out of tolerance)"
        )

    def as_json(self) -> dict:
        rows = self.table.to_dict(orient="records")
        return {
            "item": self.serial,
            "model": self.model,
            "calibrations": int(self.table["uid"].nunique()),
            "results": [
                {k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in r.items()}
                for r in rows
            ],
            "drift": {key: drift.as_json() for key, drift in sorted(self.drifts.items())},
            "model_reliability": {
                "calibrations": self.model_calibrations,
                "in_tolerance": self.model_in_tolerance,
                "share": self.model_share,
                "judged_by_verdict": self.model_judged_by_verdict,
                "method": "share of calibrations found in tolerance; interval adjusted by"
                " the staircase method (ILAC-G24:2022 / OIML D 10 method 1)",
                "staircase": self.staircase(),
            },
        }

    def text(self) -> str:
        calibrations = int(self.table["uid"].nunique())
        lines = [
            f"item {self.serial} ({self.model}): {calibrations}"
            f" calibration{'s' if calibrations != 1 else ''}"
        ]
        for key, drift in sorted(self.drifts.items()):
            rows = self.table[(self.table["key"] == key) & self.table["error_fraction"].notna()]
            last = rows.iloc[-1]
            slope = (
                "no drift fitted (one calibration)"
                if drift.slope is None
                else f"drift {drift.slope * 100:+.1f} % of tolerance per year"
                + (
                    f" (u = {drift.slope_u * 100:.1f} %)"
                    if drift.slope_u is not None
                    else " (no u: 2 points)"
                )
            )
            reach = (
                f"; reaches the tolerance about {drift.reaches_tolerance}"
                if drift.reaches_tolerance
                else ""
            )
            lines.append(
                f"  {key}: last as-found {last['error_fraction'] * 100:+.1f} % of tolerance"
                f" ({last['date']}); {slope}{reach}"
            )
        share = self.model_share
        lines.append(
            f"model {self.model}: "
            + (
                f"{self.model_in_tolerance} of {self.model_calibrations} calibrations"
                f" found in tolerance ({share * 100:.0f} %)"
                + (
                    f", {self.model_judged_by_verdict} of them judged by their verdicts (stored"
                    " before the register counted readings outside tolerance)"
                    if self.model_judged_by_verdict
                    else ""
                )
                if share is not None
                else "no calibrations"
            )
            + f"; staircase: {self.staircase()}"
        )
        return "\n".join(lines)


#: What makes a run a calibration (see the module's description).
CALIBRATION = (
    runs.c.status == "complete",
    runs.c.simulated.is_(False),
    runs.c.as_found_uid.is_(None),
)


def _calibrations(*where):
    """Runs that count as calibrations, by their latest closing."""
    return latest_closings(*where, *CALIBRATION)


def _found_in_tolerance():
    """The condition of a run's closing that found the item in tolerance (see model_counts,
    which leaves out a run whose latest closing measured nothing)."""
    return sa.or_(
        runs.c.outside_tolerance == 0,
        sa.and_(
            runs.c.outside_tolerance.is_(None), runs.c.overall.in_(("pass", "conditional-pass"))
        ),
    )


def model_counts(connection, model: str) -> tuple[int, int, int]:
    """How many calibrations of items of ``model`` there are, how many were found in
    tolerance, and how many of them were judged by their verdicts (see below), each run
    counted by its latest closing.

    One aggregate over the index that holds these columns: per run, its latest closing's
    journal length and its latest closing found in tolerance; the run was found in tolerance
    when the two are one. A run is found in tolerance when none of its readings lies outside its
    tolerance limits (a reading rejected for the guard band alone lies within them); a run
    stored before the register counted that (migration 0002) is judged by its overall verdict.
    A run whose latest closing measured nothing (every step skipped) is not counted at all: it
    found the item neither in tolerance nor out of it."""
    per_run = (
        sa.select(
            sa.func.max(runs.c.documents).label("latest"),
            sa.func.max(sa.case((_found_in_tolerance(), runs.c.documents))).label("passed"),
            sa.func.max(sa.case((runs.c.overall != "none", runs.c.documents))).label("measured"),
            sa.func.max(sa.case((runs.c.outside_tolerance.is_(None), runs.c.documents))).label(
                "by_verdict"
            ),
        )
        .where(runs.c.item_model == model, *CALIBRATION)
        .group_by(runs.c.uid)
        .subquery()
    )
    total, passed, by_verdict = connection.execute(
        sa.select(
            sa.func.count(),
            sa.func.sum(sa.case((per_run.c.passed == per_run.c.latest, 1), else_=0)),
            sa.func.sum(sa.case((per_run.c.by_verdict == per_run.c.latest, 1), else_=0)),
        ).where(per_run.c.measured == per_run.c.latest)
    ).one()
    return int(total), int(passed or 0), int(by_verdict or 0)


#: The verdicts that say a point was not found outside its tolerance limits (a conditional fail
#: lies outside them; a fail may lie within them under a guard band, so this is only for points
#: stored before the register held ``within_tolerance``).
NOT_OUTSIDE = ("pass", "conditional-pass", "skipped", "not-measured")


def item_history(register, *, serial: str, model: str | None = None, today: dt.date) -> History:
    """The history of item ``serial`` (of ``model`` when the serial is shared by several models).

    Raises
    ------
    RegisterError
        If the register has no calibration of the item, or the serial is of several models.
    """
    import pandas as pd

    where = [runs.c.item_serial == serial] + ([runs.c.item_model == model] if model else [])
    latest = _calibrations(*where)
    query = (
        sa.select(
            runs.c.uid,
            runs.c.started,
            runs.c.certificate,
            runs.c.item_model,
            points.c.step,
            points.c.key,
            points.c.range_id,
            points.c.nominal,
            points.c.unit,
            points.c.error,
            points.c.error_unit,
            points.c.error_fraction,
            points.c.expanded_fraction,
            points.c.verdict,
            points.c.within_tolerance,
            points.c.reading,
        )
        .join(latest, sa.and_(runs.c.uid == latest.c.uid, runs.c.documents == latest.c.documents))
        .join(points, points.c.run_id == runs.c.id)
        .order_by(runs.c.started, points.c.step)
    )
    with register.reading() as connection:
        table = pd.DataFrame(connection.execute(query).mappings().all())
        if table.empty:
            raise RegisterError(
                f"the register has no calibration of item {serial!r}"
                + (f" ({model})" if model else "")
                + " (dry runs and as-left passes do not count)"
            )
        models = sorted(table["item_model"].unique())
        if len(models) > 1:
            raise RegisterError(
                f"item {serial!r} is of several models ({', '.join(models)}); name one with --model"
            )
        model = models[0]
        calibrations, in_tolerance, by_verdict = model_counts(connection, model)
    table["date"] = table["started"].str.slice(0, 10)
    # A step is a test point's identity: a label that several steps of a run share (a value read
    # up-scale and down-scale) is told apart by its step, so their errors are not fitted as one.
    shared = table.groupby(["uid", "key"])["step"].transform("count") > 1
    table.loc[shared, "key"] = (
        table.loc[shared, "key"] + " (step " + table.loc[shared, "step"].astype(str) + ")"
    )
    measured = table[table["error_fraction"].notna()].copy()
    first = dt.date.fromisoformat(measured["date"].min()) if not measured.empty else today
    drifts = {}
    for key, rows in measured.groupby("key", sort=True):
        days = [(dt.date.fromisoformat(d) - first).days for d in rows["date"]]
        drifts[key] = fit_drift(days, rows["error_fraction"].tolist(), first)
    last_uid = table["uid"].iloc[-1]
    last = table[table["uid"] == last_uid]
    columns = [
        "date",
        "uid",
        "certificate",
        "step",
        "key",
        "range_id",
        "nominal",
        "unit",
        "error",
        "error_unit",
        "error_fraction",
        "expanded_fraction",
        "verdict",
    ]
    return History(
        serial=serial,
        model=model,
        today=today,
        table=table[columns].reset_index(drop=True),
        drifts=drifts,
        model_calibrations=calibrations,
        model_in_tolerance=in_tolerance,
        model_judged_by_verdict=by_verdict,
        last_in_tolerance=_all_within(last),
    )


def _all_within(rows) -> bool | None:
    """Whether no reading of ``rows`` (one run's points) lies outside its tolerance limits
    (``None`` when none of them was measured: nothing was found either way)."""
    if rows["reading"].isna().all():
        return None
    outside = rows["within_tolerance"].eq(False)
    stored_before = rows["within_tolerance"].isna() & ~rows["verdict"].isin(NOT_OUTSIDE)
    return not bool((outside | stored_before).any())


def write_csv(history: History, path: Path) -> Path:
    """Every as-found result of the item, one row each (pandas' CSV)."""
    history.table.to_csv(path, index=False)
    return Path(path)


def _plot(history: History, key: str) -> dict:
    """Coordinates of one test point's plot: errors with U bars, the tolerance band, the fit."""
    rows = history.table[(history.table["key"] == key) & history.table["error_fraction"].notna()]
    drift = history.drifts[key]
    dates = [dt.date.fromisoformat(d) for d in rows["date"]]
    first = min(dates)
    end = max(
        dates + [drift.reaches_tolerance]
        if drift.reaches_tolerance
        and drift.reaches_tolerance < first + dt.timedelta(days=int(YEAR_DAYS * 20))
        else dates
    )
    span = max((end - first).days, 1)
    left, right, top, bottom = 60.0, 700.0, 20.0, 220.0
    values = [abs(v) for v in rows["error_fraction"]] + [
        abs(v) + (u or 0) for v, u in zip(rows["error_fraction"], rows["expanded_fraction"])
    ]
    limit = max([1.25] + [v * 1.1 for v in values if math.isfinite(v)])

    def x(day: dt.date) -> float:
        return round(left + (right - left) * (day - first).days / span, 2)

    def y(value: float) -> float:
        return round(top + (bottom - top) * (limit - value) / (2 * limit), 2)

    marks = []
    for day, value, u, verdict in zip(
        dates, rows["error_fraction"], rows["expanded_fraction"], rows["verdict"]
    ):
        u = 0.0 if u is None or (isinstance(u, float) and math.isnan(u)) else u
        marks.append(
            {
                "x": x(day),
                "y": y(value),
                "y_low": y(value - u),
                "y_high": y(value + u),
                "verdict": verdict,
                "label": f"{day}: {value * 100:+.1f} % of tolerance, {verdict}",
            }
        )
    fit = None
    if drift.slope is not None:

        def fitted(day):
            return drift.intercept + drift.slope * (day - first).days / YEAR_DAYS

        fit = {"x1": x(first), "y1": y(fitted(first)), "x2": x(end), "y2": y(fitted(end))}
    return {
        "key": key,
        "marks": marks,
        "fit": fit,
        "band_top": y(1.0),
        "band_bottom": y(-1.0),
        "zero": y(0.0),
        "left": left,
        "right": right,
        "top": top,
        "bottom": bottom,
        "first": first.isoformat(),
        "end": end.isoformat(),
        "limit_pct": round(limit * 100),
        "drift": drift,
    }


def write_html(history: History, path: Path) -> Path:
    """An HTML page of the item's history: per test point a plot (inline SVG) and its drift."""
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    env = Environment(
        loader=PackageLoader("verirun.register", "templates"),
        autoescape=select_autoescape(["html", "j2"], default=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    page = env.get_template("history.html.j2").render(
        history=history,
        plots=[_plot(history, key) for key in sorted(history.drifts)],
        calibrations=int(history.table["uid"].nunique()),
        text=history.text(),
    )
    Path(path).write_text(page, encoding="utf-8")
    return Path(path)
