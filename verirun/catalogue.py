"""The stored runs of a folder, one summary line each, for finding a run."""

from __future__ import annotations

import json
from pathlib import Path

from verirun.record import JOURNAL_NAME, RECORD_NAME, read_journal


def summary(folder: Path) -> dict | None:
    """One run's summary: item, procedure, date, overall verdict and status (``None``: not a run).

    Status is ``complete``; ``aborted`` (stopped on purpose or by a fault, resumable); or
    ``resumable`` (interrupted with no stop written: a crash or power loss).
    """
    record_path, journal_path = folder / RECORD_NAME, folder / JOURNAL_NAME
    try:
        if record_path.exists():
            record = json.loads(record_path.read_text(encoding="utf-8"))
            status = record["run"]["status"]
            journal_docs = None
            if journal_path.exists():
                # A record left behind by a crash is older than its journal.
                journal_docs = read_journal(journal_path).documents
                if len(journal_docs) != record["run"].get("documents"):
                    status = "resumable"
            return {"run": folder.name, "path": str(folder), "item": record["item"].get("serial"),
                    "procedure": record["procedure"]["id"], "revision": record["procedure"]["revision"],
                    "date": record["run"]["started"][:10], "verdict": record["summary"]["overall"],
                    "status": "aborted" if status in ("failed",) else status}
        if journal_path.exists():
            docs = read_journal(journal_path).documents
            if not docs or docs[0].get("kind") != "start":
                return None
            start = docs[0]
            return {"run": folder.name, "path": str(folder), "item": start["item"].get("serial"),
                    "procedure": start["procedure"]["id"], "revision": start["procedure"]["revision"],
                    "date": start["time"][:10], "verdict": "none", "status": "resumable"}
    except (OSError, ValueError, KeyError, TypeError):
        return {"run": folder.name, "path": str(folder), "item": None, "procedure": "?", "revision": "?",
                "date": "?", "verdict": "?", "status": "unreadable"}
    return None


def list_runs(root: str | Path, *, item: str | None = None, since: str | None = None,
              until: str | None = None) -> list[dict]:
    """Summaries of the runs under ``root``, oldest first, filtered by item serial and dates."""
    root = Path(root)
    if not root.is_dir():
        return []
    rows = []
    for folder in sorted(p for p in root.iterdir() if p.is_dir()):
        row = summary(folder)
        if row is None:
            continue
        if item is not None and row["item"] != item:
            continue
        if since is not None and row["date"] < since:
            continue
        if until is not None and row["date"] > until:
            continue
        rows.append(row)
    return sorted(rows, key=lambda r: (r["date"], r["run"]))
