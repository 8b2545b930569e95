"""The register's part in closing a run: number it, store it, or keep it for later.

When a register is named, a run that closes complete takes its certificate number from the
register (recorded in its journal as a ``certificate-number`` document, so the record and every
certificate rendered from it carry it), and every closed record is stored whole. When the
register cannot be reached, the run folder keeps an outbox file saying so; ``verirun register
sync`` sends it later. Nothing is lost (the run folder holds everything) and nothing is doubled
(storing is idempotent on the run's uid and journal length, the number on the run's uid).
"""

from __future__ import annotations

import json
from pathlib import Path

from verirun.errors import RecordError
from verirun.record.build import close_record
from verirun.record.documents import Record, compose
from verirun.record.journal import JOURNAL_NAME, Journal

#: The file in a run folder that says its latest closing is not yet in the register.
OUTBOX_NAME = "register-outbox.json"
#: The journal document recording the certificate number the register gave the run.
NUMBER_KIND = "certificate-number"


def needs_number(record: Record) -> bool:
    """True when ``record`` is of a complete run that has no number from a register yet (a dry
    run is never given one: its number is its own, outside the lab's sequence)."""
    return (
        record.run.status == "complete"
        and not record.run.certificate_number
        and not record.bench.simulated
    )


def after_close(run_dir: Path, record: Record | None, *, warn=None) -> tuple[Record | None, bool]:
    """Number and store a just-closed run in the named register (if any); return the record
    (with its number) and whether its certificate may be issued now.

    With no register named, ``record`` is returned as it is; else as the register numbered it.
    When the register cannot be reached, the run is kept in the outbox and ``warn`` is told; a
    run still waiting for its certificate number may not be issued until it is synced.
    """
    from verirun.register.config import named

    name = named()
    if name is None or record is None:
        return record, True
    from verirun.register.db import RegisterError, open_register

    try:
        return file_run(open_register(name), Path(run_dir), record), True
    except RegisterError as exc:
        keep(Path(run_dir), record, str(exc))
        if warn is not None:
            waiting = needs_number(record)
            warn(
                f"the register could not take this run ({exc});"
                f" it is kept in {Path(run_dir) / OUTBOX_NAME}"
                " and sent by 'verirun register sync'"
                + (
                    "; its certificate waits for the number the register gives it"
                    if waiting
                    else ""
                )
            )
        return record, not needs_number(record)
    except BaseException:  # a signal or a bug part-way: the run still waits to be sent
        keep(Path(run_dir), record, "interrupted while sending it to the register")
        raise


def file_run(register, run_dir: Path, record: Record) -> Record:
    """Give a complete run its certificate number (once) and store its record; return the record.

    Raises
    ------
    RegisterUnreachable
        If the register cannot be reached; the run folder is left as it was, or with its
        number recorded (the number is the run's, so sending again gives the same).
    """
    from verirun.clock import SystemClock, iso
    from verirun.register.store import allocate_number, store_record

    if needs_number(record):
        number = allocate_number(register, record)
        with Journal(run_dir / JOURNAL_NAME) as journal:
            journal.append(
                compose(
                    NUMBER_KIND,
                    time=iso(SystemClock().now()),
                    number=number,
                    register_url=register.name,
                )
            )
        record = close_record(run_dir)
    store_record(register, record, run_dir.name)
    (run_dir / OUTBOX_NAME).unlink(missing_ok=True)
    return record


def keep(run_dir: Path, record: Record, reason: str) -> Path:
    """Write the outbox file of a run whose closing the register did not take (whole: temporary,
    fsync, rename, never through a symbolic link)."""
    from verirun import storage
    from verirun.clock import SystemClock, iso

    path = run_dir / OUTBOX_NAME
    storage.write_atomic(
        path,
        [
            json.dumps(
                {
                    "uid": record.run.uid,
                    "revision": record.run.revision,
                    "documents": record.run.documents,
                    "reason": reason,
                    "kept": iso(SystemClock().now()),
                },
                ensure_ascii=False,
            )
            + "\n"
        ],
    )
    return path


def waiting(runs_dir: Path) -> list[Path]:
    """The run folders under ``runs_dir`` (or ``runs_dir`` itself) with an outbox file."""
    runs_dir = Path(runs_dir)
    if (runs_dir / OUTBOX_NAME).exists():
        return [runs_dir]
    if not runs_dir.is_dir():
        return []
    return sorted(p.parent for p in runs_dir.glob(f"*/{OUTBOX_NAME}"))


def sync(
    register, runs_dir: Path, *, busy: list | None = None
) -> list[tuple[Path, str | None, str | None]]:
    """Send every run waiting in an outbox under ``runs_dir``: (folder, certificate number,
    problem).

    Each run is sent holding its folder's writer lock (as a run, resume or amend writing it
    would), so two syncs at once, or a sync and an amend, never both append its number: a run
    whose lock another process holds is left to it (its folder is added to ``busy``), and a run
    whose outbox is gone once the lock is held was sent meanwhile. Each run is verified first (a
    run that does not verify stays in the outbox, reported), then numbered if it still needs its
    number, and stored with every earlier revision it keeps.
    """
    from verirun.errors import BusyError
    from verirun.locks import run_lock
    from verirun.register.db import RegisterUnreachable

    results = []
    for folder in waiting(runs_dir):
        try:
            with run_lock(folder):
                if not (folder / OUTBOX_NAME).exists():
                    continue  # sent by another process while this one waited for the folder
                results.append(_send(register, folder))
        except BusyError as exc:
            if busy is not None:
                busy.append(folder)
            results.append((folder, None, str(exc)))
        except RegisterUnreachable:
            raise
    return results


def _send(register, folder: Path) -> tuple[Path, str | None, str | None]:
    """Send one run waiting in its outbox (the caller holds the folder's lock)."""
    from verirun.certificate.render import certificate_number
    from verirun.record.verify import verified_record
    from verirun.register.rebuild import index_folder

    try:
        record = verified_record(folder)
        problems = index_folder(register, folder, current=False)  # earlier revisions first
        record = file_run(register, folder, record)
    except RecordError as exc:
        return folder, None, str(exc)
    return folder, certificate_number(record), "\n".join(problems) or None


def withheld(folder: Path) -> str | None:
    """Why the certificate of the run in ``folder`` must wait (``None``: it need not): a run
    closed complete while the register was out of reach has no certificate number yet."""
    folder = Path(folder)
    if not (folder / OUTBOX_NAME).exists():
        return None
    from verirun.record.journal import load_record

    try:
        record = load_record(folder)
    except RecordError:
        return None  # certify reports what is wrong with it
    if not needs_number(record):
        return None
    return (
        f"{folder}: this run waits for its certificate number from the register (it closed while"
        " the register was out of reach); send it with 'verirun register sync', then certify it"
    )
