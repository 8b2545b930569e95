"""Render a certificate from a run record: a pure function of the record and the template.

Rendering twice gives the same bytes, so regenerating a certificate from stored data years later
is the same code path as its first rendering. Nothing here reads a clock: every date comes from
the record.
"""

from __future__ import annotations

import re
from pathlib import Path

#: Version of the certificate template; recorded in every certificate it renders.
TEMPLATE_VERSION = "1"


def certificate_number(record: dict) -> str:
    """The certificate's unique number: the one the lab register gave the run, else lab prefix,
    calibration date and the run's uid; a later revision adds ``-R<n>``."""
    number = record["run"].get("certificate_number")
    if number is None:
        prefix = record["lab"].get("certificate_prefix", "CERT")
        day = record["run"]["started"][:10].replace("-", "")
        number = f"{prefix}-{day}-{record['run']['uid'][:8].upper()}"
    revision = record["run"].get("revision", 1)
    return number if revision == 1 else f"{number}-R{revision}"


def previous_number(record: dict) -> str | None:
    """The number of the certificate this one replaces (``None`` for a first issue)."""
    revision = record["run"].get("revision", 1)
    if revision == 1:
        return None
    earlier = {**record, "run": {**record["run"], "revision": revision - 1}}
    return certificate_number(earlier)


def safe_file_name(text: str) -> str:
    """A file name made from user data that cannot leave the folder it is written in."""
    name = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._") or "certificate"
    return name[:120]


def _environment():
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    from verirun.units import format_quantity

    env = Environment(loader=PackageLoader("verirun.certificate", "templates"),
                      autoescape=select_autoescape(["html", "j2"], default=True),
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                      keep_trailing_newline=True)
    env.filters["q"] = lambda value, unit, digits=6: format_quantity(value, unit, digits)
    return env


_ENV = None


def render_html(record: dict) -> str:
    """The certificate of ``record`` as HTML text."""
    return "".join(_generate(record))


def _generate(record: dict):
    """The certificate of ``record`` as a stream of text pieces (for writing without holding it)."""
    global _ENV
    if _ENV is None:
        _ENV = _environment()
    template = _ENV.get_template("certificate.html.j2")
    as_found = record.get("as_found")
    return template.generate(record=record, ranges=_ranges(record["ranges"], record["points"]),
                             as_found_ranges=_ranges(record["ranges"], as_found["points"]) if as_found else [],
                             number=certificate_number(record), replaces=previous_number(record),
                             template_version=TEMPLATE_VERSION)


def _ranges(ranges: list[dict], points: list[dict]) -> list[dict]:
    """Each range of the record with its rows and its charts, in the procedure's order."""
    from markupsafe import Markup

    from verirun.certificate.charts import arc_chart, error_chart

    by_range: dict[str, list[dict]] = {}
    for row in sorted(points, key=lambda r: r["index"]):
        by_range.setdefault(row["range"], []).append(row)
    out = []
    for rng in ranges:
        rows = by_range.get(rng["id"], [])
        out.append({**rng, "rows": rows, "error_svg": Markup(error_chart(rng, rows)),
                    "arc_svg": Markup(arc_chart(rng, rows))})
    return out


def certificate_path(record: dict, reports_dir: str | Path) -> Path:
    """Where the certificate of ``record`` is written: ``reports_dir``/<certificate number>.html."""
    return Path(reports_dir) / f"{safe_file_name(certificate_number(record))}.html"


def pdf_engine():
    """The optional WeasyPrint module that writes PDFs.

    Raises
    ------
    VerirunError
        If WeasyPrint is not installed, saying how to install it.
    """
    from verirun.errors import VerirunError

    try:
        import weasyprint
    except ImportError:
        raise VerirunError("PDF output needs WeasyPrint: pip install 'verirun[pdf]' (or -e '.[pdf]')") from None
    return weasyprint


def write_pdf(html: str, path: str | Path) -> Path:
    """Write the certificate ``html`` as a PDF (needs the optional WeasyPrint).

    Raises
    ------
    VerirunError
        If WeasyPrint is not installed.
    """
    pdf_engine().HTML(string=html).write_pdf(str(path))
    return Path(path)


def write_certificate(record: dict, reports_dir: str | Path) -> Path:
    """Render ``record`` into ``reports_dir``/<certificate number>.html; return the path."""
    path = certificate_path(record, reports_dir)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".tmp")
    # Streamed piece by piece: a long run's certificate is never held whole in memory.
    with open(tmp, "w", encoding="utf-8", newline="") as fh:
        for piece in _generate(record):
            fh.write(piece)
    tmp.replace(path)
    return path
