"""Is a stored run what was recorded? Check the journal's chain and the record against it.

A certificate is issued only from a verified record: the journal's documents must follow one
another by sequence number and SHA-256 chain, and the run record must be exactly the record the
journal closes into (so an edit to either shows).
"""

from __future__ import annotations

from pathlib import Path

from verirun.errors import RecordError
from verirun.record import JOURNAL_NAME, RECORD_NAME, load_record, read_journal, verify_chain
from verirun.runrecord import build_record


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


def problems(path: str | Path) -> list[str]:
    """Every integrity problem of the stored run at ``path`` (empty when it verifies)."""
    try:
        folder = run_folder(path)
    except RecordError as exc:
        return [str(exc)]
    journal_path = folder / JOURNAL_NAME
    try:
        read = read_journal(journal_path)
    except RecordError as exc:
        return [str(exc)]
    found = []
    if read.torn_line is not None:
        found.append(f"{journal_path}: the last line is cut off (an interrupted write); resume the run"
                     " to recover it")
    found.extend(verify_chain(read.documents, str(journal_path)))
    if found:
        return found
    try:
        rebuilt = build_record(read.documents, str(journal_path))
        stored = load_record(folder / RECORD_NAME)
    except RecordError as exc:
        return [str(exc)]
    if stored != rebuilt:
        keys = sorted(k for k in set(stored) | set(rebuilt) if stored.get(k) != rebuilt.get(k))
        found.append(f"{folder / RECORD_NAME}: the record differs from what its journal records"
                     f" (in {', '.join(keys)}): it was edited, or written by another version")
    return found


def verified_record(path: str | Path) -> dict:
    """The run record at ``path``, after checking it against its journal.

    Raises
    ------
    RecordError
        Listing every integrity problem found.
    """
    found = problems(path)
    if found:
        raise RecordError("\n".join(found))
    return load_record(run_folder(path) / RECORD_NAME)
