"""An item's history: drift fitted by least squares (checked against SciPy and NumPy), the date
the fit reaches the tolerance, what counts as a calibration, the model's in-tolerance share,
and the HTML, CSV and JSON exports."""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pytest
import sqlalchemy as sa
from scipy import stats

from verirun.cli import main
from verirun.register.db import current_revision, head_revision
from verirun.register.history import YEAR_DAYS, fit_drift, item_history

UTC = dt.timezone.utc


class TestFitDrift:
    def test_slope_and_its_standard_uncertainty_match_scipy_linregress(self):
        """Slope, intercept and the slope's standard error are those of scipy.stats.linregress
        (ordinary least squares; stderr = s / sqrt(Sxx), s^2 = SSR / (n - 2))."""
        days = [0, 365, 740, 1090, 1461, 1830]
        errors = [0.05, 0.12, 0.18, 0.31, 0.33, 0.47]
        drift = fit_drift(days, errors, dt.date(2020, 1, 1))
        reference = stats.linregress(np.array(days) / YEAR_DAYS, errors)
        assert drift.slope == pytest.approx(reference.slope, rel=1e-12)
        assert drift.intercept == pytest.approx(reference.intercept, rel=1e-12)
        assert drift.slope_u == pytest.approx(reference.stderr, rel=1e-12)

    def test_slope_uncertainty_matches_numpy_polyfit_covariance(self):
        """u(b) is the square root of numpy.polyfit's scaled covariance of the slope."""
        days = [0, 200, 500, 800, 1300]
        errors = [-0.10, -0.02, -0.15, -0.30, -0.41]
        drift = fit_drift(days, errors, dt.date(2020, 1, 1))
        (slope, _), cov = np.polyfit(np.array(days) / YEAR_DAYS, errors, 1, cov=True)
        assert drift.slope == pytest.approx(slope, rel=1e-12)
        assert drift.slope_u == pytest.approx(np.sqrt(cov[0, 0]), rel=1e-12)

    def test_the_date_the_fit_reaches_the_tolerance(self):
        """Errors 0, 0.25, 0.5 of tolerance one year apart reach 1 (the limit) after 4 years
        (arithmetic: (1 - 0) / 0.25); a falling line reaches -1 instead."""
        year = YEAR_DAYS
        rising = fit_drift([0, year, 2 * year], [0.0, 0.25, 0.5], dt.date(2020, 1, 1))
        assert rising.reaches_tolerance == dt.date(2020, 1, 1) + dt.timedelta(days=round(4 * year))
        assert rising.slope_u == pytest.approx(0.0, abs=1e-12)
        falling = fit_drift([0, year, 2 * year], [0.5, 0.0, -0.5], dt.date(2020, 1, 1))
        assert falling.reaches_tolerance == dt.date(2020, 1, 1) + dt.timedelta(days=round(3 * year))

    def test_one_or_two_calibrations(self):
        """One calibration gives no slope; two give a slope with no uncertainty (no degrees of
        freedom)."""
        assert fit_drift([0], [0.3], dt.date(2020, 1, 1)).slope is None
        two = fit_drift([0, 365], [0.1, 0.2], dt.date(2020, 1, 1))
        assert two.slope == pytest.approx(0.1 * YEAR_DAYS / 365) and two.slope_u is None
        flat = fit_drift([0, 365], [0.1, 0.1], dt.date(2020, 1, 1))
        assert flat.slope == pytest.approx(0.0, abs=1e-12) and flat.reaches_tolerance is None


def _calibrate(closed_run, runs_dir, serial, year, readings, **kw):
    return closed_run(
        runs_dir,
        serial=serial,
        readings=readings,
        when=dt.datetime(year, 3, 1, 9, tzinfo=UTC),
        **kw,
    )


class TestItemHistory:
    def test_only_as_found_calibrations_count_and_a_correction_by_its_latest_revision(
        self, register, tmp_path, closed_run
    ):
        """A dry run and the as-left pass after an adjustment are left out; an amended reading
        counts as corrected. The 2 V point reads 2.00, 2.02 (corrected from 2.25, a fail), 2.04 V
        over three years: +0, +10, +20 % of the ±0.2 V tolerance, +10 % a year."""
        runs_dir = tmp_path / "runs"
        _calibrate(closed_run, runs_dir, "H-1", 2021, ("2.00", "5.00", "8.00"))
        second = _calibrate(closed_run, runs_dir, "H-1", 2022, ("2.25", "5.00", "8.00"))
        assert (
            main(
                [
                    "amend",
                    str(second.run_dir),
                    "--point",
                    "1",
                    "--reading",
                    "2.02",
                    "--reason",
                    "misread",
                    "--reports",
                    str(tmp_path / "reports"),
                ]
            )
            == 0
        )
        found = _calibrate(closed_run, runs_dir, "H-1", 2023, ("2.04", "5.00", "8.30"))
        _calibrate(
            closed_run, runs_dir, "H-1", 2023, ("1.90", "5.00", "8.00"), as_left_of=found.run_dir
        )
        _calibrate(closed_run, runs_dir, "H-1", 2024, ("1.50", "5.00", "8.00"), simulated=True)
        history = item_history(register, serial="H-1", today=dt.date(2024, 6, 1))
        assert history.table["uid"].nunique() == 3
        two = history.table[history.table["key"] == "dcv-10@2V"]["error_fraction"].tolist()
        assert two == pytest.approx([0.0, 0.1, 0.2])
        assert history.drifts["dcv-10@2V"].slope == pytest.approx(0.1 * YEAR_DAYS / 365, rel=2e-3)
        assert history.last_in_tolerance is False  # the 2023 as-found run failed at 8 V
        assert (history.model_calibrations, history.model_in_tolerance) == (
            3,
            2,
        )  # 2022 by its correction
        assert "shorten the interval" in history.staircase()

    def test_exports_and_an_html_page_that_escapes_the_serial(
        self, register, tmp_path, closed_run, capsys
    ):
        """CSV and JSON carry every result; the HTML page has one SVG plot per test point and
        a hostile serial appears as text, never as markup."""
        from bs4 import BeautifulSoup

        serial = '<script>alert("x")</script>'
        for year, reading in ((2021, "2.00"), (2022, "2.02"), (2023, "2.05")):
            _calibrate(closed_run, tmp_path / "runs", serial, year, (reading, "5.00", "8.00"))
        html, csv = tmp_path / "h.html", tmp_path / "h.csv"
        assert main(["history", serial, "--html", str(html), "--csv", str(csv)]) == 0
        soup = BeautifulSoup(html.read_text(encoding="utf-8"), "html.parser")
        assert soup.find("script") is None and serial in soup.h1.get_text()
        assert len(soup.find_all("svg")) == 3 and len(soup.find_all("circle")) == 9
        import pandas as pd

        table = pd.read_csv(csv)
        assert len(table) == 9 and set(table["verdict"]) == {"pass"}
        capsys.readouterr()
        assert main(["history", serial, "--json"]) == 0
        data = json.loads(capsys.readouterr().out)
        assert data["calibrations"] == 3 and len(data["results"]) == 9
        assert data["drift"]["dcv-10@2V"]["slope_u_per_year"] is not None
        # A bidirectional override in the option (it would reorder the page's text) is refused.
        capsys.readouterr()
        assert main(["history", serial + "\u202e", "--json"]) == 1
        assert "bidirectional" in capsys.readouterr().err

    def test_an_item_with_no_calibration_is_a_clear_error(self, register, capsys):
        """No traceback: one line saying what is missing."""
        assert main(["history", "NOPE"]) == 1
        assert "no calibration of item 'NOPE'" in capsys.readouterr().err


class TestFoundInTolerance:
    """Found in tolerance is a question of the readings against the tolerance limits, not of the
    verdicts: under a guard band (ILAC-G8:09/2019 4.2.2, acceptance limits moved inward by
    w = U) a reading within the tolerance limits but within w of one is rejected, yet it was
    found within them. Interval analysis counts calibrations found in tolerance as found (the
    as-found condition against the tolerance: ILAC-G24:2022 / OIML D 10, method 1, from
    memory)."""

    def test_a_rejection_for_the_guard_band_alone_was_found_in_tolerance(
        self, register, tmp_path, closed_run
    ):
        """At 8 V the tolerance is ±0.2 V (2 % of 10 V) and U is 0.0058 V: 8.196 V lies within
        the tolerance but above the acceptance limit 8.1942 V (a fail, for the guard band);
        8.25 V lies outside the tolerance. Of four calibrations of the model, three were found
        in tolerance, and G-2's last one was."""
        runs_dir, guarded = tmp_path / "runs", {"procedure": "procedure-guarded.yaml"}
        _calibrate(closed_run, runs_dir, "G-1", 2021, ("2.00", "5.00", "8.00"), **guarded)
        banded = _calibrate(closed_run, runs_dir, "G-1", 2022, ("2.00", "5.00", "8.196"), **guarded)
        assert [r.model_dump() for r in banded.record.summary.rejections] == [
            {"key": "dcv-10@8V", "verdict": "fail", "cause": "guard-band"}
        ]
        _calibrate(closed_run, runs_dir, "G-1", 2023, ("2.00", "5.00", "8.25"), **guarded)
        _calibrate(closed_run, runs_dir, "G-2", 2023, ("2.00", "5.00", "8.196"), **guarded)
        history = item_history(register, serial="G-1", today=dt.date(2024, 6, 1))
        assert (history.model_calibrations, history.model_in_tolerance) == (4, 3)
        assert history.model_judged_by_verdict == 0
        assert history.last_in_tolerance is False  # 8.25 V is outside the tolerance
        assert item_history(register, serial="G-2", today=dt.date(2024, 6, 1)).last_in_tolerance

    def test_the_html_page_marks_each_of_the_four_statements_as_its_own(
        self, register, tmp_path, closed_run
    ):
        """Under the non-binary rule (ILAC-G8:09/2019 4.2.3) at 8 V, tolerance 8.2 V and U 0.0058 V
        (as above): 8.00 V passes, 8.196 V is a conditional pass (inside the tolerance, within U
        of it), 8.203 V a conditional fail (outside, within U) and 8.30 V fails. Each mark of the
        8 V plot is drawn as its own statement and says it, a conditional one never as a pass."""
        from bs4 import BeautifulSoup

        runs_dir, rule = tmp_path / "runs", {"procedure": "procedure-non-binary.yaml"}
        for year, reading in ((2020, "8.00"), (2021, "8.196"), (2022, "8.203"), (2023, "8.30")):
            _calibrate(closed_run, runs_dir, "NB-1", year, ("2.00", "5.00", reading), **rule)
        html = tmp_path / "h.html"
        assert main(["history", "NB-1", "--html", str(html)]) == 0
        soup = BeautifulSoup(html.read_text(encoding="utf-8"), "html.parser")
        (plot,) = [svg for svg in soup.find_all("svg") if "dcv-10@8V" in svg["aria-label"]]
        marks = [(c["class"][0], c.title.get_text()) for c in plot.find_all("circle")]
        assert [cls for cls, _ in marks] == ["pass", "conditional-pass", "conditional-fail", "fail"]
        assert all(title.endswith(cls) for cls, title in marks)
        style = soup.style.get_text()
        assert ".conditional-pass {" in style and ".conditional-fail {" in style

    def test_rows_stored_before_the_register_counted_it_are_judged_by_their_verdicts(
        self, tmp_path, closed_run, monkeypatch
    ):
        """A register made at revision 0001 with a run in it migrates to the head revision; the
        run kept from before holds no count and is judged by its verdict, as it was."""
        from alembic import command

        from verirun.register import config
        from verirun.register.db import _alembic_config, forget_open, open_register
        from verirun.register.store import point_rows, run_row

        monkeypatch.delenv("VERIRUN_REGISTER", raising=False)
        config.use(None)
        closed = _calibrate(closed_run, tmp_path / "runs", "OLD-1", 2021, ("2.00", "5.00", "8.30"))
        url = f"sqlite:///{tmp_path / 'old.db'}"
        engine = sa.create_engine(url)
        with engine.begin() as connection:
            command.upgrade(_alembic_config(connection), "0001")
            tables = sa.MetaData()
            tables.reflect(connection)
            run = {**run_row(closed.record, closed.run_dir.name), "id": 1}
            del run["outside_tolerance"]
            connection.execute(tables.tables["runs"].insert(), [run])
            rows = [dict(row) for row in point_rows(1, closed.record)]
            for row in rows:
                del row["within_tolerance"]
            connection.execute(tables.tables["points"].insert(), rows)
        engine.dispose()
        forget_open()
        register = open_register(url)  # an embedded register migrates as it is opened
        with register.reading() as connection:
            assert current_revision(connection) == head_revision()
        history = item_history(register, serial="OLD-1", today=dt.date(2022, 1, 1))
        assert history.last_in_tolerance is False  # 8.30 V failed, outside the tolerance
        assert (history.model_calibrations, history.model_in_tolerance) == (1, 0)
        assert history.model_judged_by_verdict == 1  # and the history says so
        assert history.as_json()["model_reliability"]["judged_by_verdict"] == 1
        assert "1 of them judged by their verdicts" in history.text()

    def test_a_calibration_that_measured_nothing_is_found_neither_way(
        self, register, tmp_path, closed_run
    ):
        """Every step skipped (the meter came in damaged): the run closes complete with no
        statement. It is not counted in the model's share, and the item's last calibration
        found it neither in tolerance nor out of it."""
        runs_dir = tmp_path / "runs"
        _calibrate(closed_run, runs_dir, "S-1", 2021, ("2.00", "5.00", "8.00"))
        skipped = ("skip movement seized",) * 3
        nothing = _calibrate(closed_run, runs_dir, "S-1", 2022, skipped)
        assert nothing.record.summary.overall == "none"
        assert nothing.record.run.status == "complete"
        history = item_history(register, serial="S-1", today=dt.date(2023, 1, 1))
        assert (history.model_calibrations, history.model_in_tolerance) == (1, 1)
        assert history.last_in_tolerance is None
        assert history.staircase() == "no change (the last calibration measured no point)"
