"""The stored runs of a folder, one summary line each, for finding a run."""

from __future__ import annotations

from pathlib import Path

from verirun.errors import RecordError
from verirun.record.documents import Record
from verirun.record.journal import (
    JOURNAL_NAME,
    RECORD_NAME,
    load_record,
    never_started,
    never_started_text,
    read_journal,
)


def summary(folder: Path) -> dict | None:
    """One run's summary: item, procedure, date, overall verdict and status (``None``: not a run).

    Status is ``complete``; ``aborted`` (stopped on purpose or by a fault, resumable); or
    ``resumable`` (interrupted with no stop written: a crash or power loss). A folder whose files
    cannot be read as a run's gives ``status`` ``unreadable`` and the ``problem``.
    """
    record_path, journal_path = folder / RECORD_NAME, folder / JOURNAL_NAME
    try:
        if record_path.exists():
            record = load_record(record_path)
            run = record.run
            status = run.status
            if journal_path.exists():
                # A record left behind by a crash is older than its journal.
                journal_docs = read_journal(journal_path).documents
                if len(journal_docs) != run.documents:
                    status = "resumable"
            from verirun.certificate.render import certificate_number

            row = {
                "run": folder.name,
                "path": str(folder),
                "item": record.item.serial,
                "procedure": record.procedure.id,
                "revision": record.procedure.revision,
                "date": run.started[:10],
                "verdict": record.summary.overall,
                "status": "aborted" if status in ("failed",) else status,
                "uid": run.uid,
                "record_revision": run.revision,
                "certificate": certificate_number(record) if status == "complete" else None,
                "customer": record.customer.name,
                "simulated": record.bench.simulated,
                "as_found_run": record.as_found.run if record.as_found is not None else None,
                "as_left_run": None,
                "certificate_state": _certificate_state(record),
            }
        elif journal_path.exists():
            docs = read_journal(journal_path).documents
            if not docs or docs[0].get("kind") != "start":
                if never_started(folder):
                    raise RecordError(never_started_text(folder))
                raise RecordError(
                    f"{folder}: no run was journaled here (it stopped before it started);"
                    " there is nothing to resume, and the folder can be removed"
                )
            start = docs[0]
            row = {
                "run": folder.name,
                "path": str(folder),
                "item": start["item"].get("serial"),
                "procedure": start["procedure"]["id"],
                "revision": start["procedure"]["revision"],
                "date": start["time"][:10],
                "verdict": "none",
                "status": "resumable",
                "uid": start["uid"],
                "record_revision": 1,
                "certificate": None,
                "customer": (start.get("customer") or {}).get("name"),
                "simulated": bool(start["bench"].get("simulated")),
                "as_found_run": (start.get("as_found") or {}).get("run"),
                "as_left_run": None,
                "certificate_state": "none",
            }
        else:
            return None
        _check_row(row)
        return row
    except RecordError as exc:
        problem = str(exc)
    except (
        OSError,
        ValueError,
        KeyError,
        TypeError,
        AttributeError,
        IndexError,
        RecursionError,
    ) as exc:
        problem = f"{folder}: not a run verirun wrote ({type(exc).__name__}: {exc})"
    return {
        "run": folder.name,
        "path": str(folder),
        "item": None,
        "procedure": "?",
        "revision": "?",
        "date": "?",
        "verdict": "?",
        "status": "unreadable",
        "uid": None,
        "record_revision": None,
        "certificate": None,
        "customer": None,
        "simulated": None,
        "as_found_run": None,
        "as_left_run": None,
        "certificate_state": None,
        "problem": problem,
    }


#: The fields of a summary that may be nothing; every other one but these two is text.
_MAY_BE_NONE = {"item", "certificate", "customer", "as_found_run", "as_left_run"}


def _check_row(row: dict) -> None:
    """Every field of a summary has its type: a crafted file cannot put a number, a list or a
    mapping where the listing prints text."""
    for name, value in row.items():
        if name == "record_revision":
            ok = isinstance(value, int) and not isinstance(value, bool)
        elif name == "simulated":
            ok = isinstance(value, bool)
        elif name == "revision" and isinstance(value, int) and not isinstance(value, bool):
            row[name], ok = str(value), True
        else:
            ok = isinstance(value, str) or (value is None and name in _MAY_BE_NONE)
        if not ok:
            raise TypeError(f"{name} is {type(value).__name__}, not what a run's summary holds")


def _certificate_state(record: Record) -> str:
    """``dry run``, ``draft`` or ``issued`` (``issued rN`` after an amendment) for a run's
    record."""
    if record.bench.simulated:
        return "dry run"
    from verirun.issue import issued

    revision = record.run.revision
    if issued(record) is not None:
        return "issued" if revision == 1 else f"issued r{revision}"
    return "draft" if record.run.status == "complete" else "none"


def list_runs(
    root: str | Path, *, item: str | None = None, since: str | None = None, until: str | None = None
) -> list[dict]:
    """Summaries of the runs under ``root``, oldest first, filtered by item serial (any case)
    and dates; an as-found run names the as-left run that followed it, and the other way round.
    A folder that cannot be read as a run is listed with status ``unreadable`` and its problem
    (it matches no item or date filter)."""
    root = Path(root)
    if not root.is_dir():
        return []
    rows, every = [], []
    wanted = item.strip().casefold() if item is not None else None
    for folder in sorted(p for p in root.iterdir() if p.is_dir()):
        row = summary(folder)
        if row is None:
            continue
        if row["status"] == "unreadable":
            rows.append(row)
            continue
        every.append(row)
        if wanted is not None and (row["item"] or "").strip().casefold() != wanted:
            continue
        if since is not None and row["date"] < since:
            continue
        if until is not None and row["date"] > until:
            continue
        rows.append(row)
    folder_of = {row["uid"]: row["run"] for row in every if row["uid"]}
    left_of = {row["as_found_run"]: row["run"] for row in every if row["as_found_run"]}
    for row in rows:
        if row["as_found_run"]:
            row["as_found_run"] = folder_of.get(row["as_found_run"], row["as_found_run"])
        row["as_left_run"] = left_of.get(row["uid"])
    return sorted(rows, key=lambda r: (r["date"], r["run"]))
