"""Stored runs made quickly for certificate tests, by re-chaining one real journal."""

from __future__ import annotations

from pathlib import Path

from verirun.record.build import build_record
from verirun.record.journal import GENESIS, dumps, line_hash, read_journal, write_record


def clone_run(source: Path, target: Path, *, uid: str, serial: str) -> Path:
    """A copy of the run at ``source`` as another run: new uid and serial, the chain rebuilt."""
    docs = read_journal(source / "journal.jsonl").documents
    target.mkdir(parents=True)
    prev = GENESIS
    lines = []
    for doc in docs:
        doc = dict(doc)
        if doc["kind"] == "start":
            doc["uid"] = uid
            doc["item"] = {**doc["item"], "serial": serial}
        doc["prev"] = prev
        line = dumps(doc)
        prev = line_hash(line)
        lines.append(line)
    (target / "journal.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    write_record(
        build_record(read_journal(target / "journal.jsonl").documents), target / "record.json"
    )
    return target
