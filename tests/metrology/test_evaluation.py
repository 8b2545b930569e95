"""Uncertainty and decision rules wired through procedure, bench, plan, record and certificate."""

from __future__ import annotations

import datetime as dt
import json
import math
from pathlib import Path

import pytest

from verirun import preflight
from verirun.bench.config import load_bench_text
from verirun.bench.profile import load_profile
from verirun.cli import main
from verirun.errors import ProcedureError
from verirun.evaluation import evaluate
from verirun.procedure.load import load_procedure_text
from verirun.procedure.plan import plan

DATA = Path(__file__).resolve().parents[1] / "data"

BENCH = (DATA / "evaluation-bench.yaml").read_text(encoding="utf-8")

PROCEDURE = (DATA / "evaluation-procedure.yaml").read_text(encoding="utf-8")


def points(procedure_text=PROCEDURE, bench_text=BENCH):
    return plan(
        load_procedure_text(procedure_text, "proc.yaml"), load_bench_text(bench_text, "bench.yaml")
    )


def preflight_problems(procedure_text: str) -> list[str]:
    """What the preflight finds in the procedure on the test bench, on 2026-01-01."""
    return preflight.problems(
        points(procedure_text),
        load_bench_text(BENCH, "bench.yaml"),
        load_profile("scpi-generic"),
        today=dt.date(2026, 1, 1),
    )


class TestCalibratorSpecFromBench:
    def test_ten_ppm_plus_five_microvolts_at_ten_volts(self):
        """±(10 ppm of output + 5 µV) at 10 V, 99 %: limit 105 µV, u = 105/2.576 = 40.8 µV
        (normal, two-sided 99 % coverage factor 2.576, GUM G.3 / table G.1)."""
        bench = load_bench_text(BENCH, "bench.yaml")
        line = bench.spec_for("dc-voltage", 10.0, None)
        assert line.range == 16.0  # the smallest range that holds 10 V
        assert line.spec.limit(output=10.0, range_value=line.range) == pytest.approx(105e-6)
        assert line.spec.standard_uncertainty(output=10.0) == pytest.approx(40.76e-6, rel=1e-3)

    def test_limits_are_rectangular(self):
        """A specification with no stated level is a rectangular distribution: u = a/sqrt 3
        (GUM 4.3.7)."""
        line = load_bench_text(BENCH, "bench.yaml").spec_for("resistance", 12.0, None)
        assert line.spec.standard_uncertainty(output=12.0) == pytest.approx(
            12.0 * 1e-4 / math.sqrt(3)
        )

    def test_no_line_for_a_value_beyond_every_range(self):
        """A value above every listed range has no specification line."""
        assert load_bench_text(BENCH, "bench.yaml").spec_for("dc-voltage", 50.0, None) is None

    @pytest.mark.parametrize(
        "old, new, words",
        [
            ("level: 99 %}", "level: 150 %}", "between 0 and 100"),
            ("output: 10 ppm, floor: 2 uV", "output: 10 V, floor: 2 uV", "ppm or %"),
            ("floor: 5 uV", "floor: 5 uA", "expected volts"),
        ],
    )
    def test_bad_lines_name_file_and_line(self, old, new, words):
        """A wrong accuracy line is reported with its file, line and field."""
        with pytest.raises(ProcedureError) as info:
            load_bench_text(BENCH.replace(old, new, 1), "bench.yaml")
        assert any(p.startswith("bench.yaml:1") and words in p for p in info.value.problems), (
            info.value.problems
        )


class TestBudgetOfAPoint:
    def test_linear_point_combines_calibrator_and_readability(self):
        """U at 10 V = 2 sqrt(u_cal² + u_res²): u_cal = 105 µV / 2.576, u_res = 0.05 V / (2 sqrt 3)
        (GUM 5.1.2 root-sum-square; GUM F.2.2.1 for the resolution)."""
        point = points()[0]
        u_cal = 105e-6 / 2.5758293035489
        u_res = 0.05 / (2 * math.sqrt(3))
        assert point.budget.domain == "value"
        assert point.budget.expanded == pytest.approx(2 * math.hypot(u_cal, u_res))

    def test_ohms_point_is_combined_along_the_arc(self):
        """On a series-ohms scale the calibrator's ohms are carried into scale length by
        df/dRx = Rc/(Rc+Rx)² (derived from f = Rc/(Rc+Rx)) and combined with the readability in
        degrees; U in ohms is U along the arc divided by the slope."""
        point = points()[1]
        slope = 16.0 / (32.0**2)  # at Rx = Rc = 16 ohm
        u_cal_f = 16.0 * 1e-4 / math.sqrt(3) * slope
        u_res_f = (0.5 / 90) / (2 * math.sqrt(3))
        assert point.budget.domain == "deflection"
        assert point.budget.expanded == pytest.approx(2 * math.hypot(u_cal_f, u_res_f))
        assert point.budget.expanded_value == pytest.approx(point.budget.expanded / slope)


def test_planned_points_are_frozen_and_hashable():
    """A planned test point cannot be changed, and can be hashed (its window and budget too), so
    a plan can key a table."""
    planned = points()
    with pytest.raises(AttributeError):
        planned[0].nominal = 1.0  # type: ignore[misc]
    assert len({hash(p) for p in planned}) == len(planned)
    assert {planned[0]: "first"}[planned[0]] == "first"


class TestEvaluateUnderARule:
    def test_guarded_rule_fails_a_reading_inside_tolerance_but_outside_acceptance(self):
        """Guarded acceptance, w = U (ILAC-G8:09/2019 4.2.2): at 10 V ± 0.2 V, a reading of
        10.19 V is within tolerance but above 10.2 V - U, so it fails."""
        point = points()[0]
        result = evaluate(point, 10.19)
        u = point.budget.expanded
        assert 10.19 > 10.2 - u  # U is about 29 mV
        assert result.verdict == "fail"
        # the acceptance limits are worked from U as reported, 0.029 V (GUM 7.2.6: two digits)
        assert f"{u:.2g}" == "0.029"
        assert result.acceptance == (9.829, 10.171)
        assert evaluate(point, 10.1).verdict == "pass"

    def test_tur_is_span_over_two_u(self):
        """TUR = (TU - TL) / 2U (ANSI/NCSL Z540.3 definition)."""
        point = points()[0]
        # with U as reported, 0.029 V (GUM 7.2.6), as the certificate prints it
        assert evaluate(point, 10.0).tur == pytest.approx(0.4 / (2 * 0.029))

    def test_non_binary_rule_gives_conditional_outcomes(self):
        """Non-binary statement (ILAC-G8:09/2019 4.2.3): between the acceptance and tolerance
        limits a result is a conditional pass; within w beyond the tolerance limit a conditional
        fail."""
        pts = points(PROCEDURE.replace("rule: guarded", "rule: non-binary"))
        point = pts[0]
        u = point.budget.expanded
        assert evaluate(point, 10.2 - u / 2).verdict == "conditional-pass"
        assert evaluate(point, 10.2 + u / 2).verdict == "conditional-fail"
        assert evaluate(point, 10.2 + 2 * u).verdict == "fail"

    def test_risk_rule_uses_the_conformance_probability(self):
        """Risk rule (JCGM 106:2012 7.2, normal model): pc = Phi((TU-y)/u) - Phi((TL-y)/u); a
        reading whose 1 - pc exceeds 2 % fails, one well inside passes."""
        from scipy.stats import norm

        pts = points(PROCEDURE.replace("rule: guarded", "rule: risk"))
        point = pts[0]
        u = 0.029 / 2  # U as reported (GUM 7.2.6: two significant digits) over k = 2
        y = 10.178
        result = evaluate(point, y)
        assert result.conformance == pytest.approx(
            norm.cdf((10.2 - y) / u) - norm.cdf((9.8 - y) / u)
        )
        assert result.verdict == "fail"  # 1 - pc ≈ 6.7 % > 2 %
        assert evaluate(point, 10.0).verdict == "pass"

    @pytest.mark.parametrize(
        "old, new, line, words",
        [
            ("rule: guarded}", "rule: guarded, risk-target: 5 %}", 4, "only the risk rule"),
            ("rule: guarded}", "rule: risk, guard-ratio: 2}", 4, "only the guarded and non-binary"),
            ("rule: guarded}", "rule: sometimes}", 4, "guarded"),
        ],
    )
    def test_rule_parameters_are_checked(self, old, new, line, words):
        """A rule parameter that the rule does not take is reported with file and line."""
        with pytest.raises(ProcedureError) as info:
            load_procedure_text(PROCEDURE.replace(old, new), "proc.yaml")
        assert any(
            p.startswith(f"proc.yaml:{line}:") and words in p for p in info.value.problems
        ), info.value.problems


class TestPreflight:
    def test_overdue_standard_refuses_to_start(self):
        """A standard past its calibration due date stops the run before it starts
        (ISO/IEC 17025:2017 6.4.7 and 6.4.13)."""
        pts = points()
        bench = load_bench_text(BENCH, "bench.yaml")
        found = preflight.problems(
            pts, bench, load_profile("scpi-generic"), today=dt.date(2030, 1, 2)
        )
        assert any("calibration-due" in p and "overdue" in p for p in found)
        assert (
            preflight.problems(
                pts, bench, load_profile("scpi-generic"), today=dt.date(2029, 12, 31)
            )
            == []
        )

    def test_point_without_a_specification_line_is_refused(self):
        """A point the calibrator's specification does not cover is refused before the run."""
        text = PROCEDURE.replace("full-scale: 10 V", "full-scale: 50 V").replace(
            "points: [10 V]", "points: [50 V]"
        )
        found = preflight_problems(text)
        assert any(
            p.startswith("step 1 (dcv-10 at 50 V DC)") and "no accuracy line" in p for p in found
        )

    def test_point_beyond_the_calibrator_is_refused(self, tmp_path):
        """A point beyond the calibrator's output limits (driver profile) is refused before the
        run."""
        text = PROCEDURE.replace("full-scale: 10 V", "full-scale: 2000 V").replace(
            "points: [10 V]", "points: [1500 V]"
        )
        found = preflight_problems(text)
        assert any("cannot source" in p and "1000" in p for p in found)


class TestRecordAndCertificate:
    def test_demo_record_states_rule_and_uncertainty(self, tmp_path):
        """The run record and certificate state the decision rule applied (ISO/IEC 17025:2017
        7.8.6.2) and each result's U and TUR."""
        assert (
            main(["demo", "--runs", str(tmp_path / "runs"), "--reports", str(tmp_path / "rep")])
            == 0
        )
        record = json.loads(next((tmp_path / "runs").glob("*/record.json")).read_text())
        assert record["decision_rule"]["statement"].startswith("Simple acceptance")
        row = record["points"][0]
        assert row["U"] > 0 and row["tur"] > 4 and row["reported"]["U"]
        html = next((tmp_path / "rep").glob("*.html")).read_text()
        assert record["decision_rule"]["statement"] in html
        assert "U (k = 2)" in html


class TestWindowCommandWithUncertainty:
    def test_tur(self, capsys):
        """Tolerance 9.995 .. 10.005 V with U = 0.0012 V (u = 0.0006): TUR = 0.01/0.0024 = 4.17
        (ANSI/NCSL Z540.3 definition)."""
        assert (
            main(
                [
                    "window",
                    "--full-scale",
                    "20 V",
                    "--percent-reading",
                    "0.05",
                    "--at",
                    "10 V",
                    "--u-applied",
                    "0.0006",
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        assert out["U"] == pytest.approx(0.0012)
        assert out["tur"] == pytest.approx(4.1667, abs=1e-4)

    def test_risk_gives_conformance_probability(self, capsys):
        """TL 9.995, TU 10.005, u 0.0006, y 10.004 -> pc 0.9522 (JCGM 106:2012 formula, from
        memory; checked against scipy.stats.norm), which fails a 2 % risk target."""
        from scipy.stats import norm

        assert (
            main(
                [
                    "window",
                    "--full-scale",
                    "20",
                    "--percent-reading",
                    "0.05",
                    "--at",
                    "10",
                    "--u-applied",
                    "0.0006",
                    "--rule",
                    "risk",
                    "--reading",
                    "10.004",
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        expected = norm.cdf((10.005 - 10.004) / 0.0006) - norm.cdf((9.995 - 10.004) / 0.0006)
        assert out["pc"] == pytest.approx(expected) and out["pc"] == pytest.approx(0.9522, abs=1e-4)
        assert out["verdict"] == "fail"

    @pytest.mark.parametrize(
        "reading, verdict",
        [
            ("9.7", "pass"),
            ("9.9", "conditional-pass"),
            ("10.1", "conditional-fail"),
            ("10.3", "fail"),
        ],
    )
    def test_non_binary_zones(self, capsys, reading, verdict):
        """ILAC-G8:09/2019 4.2.3 with TU = 10, U = 0.2, w = U: 9.7 pass, 9.9 conditional pass,
        10.1 conditional fail, 10.3 fail (lower limit far away: 0 .. 10 V at 5 V ± 5 V)."""
        assert (
            main(
                [
                    "window",
                    "--full-scale",
                    "10",
                    "--percent-fs",
                    "50",
                    "--at",
                    "5",
                    "--u-applied",
                    "0.1",
                    "--rule",
                    "non-binary",
                    "--reading",
                    reading,
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        assert (out["low"], out["high"]) == (0.0, 10.0)
        assert out["verdict"] == verdict

    def test_guarded_acceptance_limits(self, capsys):
        """Guarded acceptance with w = U (ILAC-G8:09/2019 4.2.2): limits move inward by U."""
        assert (
            main(
                [
                    "window",
                    "--full-scale",
                    "10",
                    "--percent-fs",
                    "2",
                    "--at",
                    "5",
                    "--u-applied",
                    "0.01",
                    "--rule",
                    "guarded",
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        assert out["accept_low"] == pytest.approx(4.8 + 0.02) and out[
            "accept_high"
        ] == pytest.approx(5.2 - 0.02)

    def test_resolution_in_degrees_on_ohms(self, capsys):
        """A 0.5 degree resolution on a 90 degree arc is u = (0.5/90)/(2 sqrt 3) of scale length
        (GUM F.2.2.1); U in ohms at centre scale is 2u / |df/dRx| with df/dRx = 1/(4 Rc)
        (derived from f = Rc/(Rc+Rx)). U is reported along the arc, in degrees, to two
        significant digits (GUM 7.2.6); the interval in ohms is the scale law's image of
        f0 ± U, not symmetric about 16 Ω."""
        assert (
            main(
                [
                    "window",
                    "--scale",
                    "series-ohms",
                    "--centre",
                    "16",
                    "--arc",
                    "90",
                    "--degrees",
                    "3",
                    "--at",
                    "16",
                    "--resolution",
                    "0.5deg",
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        u_f = (0.5 / 90) / (2 * math.sqrt(3))
        assert out["U_domain"] == pytest.approx(2 * u_f)
        assert (out["U"], out["U_unit"]) == (0.29, "deg")  # 2 × 90 u_f = 0.2887°
        assert out["U_linear_value"] == pytest.approx(2 * u_f * 4 * 16)
        f = lambda r: 16 / (16 + r)  # noqa: E731
        value = lambda x: 16 * (1 - x) / x  # noqa: E731
        assert out["interval_low"] == pytest.approx(value(f(16) + 0.29 / 90))
        assert out["interval_high"] == pytest.approx(value(f(16) - 0.29 / 90))
        assert 16 - out["interval_low"] < out["interval_high"] - 16


class TestOpenEndedOhmsWindows:
    @pytest.mark.parametrize("rule", ["guarded", "risk"])
    def test_a_limit_past_the_infinity_end_is_open(self, capsys, rule):
        """Series ohms, Rc = 10 Ω, 9° of a 90° arc at 190 Ω: f0 = 0.05 < 0.1, so the window is
        unbounded above (derived from f = Rc/(Rc+Rx)); the tolerance is one-sided, TUR is not
        defined, and 490 Ω (f = 0.02, inside) passes under a guard band as under a risk rule."""
        assert (
            main(
                [
                    "window",
                    "--scale",
                    "series-ohms",
                    "--centre",
                    "10",
                    "--degrees",
                    "9",
                    "--arc",
                    "90",
                    "--at",
                    "190",
                    "--u-applied",
                    "160",
                    "--rule",
                    rule,
                    "--reading",
                    "490",
                    "--json",
                ]
            )
            == 0
        )
        out = json.loads(capsys.readouterr().out)
        assert out["high"] is None and out["tur"] is None and out["accept_high"] is None
        assert out["verdict"] == "pass"


class TestHazardThresholds:
    @pytest.mark.parametrize(
        "key, value",
        [("hazardous-dc", "1 kV"), ("hazardous-ac-rms", "50 V"), ("hazardous-ac-peak", "100 V")],
    )
    def test_a_bench_cannot_raise_the_thresholds_past_the_standard(self, key, value):
        """A bench may lower the hazardous-live thresholds but not raise them past 70 V DC,
        33 V rms, 46.7 V peak (IEC 61010-1, the most lenient edition, from memory)."""
        text = BENCH + f"safety:\n  {key}: {value}\n"
        with pytest.raises(ProcedureError, match=f"bench.yaml:\\d+: safety.{key}: .*never raise"):
            load_bench_text(text, "bench.yaml")

    def test_lower_thresholds_load(self):
        """Lower thresholds, as a lab's wet-location rules might ask, are accepted."""
        bench = load_bench_text(BENCH + "safety:\n  hazardous-dc: 35 V\n", "bench.yaml")
        assert bench.hazardous_dc == 35.0
