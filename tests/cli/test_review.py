"""Review before running: `verirun check` of every kind of file, the preflight with --bench,
and `verirun review`'s table and HTML page."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest
from bs4 import BeautifulSoup

from verirun import cli
from verirun.bench.config import load_bench, load_bench_text
from verirun.bench.profile import load_profile
from verirun.pointer import pointer
from verirun.preflight import test_current
from verirun.procedure.load import load_procedure, load_procedure_text
from verirun.procedure.plan import plan
from verirun.review import render_html, review

DATA = Path(__file__).resolve().parents[1] / "data"
TODAY = dt.date(2026, 12, 1)


def over_limit_bench(tmp_path) -> Path:
    """The test bench with the resistance output limited to 50 mA up to 110 Ω."""
    path = tmp_path / "bench.yaml"
    path.write_text(
        (DATA / "bench-test.yaml")
        .read_text(encoding="utf-8")
        .replace("{up-to: 110 ohm, max: 150 mA}", "{up-to: 110 ohm, max: 50 mA}"),
        encoding="utf-8",
    )
    return path


class TestTestCurrent:
    def test_series_ohmmeter_current_from_battery_and_centre(self):
        """I = E / (Rc + Rx) with E = 1.5 V, Rc = 12 Ω (Ohm's law for the series ohmmeter circuit;
        the trade's check value: 125 mA with the leads shorted): 100 mA at 3 Ω, 62.5 mA at 12 Ω,
        25 mA at 48 Ω."""
        points = [
            p for p in plan(load_procedure(DATA / "bench-meter.yaml")) if p.range.id == "ohm-x1"
        ]
        assert [test_current(p) for p in points] == pytest.approx([0.1, 0.0625, 0.025])

    def test_no_battery_no_current(self):
        """A linear range, or an ohms range without battery, has no test current worked out."""
        points = plan(load_procedure(DATA / "bench-meter.yaml"))
        assert test_current(points[0]) is None


class TestPointerPosition:
    def test_series_ohms_pointer_from_the_left_end(self):
        """On a 100° series-ohms scale of centre 12 Ω the pointer stands at 100 × Rc / (Rc + Rx)
        degrees from the left (infinity) end: 80° at 3 Ω, 50° at 12 Ω, 20° at 48 Ω (the series
        law f = Rc / (Rc + Rx)); ± 2.5° of arc around each."""
        points = [
            p for p in plan(load_procedure(DATA / "bench-meter.yaml")) if p.range.id == "ohm-x1"
        ]
        where = [pointer(p) for p in points]
        assert [w.degrees for w in where] == pytest.approx([80.0, 50.0, 20.0])
        assert where[1].window_degrees == pytest.approx((47.5, 52.5))
        assert where[1].text() == "50.0° from the left end, on the 12 Ω mark"


class TestReview:
    def test_current_over_the_limit_is_a_problem(self, tmp_path):
        """With the resistance output limited to 50 mA, the 3 Ω (100 mA) and 12 Ω (62.5 mA)
        points are problems that stop a run; 48 Ω (25 mA) is not."""
        bench = load_bench(over_limit_bench(tmp_path))
        found = review(
            load_procedure(DATA / "bench-meter.yaml"),
            bench,
            load_profile("scpi-generic"),
            today=TODAY,
        )
        assert len(found.problems) == 2
        assert "step 7 (ohm-x1 at 3 Ω): the ohmmeter drives 100 mA" in found.problems[0]
        assert "at most 50 mA" in found.problems[0] and "step 8" in found.problems[1]
        rows = {r.step: r for r in found.rows}
        assert rows[7].current_over and rows[8].current_over and not rows[9].current_over

    def test_run_refuses_it_too(self, tmp_path):
        """The same check is part of the run's preflight, so `verirun run` stops before any
        output."""
        code = cli.main(
            [
                "run",
                str(DATA / "bench-meter.yaml"),
                "--bench",
                str(over_limit_bench(tmp_path)),
                "--simulate",
                "--readings",
                str(DATA / "bench-meter-readings.csv"),
                "--serial",
                "S",
                "--customer",
                "C",
                "--temperature",
                "23",
                "--humidity",
                "40",
            ]
        )
        assert code == cli.EXIT_ERROR and not Path("runs").exists()

    def test_hazard_and_low_tur_are_warned(self):
        """The 80 V point is hazardous (at or above 60 V DC, IEC 61010-1 as the bench sets it) and
        its permission is named; a range whose tolerance is only twice the calibrator's U is
        flagged below 4 : 1 (ANSI/NCSL Z540.3 TUR = tolerance span / 2U)."""
        text = (
            (DATA / "bench-meter.yaml")
            .read_text(encoding="utf-8")
            .replace(
                "accuracy: {percent-of-full-scale: 2.5}", "accuracy: {percent-of-full-scale: 0.05}"
            )
            .replace("resolution: 0.25 mA", "resolution: 0.001 mA")
        )
        found = review(
            load_procedure_text(text, "p.yaml"),
            load_bench(DATA / "bench-test.yaml"),
            load_profile("scpi-generic"),
            today=TODAY,
        )
        assert any(
            "hazardous-live" in w and "step 4" in w and "scripted-hazardous: allow" in w
            for w in found.warnings
        )
        low = [r for r in found.rows if r.tur_low]
        # At 50 mA on the 220 mA line: ± (120 ppm × 50 mA + 20 ppm × 220 mA + 1 µA) = 11.4 µA at
        # 99 % (k = 2.576), u = 4.426 µA; readability 1 µA / √12 = 0.289 µA (GUM F.2.2.1);
        # U = 2 √(4.426² + 0.289²) = 8.87 µA (GUM 5.1.2), reported as 8.9 µA (GUM 7.2.6: two
        # significant digits; TUR is worked from U as printed); TUR = 50 µA / (2 × 8.9 µA) = 2.81,
        # worked by hand. At 10 mA the same sum gives TUR 18.8, not flagged.
        assert [(r.step, r.tur) for r in low] == [(6, "2.81")]
        assert any("TUR below 4 : 1" in w for w in found.warnings)

    def test_html_page_is_deterministic_escaped_and_complete(self, tmp_path):
        """The page lists every step, names both files by SHA-256, leaves sign-off boxes, escapes
        hostile text and is the same bytes when rendered twice."""
        text = (
            (DATA / "bench-meter.yaml")
            .read_text(encoding="utf-8")
            .replace("read-on: black DC scale, 0-10", "read-on: <script>alert(1)</script>")
        )
        procedure = load_procedure_text(text, "p.yaml")
        bench = load_bench(DATA / "bench-test.yaml")
        found = review(procedure, bench, load_profile("scpi-generic"), today=TODAY)
        page = render_html(found)
        assert page == render_html(
            review(procedure, bench, load_profile("scpi-generic"), today=TODAY)
        )
        soup = BeautifulSoup(page, "html.parser")
        assert soup.find("script") is None and "<script>alert(1)</script>" in soup.get_text()
        assert len(soup.select("table.plan tbody tr")) == len(plan(procedure))
        assert procedure.sha256 in page and bench.sha256 in page
        assert "reviewed by" in soup.get_text()

    def test_demo_review_command(self, tmp_path, demo_procedure_path, demo_bench_path, capsys):
        """`verirun review` of the demo prints a row per step and writes the page in --reports."""
        code = cli.main(
            [
                "review",
                str(demo_procedure_path),
                "--bench",
                str(demo_bench_path),
                "--reports",
                str(tmp_path / "rep"),
            ]
        )
        out = capsys.readouterr().out
        assert code == cli.EXIT_OK
        pages = list((tmp_path / "rep").glob("review-*.html"))
        assert len(pages) == 1
        steps = len(plan(load_procedure(demo_procedure_path)))
        soup = BeautifulSoup(pages[0].read_text(encoding="utf-8"), "html.parser")
        assert len(soup.select("table.plan tbody tr")) == steps
        assert f"│ {steps} " in out or f"┃ {steps} " in out or f" {steps} " in out


class TestCheckCommand:
    def test_every_kind_of_file_recognised(
        self, tmp_path, demo_procedure_path, demo_bench_path, demo_lab_path, capsys
    ):
        """Procedure, bench, driver profile, lab, virtual meter and readings each say what they
        are."""
        from verirun.conduct import demo_files

        with demo_files() as demo:
            meter = demo["meter"]
        profile = Path(cli.__file__).parent / "bench" / "profiles" / "scpi-generic.yaml"
        code = cli.main(
            [
                "check",
                str(DATA / "bench-meter.yaml"),
                str(DATA / "bench-test.yaml"),
                str(profile),
                str(demo_lab_path),
                str(DATA / "bench-meter-readings.csv"),
            ]
        )
        out = capsys.readouterr().out
        assert code == cli.EXIT_OK, out
        for words in (
            "ok: procedure TB-VP-001",
            "ok: bench file",
            "ok: driver profile scpi-generic",
            "ok: lab profile",
            "ok: readings for every point of TB-VP-001",
        ):
            assert words in out
        code = cli.main(["check", str(demo_procedure_path), str(meter)])
        assert code == cli.EXIT_OK and "ok: virtual meter" in capsys.readouterr().out

    def test_unknown_file_and_readings_without_procedure(self, tmp_path, capsys):
        """A YAML file of no known kind, and a readings file with no procedure to check it against,
        are problems naming what is expected."""
        odd = tmp_path / "odd.yaml"
        odd.write_text("format: 1\nthing: 2\n", encoding="utf-8")
        code = cli.main(["check", str(odd), str(DATA / "bench-meter-readings.csv")])
        out = capsys.readouterr().out
        assert code == cli.EXIT_ERROR
        assert f"{odd}:1: not a file verirun reads" in out
        assert "give the procedure file too" in out

    def test_bench_runs_the_preflight_without_opening_the_instrument(
        self, tmp_path, capsys, monkeypatch
    ):
        """With --bench, a test current over the limit is reported and nothing opens a VISA
        library."""
        import pyvisa

        def no_visa(*args, **kwargs):
            raise AssertionError("a VISA resource manager was opened")

        monkeypatch.setattr(pyvisa, "ResourceManager", no_visa)
        code = cli.main(
            ["check", str(DATA / "bench-meter.yaml"), "--bench", str(over_limit_bench(tmp_path))]
        )
        out = capsys.readouterr().out
        assert code == cli.EXIT_ERROR
        assert "step 7 (ohm-x1 at 3 Ω): the ohmmeter drives 100 mA" in out
        assert "warning:" in out and "hazardous-live" in out

    def test_bench_file_limits_validated(self):
        """A resistance-current limit in the wrong unit is reported at its line and key."""
        text = (
            (DATA / "bench-test.yaml")
            .read_text(encoding="utf-8")
            .replace("max: 1 mA}", "max: 1 mV}")
        )
        with pytest.raises(Exception) as info:
            load_bench_text(text, "b.yaml")
        assert "calibrator.resistance-current" in str(info.value) and "expected amperes" in str(
            info.value
        )


class TestHostileText:
    def test_markup_in_a_procedure_is_printed_literally_in_the_review_table(self, tmp_path, capsys):
        """A procedure id and read-on text holding rich markup are printed as written, not
        interpreted, in the terminal table and on the page."""
        text = (
            (DATA / "bench-meter.yaml")
            .read_text(encoding="utf-8")
            .replace(
                "read-on: green ohms scale, multiply by 1",
                'read-on: "[red]x[/red] [link=http://x]y"',
            )
            .replace("id: TB-VP-001", 'id: "[bold]TB[/bold]"')
        )
        path = tmp_path / "p.yaml"
        path.write_text(text, encoding="utf-8")
        assert (
            cli.main(
                [
                    "review",
                    str(path),
                    "--bench",
                    str(DATA / "bench-test.yaml"),
                    "--reports",
                    str(tmp_path / "rep"),
                ]
            )
            == 0
        )
        out = capsys.readouterr().out
        page = next((tmp_path / "rep").glob("*.html")).read_text(encoding="utf-8")
        assert "[red]x[/red] [link=http://x]y" in page
        assert "[bold]TB[/bold] revision A" in out


class TestBenchOnePass:
    def test_structure_and_accuracy_line_problems_at_once(self, capsys):
        """A bench file with an unknown key and an accuracy line in the wrong unit gets both
        problems from one `verirun check`."""
        import tempfile

        text = (
            (DATA / "bench-test.yaml")
            .read_text(encoding="utf-8")
            .replace("settle: 0 s", "settle: 0 s\nsettel: 1 s")
            .replace("range: 22 mA,", "range: 22 mV,")
        )
        with tempfile.TemporaryDirectory() as folder:
            path = Path(folder) / "bench.yaml"
            path.write_text(text, encoding="utf-8")
            assert cli.main(["check", str(path)]) == cli.EXIT_ERROR
        out = capsys.readouterr().out
        assert "settel: unknown key" in out
        assert "calibrator.accuracy[5].range: '22 mV' is in volts, expected amperes" in out
