"""An item's history: drift fitted by least squares (checked against SciPy and NumPy), the date
the fit reaches the tolerance, what counts as a calibration, the model's in-tolerance share,
and the HTML, CSV and JSON exports."""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pytest
from scipy import stats

from verirun.cli import main
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
        """One calibration gives no slope; two give a slope with no uncertainty (no degrees of freedom)."""
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
