"""The certificate on A4 and on Letter: no number or header wraps, nothing runs off the page,
each chart is captioned with its range and stays with its table, the footer is in the body font.

Paper sizes: A4 210 × 297 mm (ISO 216), Letter 8.5 × 11 in (ANSI/ASME Y14.1). The layout is
read from WeasyPrint's boxes, the fonts from the PDF it writes (pypdf).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from runkit import simulated_run_args

from verirun.certificate.render import render_html, write_pdf
from verirun.record.documents import Record
from verirun.record.journal import load_record

STORED = Path(__file__).resolve().parents[1] / "data" / "stored-runs"
#: The simple, guarded and non-binary rules (the widest tables: acceptance limits, long verdicts)
#: and an as-left run (as-found and as-left side by side).
RUNS = ["format1-simple", "format1-guarded", "format1-non-binary", "format1-asleft"]


def _walk(box, visit):
    visit(box)
    for child in getattr(box, "children", []) or []:
        _walk(child, visit)


def _text(element) -> str:
    return " ".join("".join(element.itertext()).split())


def layout(record: Record, paper: str):
    """The rendered pages of ``record`` on ``paper``."""
    weasyprint = pytest.importorskip("weasyprint")
    record = record.model_copy(update={"lab": record.lab.model_copy(update={"paper": paper})})
    return weasyprint.HTML(string=render_html(record)).render()


def cell_problems(document) -> tuple[list, int]:
    """Every results-table cell of a number or a header that takes more lines than it has line
    breaks, or that reaches past the page's content box; and how many cells were looked at."""
    from weasyprint.formatting_structure import boxes

    problems, seen = [], 0
    for number, page in enumerate(document.pages, start=1):
        page_box = page._page_box
        right = page_box.content_box_x() + page_box.width

        def visit(box):
            nonlocal seen
            if not isinstance(box, boxes.TableCellBox):
                return
            seen += 1
            classes = box.element.get("class", "")
            lines = []
            _walk(box, lambda b: lines.append(b) if isinstance(b, boxes.LineBox) else None)
            # Text cells that may wrap: verdicts with a reason, and notes under a row.
            if (
                len(lines) > len(box.element.findall(".//br")) + 1
                and "wraps" not in classes
                and "verdict-" not in classes
            ):
                problems.append(
                    f"page {number}: {_text(box.element)!r} wraps onto {len(lines)} lines"
                )
            if box.position_x + box.margin_width() > right + 0.5:
                problems.append(f"page {number}: {_text(box.element)!r} runs off the page")

        _walk(page_box, visit)
    return problems, seen


@pytest.fixture(scope="module")
def non_binary_as_left(tmp_path_factory) -> Path:
    """An as-left dry run under the non-binary rule: both passes' verdicts (CONDITIONAL PASS
    among them) side by side, the widest table there is."""
    from verirun.cli import main

    data = Path(__file__).resolve().parents[1] / "data"
    tmp = tmp_path_factory.mktemp("wide")
    procedure = tmp / "non-binary.yaml"
    procedure.write_text(
        (data / "qm40-procedure.yaml").read_text().replace("  rule: simple", "  rule: non-binary")
    )
    common = simulated_run_args(
        tmp,
        procedure,
        data / "bench-kestrel.yaml",
        data / "qm40-procedure-readings.csv",
        reports="rep",
    )
    assert main(common) == 0
    (found,) = (tmp / "runs").iterdir()
    assert main([*common, "--as-left-of", str(found), "--adjustment", "zero set"]) == 0
    (left,) = set((tmp / "runs").iterdir()) - {found}
    return left


@pytest.mark.parametrize("paper", ["A4", "letter"])
@pytest.mark.parametrize("run", [*RUNS, "non-binary-as-left"])
def test_no_number_or_header_wraps_and_nothing_runs_off(run, paper, request):
    """Every number and header of every results table is on one line, inside the page."""
    folder = (
        request.getfixturevalue("non_binary_as_left")
        if run == "non-binary-as-left"
        else STORED / run
    )
    problems, seen = cell_problems(layout(load_record(folder), paper))
    assert seen > 100 and problems == []


def test_the_check_finds_a_wrapped_number():
    """The check itself: a table squeezed into a narrow page does report wrapped cells."""
    record = load_record(STORED / "format1-guarded")
    head, tail = render_html(record).rsplit("</style>", 1)
    html = (
        head + "table.results th, table.results td { white-space: normal; }"
        " @page { size: 120mm 297mm; }</style>" + tail
    )
    weasyprint = pytest.importorskip("weasyprint")
    problems, _ = cell_problems(weasyprint.HTML(string=html).render())
    assert any("wraps" in p for p in problems)


@pytest.mark.parametrize("paper", ["A4", "letter"])
def test_each_chart_is_captioned_with_its_range_and_stays_with_its_table(paper):
    """Each figure's caption names its range and is on the page of its table's last row."""
    record = load_record(STORED / "format1-simple")
    document = layout(record, paper)
    last_row_page, caption_page = {}, {}
    for number, page in enumerate(document.pages):

        def visit(box):
            element = getattr(box, "element", None)
            tag = getattr(box, "element_tag", None)
            if tag == "tr" and element.get("data-key"):
                last_row_page[element.get("data-key").split("@")[0]] = number
            if tag == "figcaption":
                caption_page[_text(element).split(":")[0]] = number

        _walk(page._page_box, visit)
    ids = [rng.id for rng in record.ranges]
    assert sorted(caption_page) == sorted(f"Range {i}" for i in ids)
    for rng in ids:
        assert caption_page[f"Range {rng}"] == last_row_page[rng], (
            f"the chart of {rng} left its table"
        )


def test_the_pdf_footer_is_in_the_body_font(tmp_path):
    """Every font in the PDF is of the body's family (DejaVu Sans here): the footer's too, not
    the serif a page margin falls back to."""
    pytest.importorskip("weasyprint")
    from pypdf import PdfReader

    pdf = write_pdf(render_html(load_record(STORED / "format1-simple")), tmp_path / "c.pdf")
    fonts = set()
    for page in PdfReader(pdf).pages:
        assert "Page " in page.extract_text()
        table = page["/Resources"]["/Font"]
        fonts |= {str(table[key].get_object()["/BaseFont"]).split("+")[-1] for key in table}
    assert fonts and all(name.startswith("DejaVu-Sans") for name in fonts), fonts
