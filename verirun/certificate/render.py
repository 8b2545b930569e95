"""Render a certificate from a run record: a pure function of the record and the template.

Rendering twice gives the same bytes, so regenerating a certificate from stored data years later
is the same code path as its first rendering. Nothing here reads a clock: every date comes from
the record.
"""

from __future__ import annotations

import errno
import os
import re
from dataclasses import dataclass
from pathlib import Path

from markupsafe import Markup

from verirun.errors import RecordError
from verirun.record.documents import (
    PointResult,
    RangeEntry,
    Record,
    Reported,
)
from verirun.text import shown

#: Version of the certificate template; recorded in every certificate it renders.
TEMPLATE_VERSION = "3"

#: The prefix of a dry run's number, in place of the lab's: a dry run is not in its sequence.
DRY_RUN_PREFIX = "DRYRUN"


def is_dry_run(record: Record) -> bool:
    """True for a run on the simulated calibrator: a dry run, never a calibration."""
    return record.bench.simulated


def certificate_number(record: Record) -> str:
    """The certificate's unique number: the one the lab register gave the run, else lab prefix
    (a dry run's own prefix, outside the lab's sequence), calibration date and the run's uid; a
    later revision adds ``-R<n>``."""
    return _numbered(record, record.run.revision)


def previous_number(record: Record) -> str | None:
    """The number of the certificate this one replaces (``None`` for a first issue)."""
    return None if record.run.revision == 1 else _numbered(record, record.run.revision - 1)


def _numbered(record: Record, revision: int) -> str:
    run = record.run
    return number_for(
        prefix=record.lab.certificate_prefix,
        simulated=record.bench.simulated,
        started=run.started,
        uid=run.uid,
        given=run.certificate_number,
        revision=revision,
    )


def number_for(
    *, prefix: str, simulated: bool, started: str, uid: str, given: str | None, revision: int = 1
) -> str:
    """The certificate number of a run of the lab whose certificates take ``prefix``, started at
    ``started`` (the time as written), with identity ``uid``: ``given`` (the register's number),
    else prefix (a dry run's own), date and uid; a revision after the first adds ``-R<n>``."""
    number = (
        given
        if given is not None
        else f"{DRY_RUN_PREFIX if simulated else prefix}-{started[:10].replace('-', '')}"
        f"-{uid[:8].upper()}"
    )
    return number if revision == 1 else f"{number}-R{revision}"


def safe_file_name(text: str) -> str:
    """A file name made from user data that cannot leave the folder it is written in."""
    name = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._") or "certificate"
    return name[:120]


def _environment():
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    from verirun.certificate.reading import spelt
    from verirun.units import format_quantity

    env = Environment(
        loader=PackageLoader("verirun.certificate", "templates"),
        autoescape=select_autoescape(["html", "j2"], default=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    from verirun.metrology.summary import label

    env.filters["q"] = lambda value, unit, digits=6: format_quantity(value, unit, digits)
    env.filters["verdict"] = label
    env.filters["css_string"] = css_string
    env.filters["spelt"] = spelt
    return env


_ENV = None


def css_string(text: str):
    """``text`` as a quoted CSS string that no text can break out of (quotes, backslashes,
    line breaks and ``<`` written as CSS escapes)."""
    from markupsafe import Markup

    escaped = "".join(
        f"\\{ord(c):x} " if c in '"\\<>&\n\r\f' or ord(c) < 32 else c for c in str(text)
    )
    return Markup(f'"{escaped}"')


def render_html(record: Record, *, replaced_by: dict | None = None) -> str:
    """The certificate of ``record`` as HTML text; ``replaced_by`` (see
    :func:`verirun.issue.earlier_revisions`) marks an earlier revision as replaced."""
    return "".join(_generate(record, replaced_by=replaced_by))


def _generate(record: Record, *, replaced_by: dict | None = None):
    """The certificate of ``record`` as a stream of text pieces (for writing without holding it)."""
    from verirun.certificate.reading import reading_context

    global _ENV
    if _ENV is None:
        _ENV = _environment()
    template = _ENV.get_template("certificate.html.j2")
    as_found = record.as_found
    rule = record.decision_rule.rule
    # No control or bidirectional-control character reaches a certificate: they are refused
    # where text comes in, and replaced here should stored data hold some.
    return map(
        shown,
        template.generate(
            record=record,
            ranges=_ranges(record.ranges, record.points),
            summary=conformity(record.points, rule),
            found_summary=conformity(as_found.points, rule) if as_found else None,
            as_found_ranges=_ranges(record.ranges, as_found.points) if as_found else [],
            number=certificate_number(record),
            replaces=previous_number(record),
            template_version=TEMPLATE_VERSION,
            **reading_context(record, replaced_by=replaced_by),
        ),
    )


def conformity(points: list[PointResult], rule: str):
    """The statement of conformity of ``points`` under the decision rule named ``rule``, worked
    out by the one summary function (so a record of an earlier format gets today's words)."""
    from verirun.metrology.summary import summarise
    from verirun.record.build import row_judged

    return summarise([row_judged(row) for row in points], rule)


@dataclass(frozen=True, slots=True)
class Printed:
    """The limits of a certificate row as printed (``None``: none to print)."""

    low: str | None
    high: str | None
    accept_low: str | None
    accept_high: str | None
    outer_low: str | None
    outer_high: str | None
    interval: str | None


@dataclass(frozen=True, slots=True)
class ResultRow:
    """A row of a certificate's results table: the record's row, and its limits as printed."""

    point: PointResult
    printed: Printed


@dataclass(frozen=True, slots=True)
class RangeResults:
    """One range of a certificate's results: the range, its rows and its charts.

    Each chart is drawn when the template reads it, not kept: a long run's charts are megabytes
    of SVG, and the certificate is written as it is rendered (one range's chart held at a time,
    not every range's at once)."""

    range: RangeEntry
    rows: tuple[ResultRow, ...]

    @property
    def error_svg(self) -> Markup:
        """The range's error chart (see :func:`~verirun.certificate.charts.error_chart`)."""
        from verirun.certificate.charts import error_chart

        return Markup(error_chart(self.range, [row.point for row in self.rows]))

    @property
    def arc_svg(self) -> Markup:
        """The range's scale chart (see :func:`~verirun.certificate.charts.arc_chart`)."""
        from verirun.certificate.charts import arc_chart

        return Markup(arc_chart(self.range, [row.point for row in self.rows]))


def printed(row: PointResult) -> Printed:
    """The limits a certificate row prints: the record's own (``reported``), or for a record
    written before rows carried them, the same formatter applied to the row's numbers as
    written: the reading as typed, each limit with the digits the printed comparison needs."""
    from verirun.metrology.exact import as_written
    from verirun.units import format_limit, row_exponent, typed_decimal

    texts = row.reported
    if isinstance(texts, Reported) and texts.low is not None:
        return Printed(
            low=texts.low,
            high=texts.high,
            accept_low=texts.accept_low,
            accept_high=texts.accept_high,
            outer_low=texts.outer_low,
            outer_high=texts.outer_high,
            interval=texts.interval,
        )
    unit = row.unit
    reading = places = None
    if row.reading is not None and row.typed:
        number, exponent = typed_decimal(row.typed, unit)
        reading, places = as_written(row.reading), max(-number.as_tuple().exponent, 0)
    else:
        exponent = row_exponent(unit, row.nominal, row.high)

    def limit(value, side: str) -> str | None:
        if value is None:
            return "∞" if side == "high" else None
        return format_limit(
            as_written(value), unit, exponent, reading=reading, side=side, places=places or 0
        )

    accepted = reading is not None and row.accept_low is not None
    return Printed(
        low=limit(row.low, "low"),
        high=limit(row.high, "high"),
        accept_low=limit(row.accept_low, "low") if accepted else None,
        accept_high=limit(row.accept_high, "high") if accepted else None,
        outer_low=None,
        outer_high=None,
        interval=None,
    )


def _ranges(ranges: list[RangeEntry], points: list[PointResult]) -> list[RangeResults]:
    """Each range of the record with its rows (and its charts), in the procedure's order."""
    by_range: dict[str, list[PointResult]] = {}
    for row in sorted(points, key=lambda r: r.index):
        by_range.setdefault(row.range, []).append(row)
    out = []
    for rng in ranges:
        rows = by_range.get(rng.id, [])
        out.append(
            RangeResults(
                range=rng,
                rows=tuple(ResultRow(point=row, printed=printed(row)) for row in rows),
            )
        )
    return out


def certificate_path(record: Record, reports_dir: str | Path) -> Path:
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
        raise VerirunError(
            "PDF output needs WeasyPrint: pip install 'verirun[pdf]' (or -e '.[pdf]')"
        ) from None
    return weasyprint


def write_pdf(html: str, path: str | Path) -> Path:
    """Write the certificate ``html`` as a PDF (needs the optional WeasyPrint).

    Raises
    ------
    VerirunError
        If WeasyPrint is not installed.
    """
    from verirun import storage

    # Rendered in memory, then written whole and never through a link, as every report file.
    return storage.write_atomic(path, [pdf_engine().HTML(string=html).write_pdf()])


def write_certificate(
    record: Record,
    reports_dir: str | Path,
    *,
    replaced_by: dict | None = None,
    earlier: tuple[bytes, ...] = (),
) -> Path:
    """Render ``record`` into ``reports_dir``/<certificate number>.html; return the path.

    ``replaced_by`` (see :func:`verirun.issue.earlier_revisions`) marks an earlier revision as
    replaced. A certificate once written is a document of record: it is never replaced by a
    different one of the same number (see :func:`keep_issued`), save one of ``earlier`` (see
    :func:`verirun.issue.earlier_states`): the same record's certificate before it moved on, a
    draft now issued or a revision now marked replaced.

    Raises
    ------
    RecordError
        If a different certificate of that number is there already.
    StorageError
        If it cannot be written (nothing is left half-written).
    """
    from verirun import storage

    path = certificate_path(record, reports_dir)
    storage.make_folder(path.parent)
    if path.is_symlink():
        raise storage.storage_error(OSError(errno.ELOOP, "is a symbolic link", str(path)), path)
    if not os.path.lexists(path):
        # Streamed piece by piece: a long run's certificate is never held whole in memory.
        return storage.write_atomic(path, _generate(record, replaced_by=replaced_by))
    html = render_html(record, replaced_by=replaced_by).encode(
        "utf-8"
    )  # one is there: compared whole
    if keep_issued(path, html, earlier=earlier) == "same":
        return path
    storage.write_atomic(path, [html])
    return path


_VERSION_META = re.compile(rb'<meta name="verirun-template" content="([^"]*)">')


def keep_issued(path: Path, html: bytes, *, earlier: tuple[bytes, ...] = ()) -> str:
    """Whether ``html`` may be written at ``path``: ``"new"`` (nothing there), ``"same"`` (the same
    bytes are there), ``"moved"``: the certificate there was rendered with another template
    version, and is kept beside it as ``<name>.t<version>.html`` first, or ``"replaced"``: the
    certificate there is one of ``earlier`` (see :func:`verirun.issue.earlier_states`), the same
    record's certificate before it was issued or marked replaced.

    Raises
    ------
    RecordError
        If a different certificate rendered with this template version is there: the record
        changed under an issued number (a journal cut short and resumed, or an edit).
    """
    from verirun import storage

    try:
        old = path.read_bytes()
    except FileNotFoundError:
        return "new"
    except OSError as exc:
        raise storage.storage_error(exc, path) from None
    if old == html:
        return "same"
    if old in earlier:
        return "replaced"
    match = _VERSION_META.search(old)
    was = match.group(1).decode("ascii", "replace") if match else "unknown"
    if was == TEMPLATE_VERSION:
        raise RecordError(
            f"{path}: a different certificate with this number was issued already; it is"
            " not overwritten (the run's record is not the one it was issued from: check"
            " the run with 'verirun verify')"
        )
    kept = path.with_name(f"{path.stem}.t{safe_file_name(was)}{path.suffix}")
    if not kept.exists():
        storage.write_new(kept, old)
    return "moved"
