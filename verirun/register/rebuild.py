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
from verirun.record.journal import JOURNAL_NAME
from verirun.record.verify import verified_records

#: Records stored per transaction by a rebuild: one commit (and its fsync) per record would
#: be most of a rebuild's time (benchmarks/register.py).
BATCH = 200


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
