"""Make the register's index again from run folders, reporting every folder that does not verify.

A folder's records are checked as ``verirun verify`` checks them, against its journal: the
current ``record.json`` must be the record the whole journal closes into, and each earlier
revision kept beside it (``record.rN.json``) the record of the journal as it stood then (a
record of an earlier format in what its journal fixes and its counts, as verify allows). Only
records that verify are stored; storing is idempotent, so rebuilding twice stores nothing twice.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from verirun.errors import RecordError
from verirun.record.journal import (
    JOURNAL_NAME,
    RECORD_NAME,
    load_record,
    read_journal,
    verify_chain,
)

#: Records stored per transaction by a rebuild: one commit (and its fsync) per record would
#: be most of a rebuild's time (benchmarks/register.py).
BATCH = 200


def verified_records(folder: Path, *, current: bool = True) -> tuple[list[dict], list[str]]:
    """The records of ``folder`` that verify against its journal (earlier revisions first), and
    a line for every problem found."""
    from verirun.record.build import build_record
    from verirun.record.verify import comparable

    journal = folder / JOURNAL_NAME
    try:
        read = read_journal(journal)
    except RecordError as exc:
        return [], [str(exc)]
    problems = verify_chain(read.documents, str(journal))
    if read.torn_line is not None:
        problems.append(
            f"{journal}: the last line is cut off (an interrupted write);"
            " resume the run to recover it"
        )
    if problems or not read.documents:
        return [], problems or [f"{journal}: the journal is empty"]
    paths = sorted(folder.glob("record.r*.json"), key=lambda p: _revision_of(p.name))
    if current:
        paths.append(folder / RECORD_NAME)
    good = []
    for path in paths:
        try:
            stored = load_record(path)
            upto = (
                len(read.documents) if path.name == RECORD_NAME else int(stored["run"]["documents"])
            )
            rebuilt = build_record(read.documents[:upto], str(journal))
        except (RecordError, KeyError, TypeError, ValueError) as exc:
            problems.append(f"{path}: {exc}")
            continue
        if not isinstance(stored, dict) or not isinstance(stored.get("summary"), dict):
            problems.append(f"{path}: not a run record")
            continue
        mine, journal_s = comparable(stored, rebuilt)
        if mine != journal_s:
            keys = sorted(k for k in set(mine) | set(journal_s) if mine.get(k) != journal_s.get(k))
            problems.append(
                f"{path}: the record differs from what its journal records (in {', '.join(keys)})"
            )
        else:
            good.append(stored)
    return good, problems


def _revision_of(name: str) -> int:
    digits = name[len("record.r") : -len(".json")]
    return int(digits) if digits.isdigit() else 0


def index_folder(register, folder: Path, *, current: bool = True) -> list[str]:
    """Store every verified record of one run folder; return its problems (empty: it verifies)."""
    from verirun.register.store import store_record

    good, problems = verified_records(Path(folder), current=current)
    for record in good:
        store_record(register, record, Path(folder).name)
    return problems


@dataclass
class Rebuilt:
    """What a rebuild did: folders seen, records newly stored, and the folders that do not
    verify."""

    folders: int = 0
    stored: int = 0
    failed: dict[str, list[str]] = field(default_factory=dict)
    unnumbered: list[str] = field(default_factory=list)


def run_folders(root: Path) -> list[Path]:
    """The run folders under ``root`` (or ``root`` itself when it is one)."""
    root = Path(root)
    if (root / JOURNAL_NAME).exists():
        return [root]
    if not root.is_dir():
        raise RecordError(f"{root}: no such folder")
    return sorted(p for p in root.iterdir() if p.is_dir() and (p / JOURNAL_NAME).exists())


def rebuild(register, root: Path, *, progress=None) -> Rebuilt:
    """Index every run folder under ``root`` into ``register``."""
    from verirun.register.closing import OUTBOX_NAME
    from verirun.register.store import store_records

    out, pending = Rebuilt(), []
    for folder in run_folders(root):
        out.folders += 1
        if (folder / OUTBOX_NAME).exists():  # 'register sync' numbers and sends it
            out.unnumbered.append(str(folder))
            continue
        good, problems = verified_records(folder)
        pending.extend((record, folder.name) for record in good)
        if len(pending) >= BATCH:
            out.stored += store_records(register, pending)
            pending = []
        if problems:
            out.failed[str(folder)] = problems
        if progress is not None:
            progress()
    out.stored += store_records(register, pending)
    return out
