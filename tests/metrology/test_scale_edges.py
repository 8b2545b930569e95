"""The ends of the scales: TUR at the 0 Ω end, readability along the arc, a meter at rest,
negative readings on scales with a lower end, and value objects that cannot be changed."""

from __future__ import annotations

import csv
import dataclasses
import json
import math
from pathlib import Path

import pytest
from runkit import simulated_run_args

from verirun.cli import main
from verirun.errors import ProcedureError, RecordError, UnitError
from verirun.evaluation import evaluate
from verirun.metrology import decision, scales, tolerance, uncertainty
from verirun.procedure.load import load_procedure_text
from verirun.procedure.plan import plan
from verirun.readings import ScriptedReadings, parse_entry

DATA = Path(__file__).resolve().parents[1] / "data"

OHMS = (DATA / "scale-ends-procedure.yaml").read_text(encoding="utf-8")


class TestZeroOhmEnd:
    def test_tur_is_reported_where_the_window_is_bounded(self):
        """Series ohms, Rc = 10 Ω, ±9° of 90° at 0.5 Ω: f0 = 10/10.5 = 0.952, f0 + 0.1 passes
        full deflection, so the window runs from 0 Ω to R(f0 - 0.1) and is bounded (derived
        from f = Rc / (Rc + Rx)); TUR is the reachable span along the arc, 1 - (f0 - 0.1), over
        2U (ANSI/NCSL Z540.3's ratio, cut to the arc: common practice, no source), not none."""
        (point, _) = plan(load_procedure_text(OHMS, "edge.yaml"))
        assert point.window.low == 0.0 and point.window.bounded
        result = evaluate(point, 0.5)
        f0 = 10 / 10.5
        u = float(decision.reported_expanded(point.window, point.budget))
        assert result.tur == pytest.approx((1 - (f0 - 0.1)) / (2 * u))
        assert result.tur < (2 * 0.1) / (2 * u)  # lower than the uncut span would suggest

    def test_infinity_end_stays_one_sided(self):
        """At the infinity end the window is unbounded above and has no TUR (common practice,
        no source)."""
        law = scales.SeriesOhms(centre=10.0)
        win = tolerance.window(
            tolerance.DegreesOfArc(degrees=9.0), 190.0, tolerance.RangeContext(law=law, arc=90.0)
        )
        bud = uncertainty.budget(
            terms=[uncertainty.readability_term(division=0.5, unit="degrees", arc=90.0)],
            nominal=190.0,
            law=law,
            domain="deflection",
        )
        judged = decision.judge(
            decision.SimpleAcceptance(), window=win, law=law, budget=bud, reading=190.0
        )
        assert not win.bounded and judged.tur is None


class TestReadabilityOnAnOhmsScale:
    def test_resolution_in_ohms_is_refused_with_its_line(self):
        """A resolution in ohms on an ohms scale would be carried by the slope at each nominal;
        its divisions are not evenly spaced in ohms, so it is refused at its line (common
        practice, no source)."""
        with pytest.raises(ProcedureError) as info:
            load_procedure_text(
                OHMS.replace("resolution: 0.5 deg", "resolution: 0.2 ohm"), "edge.yaml"
            )
        (problem,) = info.value.problems
        assert (
            problem.startswith("edge.yaml:11")
            and "along the arc" in problem
            and "resolution" in problem
        )

    def test_percent_of_length_is_accepted(self):
        """0.5 % of scale length gives u = 0.005 / (2√3) along the arc (GUM F.2.2.1)."""
        (point, _) = plan(
            load_procedure_text(OHMS.replace("resolution: 0.5 deg", "resolution: 0.5 %"), "e.yaml")
        )
        (term,) = point.budget.terms
        assert term.domain == "deflection"
        assert term.standard_uncertainty == pytest.approx(0.005 / (2 * math.sqrt(3)))

    def test_window_command_refuses_ohms_resolution(self, capsys):
        """``verirun window`` refuses a resolution in ohms on an ohms scale, naming the option."""
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
                    "10",
                    "--resolution",
                    "0.2ohm",
                ]
            )
            == 1
        )
        assert "--resolution" in capsys.readouterr().err


class TestMeterAtRest:
    def test_check_warns_when_the_tolerance_admits_an_open_circuit(self, tmp_path, capsys):
        """±9° at 190 Ω on a 10 Ω series scale: f0 = 0.05, so the tolerance reaches the rest
        position f = 0 and a meter whose circuit is open would pass (derived from
        f = Rc / (Rc + Rx)); check says so, and still loads the file."""
        path = tmp_path / "rest.yaml"
        path.write_text(OHMS.replace("points: [0.5 ohm, 10 ohm]", "points: [10 ohm, 190 ohm]"))
        assert main(["check", str(path)]) == 0
        out = capsys.readouterr().out
        assert "warning: range ohm, step 2 at 190 Ω" in out and "circuit is open" in out
        assert out.count("warning") == 1 and f"{path}: ok" in out


BIPOLAR = (DATA / "polarity-procedure.yaml").read_text(encoding="utf-8")


class TestNegativeReadings:
    def test_negative_point_gives_a_scale_of_either_polarity(self):
        """A DC range with a negative point reads from minus its full-scale value (common
        practice, no source); its -10 V reading is accepted at the prompt."""
        points = plan(load_procedure_text(BIPOLAR, "pol.yaml"))
        assert points[0].range.law.low == -20.0
        entry = parse_entry("-10.003", points[0])
        assert entry.value == pytest.approx(-10.003)
        assert evaluate(points[0], entry.value).verdict == "pass"  # ±(10 mV + 2 mV)

    def test_positive_only_scale_refuses_a_negative_reading(self):
        """On a 0 V to 20 V scale a -10 V reading is beyond the scale's end, with the ends
        named."""
        points = plan(load_procedure_text(BIPOLAR, "pol.yaml"))
        with pytest.raises(UnitError, match="beyond the ends of the scale"):
            parse_entry("-10", points[2])

    def test_lower_end_key(self):
        """``lower-end`` sets the left stop: a zero-centre meter of -5 V to 5 V."""
        text = BIPOLAR.replace(
            "    points: [10 V]\n", "    lower-end: -5 V\n    points: [-4 V, 4 V]\n"
        )
        text = text.replace(
            "full-scale: 20 V\n    accuracy: {percent-of-full-scale: 1}",
            "full-scale: 5 V\n    accuracy: {percent-of-full-scale: 1}",
        )
        points = plan(load_procedure_text(text, "pol.yaml"))
        assert points[2].range.law.low == -5.0 and points[2].window.low == pytest.approx(-4.05)

    @pytest.mark.parametrize(
        ("old", "new", "words"),
        [
            ("points: [10 V]\n", "points: [-10 V]\n    lower-end: 0 V\n", "below the lower end"),
            ("points: [10 V]\n", "lower-end: 30 V\n    points: [10 V]\n", "below the full-scale"),
        ],
    )
    def test_points_below_the_lower_end_are_problems_at_their_line(self, old, new, words):
        """A point below the scale's lower end, or a lower end above full scale, is reported
        with its file and line."""
        with pytest.raises(ProcedureError) as info:
            load_procedure_text(BIPOLAR.replace(old, new), "pol.yaml")
        assert any(p.startswith("pol.yaml:") and words in p for p in info.value.problems), (
            info.value.problems
        )

    def test_replay_and_amend_take_negative_readings(self, tmp_path):
        """A replay file gives a negative reading, the run records it, and amend corrects it to
        another negative reading; on the positive-only range amend refuses one."""
        proc = tmp_path / "pol.yaml"
        proc.write_text(BIPOLAR)
        readings = tmp_path / "r.csv"
        with open(readings, "w", newline="") as fh:
            csv.writer(fh).writerows(
                [
                    ["range", "at", "reading"],
                    ["dcv-20", "-10 V", "-10.004"],
                    ["dcv-20", "10 V", "10.001"],
                    ["dcv-pos", "10 V", "10.1"],
                ]
            )
        points = plan(load_procedure_text(BIPOLAR, str(proc)))
        assert ScriptedReadings(readings).take(points[0]).value == pytest.approx(-10.004)
        assert (
            main(
                simulated_run_args(
                    tmp_path, proc, DATA / "matrix-bench.yaml", readings, serial="P-1"
                )
            )
            == 0
        )
        (run,) = (tmp_path / "runs").iterdir()
        record = json.loads((run / "record.json").read_text())
        assert record["points"][0]["reading"] == pytest.approx(-10.004)
        assert record["points"][0]["verdict"] == "pass"
        assert (
            main(
                [
                    "amend",
                    str(run),
                    "--point",
                    "1",
                    "--reading",
                    "-10.02",
                    "--reason",
                    "misread",
                    "--reports",
                    str(tmp_path / "reports"),
                ]
            )
            == 0
        )
        record = json.loads((run / "record.json").read_text())
        assert record["points"][0]["reading"] == pytest.approx(-10.02)
        assert record["points"][0]["verdict"] == "fail"  # beyond -10 ∓ 12 mV
        from verirun.record.amend import amend

        with pytest.raises(RecordError, match="beyond the ends"):
            amend(run, point="3", reading="-10", reason="sign", operator="t")


class TestFrozenValues:
    def test_changing_a_planned_window_raises(self):
        """A planned point's window, budget and terms cannot be changed: setting
        ``point.window.high`` used to turn a fail into a pass (DESIGN principle 8; common
        practice, no source)."""
        (point, _) = plan(load_procedure_text(OHMS, "edge.yaml"))
        with pytest.raises(dataclasses.FrozenInstanceError):
            point.window.high = 1e9  # type: ignore[misc]
        with pytest.raises(dataclasses.FrozenInstanceError):
            point.budget.expanded = 0.0  # type: ignore[misc]
        with pytest.raises(dataclasses.FrozenInstanceError):
            point.budget.terms[0].standard_uncertainty = 0.0  # type: ignore[misc]

    def test_planned_values_hold_no_instance_dict(self):
        """The point, its range, band, scale law and rule are slotted as well as frozen: no
        ``__dict__`` through which a field could be changed behind the dataclass's back (writing
        ``point.__dict__["nominal"]`` used to succeed)."""
        from verirun.metrology.decision import (
            GuardedAcceptance,
            NonBinaryStatement,
            RiskAcceptance,
            SimpleAcceptance,
        )

        (point, _) = plan(load_procedure_text(OHMS, "edge.yaml"))
        values = [point, point.range, point.range.law, point.rule, point.window, point.budget]
        values += list(point.range.bands) + [
            SimpleAcceptance(),
            GuardedAcceptance(),
            NonBinaryStatement(),
            RiskAcceptance(),
        ]
        for value in values:
            assert not hasattr(value, "__dict__"), type(value).__name__
        with pytest.raises(AttributeError):
            point.__dict__["nominal"] = 99.0

    def test_per_reading_results_are_frozen(self):
        """The result of a reading, and the decision, outcome and acceptance zone in it, cannot
        be changed after they are made."""
        (point, _) = plan(load_procedure_text(OHMS, "edge.yaml"))
        result = evaluate(point, 0.5)
        judged = decision.judge(
            point.rule, window=point.window, law=point.range.law, budget=point.budget, reading=0.5
        )
        for value, name in (
            (result, "verdict"),
            (judged, "verdict"),
            (judged.outcome, "verdict"),
            (judged.outcome.acceptance, "low"),
            (tolerance.deviation(point.window, 0.5, point.range.law), "error"),
        ):
            with pytest.raises(dataclasses.FrozenInstanceError):
                setattr(value, name, "pass")
