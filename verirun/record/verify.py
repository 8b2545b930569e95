"""Is a stored run what was recorded? Check the journal's chain and the record against it.

A certificate is issued only from a verified record: the journal's documents must follow one
another by sequence number and SHA-256 chain, and the run record must be exactly the record the
journal closes into (so an edit to either shows). A record of an earlier record format holds
the figures its own version worked out; for it, everything the journal fixes, every verdict and
the summary's counts must agree.
"""

from __future__ import annotations

import glob
import re
from pathlib import Path

from verirun.errors import RecordError
from verirun.record.build import build_record_document
from verirun.record.documents import Record
from verirun.record.journal import (
    JOURNAL_NAME,
    RECORD_FORMAT,
    RECORD_NAME,
    dumps,
    line_hash,
    load_record,
    never_started,
    never_started_text,
    read_journal,
    read_record_file,
    verify_chain,
)

#: The figures of a row that verirun works out from the procedure and the reading (limits, U,
#: error, TUR, the texts as printed). A record of an earlier format holds them as the version
#: that wrote it worked them out; what its journal records, and every verdict, must still agree.
DERIVED = frozenset(
    {
        "low",
        "high",
        "half_width",
        "limits_text",
        "error",
        "error_unit",
        "percent_of_tolerance",
        "U",
        "U_spec",
        "k",
        "tur",
        "conformance",
        "accept_low",
        "accept_high",
        "U_pct",
        "accept_low_pct",
        "accept_high_pct",
        "budget",
        "reported",
        "within_tolerance",
        "interval",
    }
)


def _facts(record: dict, summary_keys) -> dict:
    """What the journal of ``record`` fixes whichever version wrote it: everything but the
    derived figures of its rows, and the summary's counts (those of ``summary_keys``)."""
    return {
        **{k: v for k, v in record.items() if k not in ("record_format", "points", "summary")},
        "points": [{k: v for k, v in row.items() if k not in DERIVED} for row in record["points"]],
        "summary": {k: record["summary"].get(k) for k in summary_keys},
    }


def comparable(stored: dict, rebuilt: dict) -> tuple[dict, dict]:
    """``stored`` and ``rebuilt`` as they must agree: whole, or for a record of an earlier format
    (its figures are its version's), what its journal fixes and its summary's counts."""
    if stored.get("record_format") == RECORD_FORMAT:
        return stored, rebuilt
    counts = [k for k in stored.get("summary", {}) if k in rebuilt["summary"]]
    return _facts(stored, counts), _facts(rebuilt, counts)


def run_folder(path: str | Path) -> Path:
    """The run folder of ``path`` (a run folder, its record or its journal).

    Raises
    ------
    RecordError
        If there is no such folder or file.
    """
    path = Path(path)
    if path.is_dir():
        return path
    if path.is_file() and path.name in (RECORD_NAME, JOURNAL_NAME):
        return path.parent
    raise RecordError(f"{path}: no such run folder")


_JOURNAL_META = re.compile(rb'<meta name="verirun-journal" content="(\d+) ([0-9a-f]{64})">')


def reaches(documents: list[dict], count, head) -> bool:
    """True when ``documents`` reach the point a record or certificate was made from: they hold
    at least ``count`` documents and the ``count``-th hashes to ``head``."""
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= len(documents):
        return False
    return line_hash(dumps(documents[count - 1])) == head


def reach_problems(folder: Path, documents: list[dict], reports: Path | None = None) -> list[str]:
    """Each record, earlier revision or certificate of the run in ``folder`` that was made from
    more of the journal than ``documents`` now holds (the journal was cut short or replaced)."""
    found = []
    numbers = []  # the register's numbers the records carry (the journal may have lost its own)
    made = sorted(folder.glob("record.r*.json"))
    if (folder / RECORD_NAME).exists():
        made.append(folder / RECORD_NAME)
    for path in made:
        try:
            run = load_record(path).run
        except RecordError as exc:
            found.append(str(exc))
            continue
        count, head = run.documents, run.journal_sha256_last
        numbers.append(run.certificate_number)
        if not reaches(documents, count, head):
            found.append(
                f"{path}: was closed from {count!r} journal documents, but the journal no longer"
                f" reaches that point (it holds {len(documents)}): it was cut short or replaced"
            )
    if reports is not None and documents and documents[0].get("kind") == "start":
        for cert in certificates_of(documents, reports, also=numbers):
            match = _JOURNAL_META.search(cert.read_bytes())
            if match and not reaches(documents, int(match.group(1)), match.group(2).decode()):
                found.append(
                    f"{cert}: this certificate was issued from {int(match.group(1))} journal"
                    f" documents, but the run's journal no longer reaches that point (it holds"
                    f" {len(documents)}): it was cut short or replaced"
                )
    return found


def certificates_of(documents: list[dict], reports: Path, also=()) -> list[Path]:
    """The certificates in ``reports`` numbered for the run whose journal is ``documents``: by
    its uid, by the number the lab register gave it (its certificate-number document), and by
    the numbers in ``also`` (those its records carry)."""
    from verirun.certificate.render import number_for, safe_file_name

    start = documents[0]
    given = [doc.get("number") for doc in documents if doc.get("kind") == "certificate-number"]
    stems = set()
    for number in [None, *given, *also]:
        if number is not None and not isinstance(number, str):
            continue
        try:
            stems.add(
                safe_file_name(
                    number_for(
                        prefix=start["lab"]["certificate_prefix"],
                        simulated=start["bench"]["simulated"],
                        started=start["time"],
                        uid=start["uid"],
                        given=number or None,
                    )
                )
            )
        except (KeyError, TypeError, AttributeError):
            continue
    if not stems or not Path(reports).is_dir():
        return []
    return sorted(
        {
            p
            for stem in stems
            for p in Path(reports).glob(f"{glob.escape(stem)}*.html")
            if p.is_file() and not p.is_symlink()
        }
    )


def problems(path: str | Path, reports: str | Path | None = None) -> list[str]:
    """Every integrity problem of the stored run at ``path`` (empty when it verifies); with
    ``reports``, its certificates there are checked against its journal as well."""
    return _checked(path, reports)[0]


def _checked(path: str | Path, reports: str | Path | None = None):
    """:func:`problems`, and the stored record as its model when there are none."""
    try:
        folder = run_folder(path)
    except RecordError as exc:
        if never_started(Path(path)):
            return [never_started_text(Path(path))], None
        return [str(exc)], None
    if never_started(folder):
        return [never_started_text(folder)], None
    journal_path = folder / JOURNAL_NAME
    try:
        read = read_journal(journal_path)
    except RecordError as exc:
        return [str(exc)], None
    found = _journal_problems(read, journal_path)
    if found:
        return found, None
    found.extend(
        reach_problems(folder, read.documents, Path(reports) if reports is not None else None)
    )
    if found:
        return found, None
    try:
        rebuilt = build_record_document(read.documents, str(journal_path))
        stored, model = read_record_file(folder / RECORD_NAME)
    except RecordError as exc:
        return [str(exc)], None
    keys = _differing(stored, rebuilt)
    if keys and stored["run"]["documents"] < len(read.documents):
        found.append(
            f"{folder / RECORD_NAME}: is older than its journal (closed from"
            f" {stored['run']['documents']} of its {len(read.documents)} documents): the run was"
            f" interrupted before its record was written again; 'verirun resume {folder}' writes it"
        )
    elif keys:
        found.append(
            f"{folder / RECORD_NAME}: the record differs from what its journal records"
            f" (in {', '.join(keys)}): it was edited, or written by another version"
        )
    return found, None if found else model


def _journal_problems(read, journal_path: Path) -> list[str]:
    """What is wrong with a journal as read: a torn last line, and every break of its chain."""
    found = []
    if read.torn_line is not None:
        found.append(
            f"{journal_path}: the last line is cut off (an interrupted write); resume the run"
            " to recover it"
        )
    found.extend(verify_chain(read.documents, str(journal_path)))
    return found


def _differing(stored: dict, rebuilt: dict) -> list[str]:
    """The parts in which a stored record and the one its journal closes into disagree, as
    :func:`comparable` makes them (none: the record is its journal's)."""
    stored, rebuilt = comparable(stored, rebuilt)
    # A key one holds and the other does not differs, even if its value is null.
    return sorted(
        k for k in set(stored) | set(rebuilt) if stored.get(k, _ABSENT) != rebuilt.get(k, _ABSENT)
    )


_ABSENT = object()


def verified_record(path: str | Path) -> Record:
    """The run record at ``path``, typed, after checking it against its journal.

    Raises
    ------
    RecordError
        Listing every integrity problem found.
    """
    found, record = _checked(path)
    if found:
        raise RecordError("\n".join(found))
    return record


def verified_records(folder: Path, *, current: bool = True) -> tuple[list[Record], list[str]]:
    """The records of ``folder`` that verify against its journal (earlier revisions first, and
    the current one unless not ``current``), and a line for every problem found: each earlier
    revision kept beside the record (``record.rN.json``) must be the record of the journal as it
    stood then, as :func:`problems` checks the current one."""
    journal = folder / JOURNAL_NAME
    try:
        read = read_journal(journal)
    except RecordError as exc:
        return [], [str(exc)]
    found = _journal_problems(read, journal)
    if found or not read.documents:
        return [], found or [f"{journal}: the journal is empty"]
    paths = sorted(folder.glob("record.r*.json"), key=lambda p: _revision_of(p.name))
    if current:
        paths.append(folder / RECORD_NAME)
    good = []
    for path in paths:
        try:
            stored, model = read_record_file(path)
            upto = len(read.documents) if path.name == RECORD_NAME else model.run.documents
            rebuilt = build_record_document(read.documents[:upto], str(journal))
        except RecordError as exc:
            found.append(f"{path}: {exc}")
            continue
        keys = _differing(stored, rebuilt)
        if keys:
            found.append(
                f"{path}: the record differs from what its journal records (in {', '.join(keys)})"
            )
        else:
            good.append(model)
    return good, found


def _revision_of(name: str) -> int:
    digits = name[len("record.r") : -len(".json")]
    return int(digits) if digits.isdigit() else 0
