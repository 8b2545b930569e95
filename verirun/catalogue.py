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
            from verirun.certificate.render import certificate_number

            return {"run": folder.name, "path": str(folder), "item": record["item"].get("serial"),
                    "procedure": record["procedure"]["id"], "revision": record["procedure"]["revision"],
                    "date": record["run"]["started"][:10], "verdict": record["summary"]["overall"],
                    "status": "aborted" if status in ("failed",) else status,
                    "uid": record["run"]["uid"], "record_revision": record["run"].get("revision", 1),
                    "certificate": certificate_number(record) if status == "complete" else None,
                    "customer": (record.get("customer") or {}).get("name"),
                    "simulated": bool(record["bench"].get("simulated")),
                    "as_found_run": (record.get("as_found") or {}).get("run"), "as_left_run": None,
                    "certificate_state": _certificate_state(record)}
        if journal_path.exists():
            docs = read_journal(journal_path).documents
            if not docs or docs[0].get("kind") != "start":
                return None
            start = docs[0]
            return {"run": folder.name, "path": str(folder), "item": start["item"].get("serial"),
                    "procedure": start["procedure"]["id"], "revision": start["procedure"]["revision"],
                    "date": start["time"][:10], "verdict": "none", "status": "resumable",
                    "uid": start["uid"], "record_revision": 1, "certificate": None,
                    "customer": (start.get("customer") or {}).get("name"),
                    "simulated": bool(start["bench"].get("simulated")),
                    "as_found_run": (start.get("as_found") or {}).get("run"), "as_left_run": None,
                    "certificate_state": "none"}
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return {"run": folder.name, "path": str(folder), "item": None, "procedure": "?", "revision": "?",
                "date": "?", "verdict": "?", "status": "unreadable", "uid": None, "record_revision": None,
                "certificate": None, "customer": None, "simulated": None, "as_found_run": None,
                "as_left_run": None, "certificate_state": None}
    return None


def _certificate_state(record: dict) -> str:
    """``dry run``, ``draft`` or ``issued`` (``issued rN`` after an amendment) for a run's record."""
    if record["bench"].get("simulated"):
        return "dry run"
    revision = record["run"].get("revision", 1)
    if any(i.get("revision") == revision for i in record.get("issues", [])):
        return "issued" if revision == 1 else f"issued r{revision}"
    return "draft" if record["run"]["status"] == "complete" else "none"


def list_runs(root: str | Path, *, item: str | None = None, since: str | None = None,
              until: str | None = None) -> list[dict]:
    """Summaries of the runs under ``root``, oldest first, filtered by item serial (any case)
    and dates; an as-found run names the as-left run that followed it, and the other way round."""
    root = Path(root)
    if not root.is_dir():
        return []
    rows, every = [], []
    wanted = item.strip().casefold() if item is not None else None
    for folder in sorted(p for p in root.iterdir() if p.is_dir()):
        row = summary(folder)
        if row is None:
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
