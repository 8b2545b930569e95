"""The certificate in a real browser and on paper."""

from __future__ import annotations

import io
import os
import shutil
import subprocess
from pathlib import Path

import pytest
from runkit import simulated_run_args

from verirun.certificate.render import render_html, write_pdf
from verirun.record.journal import load_record

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def need_chromium():
    if CHROMIUM is None:
        if os.environ.get("CI"):
            pytest.fail(
                "chromium is not installed; .ci/run installs it from the distribution's packages"
            )
        pytest.skip("chromium is not installed (apt-get install chromium)")


class TestInBrowser:
    def test_renders_in_headless_chromium_without_console_errors(self, demo_run_dir, tmp_path):
        """The demo certificate loads in headless Chromium with no console message at all, and a
        screenshot of it is taken."""
        need_chromium()
        page = tmp_path / "certificate.html"
        page.write_text(render_html(load_record(demo_run_dir)), encoding="utf-8")
        shot = tmp_path / "certificate.png"
        result = subprocess.run(
            [
                CHROMIUM,
                *FLAGS,
                f"--user-data-dir={tmp_path / 'profile'}",
                "--enable-logging=stderr",
                "--v=0",
                "--window-size=1000,3000",
                f"--screenshot={shot}",
                page.as_uri(),
            ],
            capture_output=True,
            text=True,
            timeout=120,
        )
        console = [line for line in result.stderr.splitlines() if ":CONSOLE" in line]
        assert console == []
        assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 20_000


def hundred_point_run(demo_run_dir: Path, tmp_path: Path) -> dict:
    """A record of 100 points: the demo procedure's 20 points, five times over in five ranges
    each, made by a real run of a generated procedure."""
    from verirun.cli import main

    root = Path(__file__).resolve().parents[2]
    ranges, rows = [], ["range,at,reading"]
    for r in range(10):
        points = [round(0.5 + 0.5 * i, 2) for i in range(10)]  # 0.5 V .. 5 V
        ranges.append(f"""  - id: dcv-{r}
    function: dc-voltage
    full-scale: 5 V
    accuracy: {{percent-of-full-scale: 2}}
    resolution: 0.025 V
    points: [{", ".join(f"{p} V" for p in points)}]""")
        rows += [
            f"dcv-{r},{p} V,{p + (0.15 if (r + i) % 17 == 0 else 0.02):.3f}"
            for i, p in enumerate(points)
        ]
    proc = tmp_path / "p100.yaml"
    proc.write_text(
        "format: 1\nprocedure: {id: P-100, title: Hundred points, revision: 1}\n"
        "meter: {kind: panel meter}\nranges:\n" + "\n".join(ranges) + "\n"
    )
    csv = tmp_path / "p100.csv"
    csv.write_text("\n".join(rows) + "\n")
    assert (
        main(
            simulated_run_args(
                tmp_path,
                proc,
                root / "verirun" / "demo" / "bench-sim.yaml",
                csv,
                serial="P100",
                reports="rep",
            )
        )
        == 0
    )
    (run,) = (tmp_path / "runs").iterdir()
    record = load_record(run)
    assert len(record.points) == 100
    return record


class TestOnPaper:
    def test_pdf_of_a_hundred_point_run_pages_and_rows(self, demo_run_dir, tmp_path):
        """The PDF of a 100-point run has 'Page n of N' and the certificate number on every page,
        repeats table headers, and splits no table row across pages."""
        weasyprint = pytest.importorskip("weasyprint")
        from pypdf import PdfReader

        record = hundred_point_run(demo_run_dir, tmp_path)
        html = render_html(record)
        document = weasyprint.HTML(string=html).render()
        pages = len(document.pages)
        assert 3 <= pages <= 12

        # No row split: every table row's box lies on exactly one page.
        body: dict[int, set[int]] = {}  # row -> pages it is drawn on
        table_of: dict[int, int] = {}  # body row -> its table
        header_pages: dict[int, set[int]] = {}  # table -> pages its header row is drawn on

        def walk(box, page_number, table):
            tag = getattr(box, "element_tag", None)
            if tag == "table":
                table = id(box.element)
            if tag == "tr":
                if any(str(cell.tag).endswith("th") for cell in box.element):
                    header_pages.setdefault(table, set()).add(page_number)
                else:
                    body.setdefault(id(box.element), set()).add(page_number)
                    table_of[id(box.element)] = table
            for child in getattr(box, "children", []) or []:
                walk(child, page_number, table)

        for number, page in enumerate(document.pages):
            walk(page._page_box, number, None)
        assert len(body) == 100 and len(header_pages) == 10
        assert all(len(on) == 1 for on in body.values()), "a table row is split across pages"
        # Every page that shows rows of a table shows that table's header row too (repeated).
        for row, on in body.items():
            assert on <= header_pages[table_of[row]], (
                "a table continues on a page without its header"
            )

        pdf = write_pdf(html, tmp_path / "p100.pdf")
        reader = PdfReader(io.BytesIO(pdf.read_bytes()))
        assert len(reader.pages) == pages
        from verirun.certificate.render import certificate_number

        number = certificate_number(record)
        for n, page in enumerate(reader.pages, start=1):
            text = page.extract_text()
            assert f"Page {n} of {pages}" in text
            assert number in text


class TestPaperSize:
    @pytest.mark.parametrize(
        "paper, size_pt", [("A4", (595.28, 841.89)), ("letter", (612.0, 792.0))]
    )
    def test_lab_profile_chooses_a4_or_letter(self, demo_run_dir, paper, size_pt):
        """The lab profile's paper sets the printed page: A4 is 210 × 297 mm (ISO 216), Letter
        8.5 × 11 in (ANSI/ASME Y14.1), in PostScript points of 1/72 in."""
        weasyprint = pytest.importorskip("weasyprint")
        record = load_record(demo_run_dir)
        record = record.model_copy(update={"lab": record.lab.model_copy(update={"paper": paper})})
        page = weasyprint.HTML(string=render_html(record)).render().pages[0]
        width_pt, height_pt = page.width * 0.75, page.height * 0.75  # CSS px (1/96 in) to pt
        assert (round(width_pt, 1), round(height_pt, 1)) == (
            round(size_pt[0], 1),
            round(size_pt[1], 1),
        )
