"""Runs stored by an earlier version of verirun stay valid.

``tests/data/stored-runs/`` holds two sets of run folders: ``format1-*`` written by verirun 0.1.0
(journal format 1, record format 1, certificate template 1) and ``format3-*`` written by the
verirun that introduced journal format 3, record format 3 and certificate template 3. Each set
has one run per decision rule, a resumed run, an amended run with its earlier revision, an
as-left run after an adjustment, and a run with a skipped point and an operator note; each run
holds the certificate(s) that version rendered, under ``certificate/``. Whatever changes inside
verirun, these runs must still verify, their journals must still give the same result at every
step, and while the record format and the certificate template keep the versions a set was
written in, closing its journal again gives the record's bytes and rendering it again gives the
certificate's bytes.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from verirun.certificate.render import (
    DRY_RUN_PREFIX,
    TEMPLATE_VERSION,
    certificate_path,
    render_html,
)
from verirun.cli import main
from verirun.record.build import build_record, build_record_document
from verirun.record.journal import RECORD_FORMAT, read_journal, write_record
from verirun.record.verify import verified_record

STORED = Path(__file__).resolve().parents[1] / "data" / "stored-runs"
RUNS = sorted(path for path in STORED.iterdir() if (path / "journal.jsonl").is_file())
#: The record format and certificate template each set was written with.
WRITTEN_WITH = {"format1": (1, "1"), "format3": (3, "3")}
KINDS = ["amended", "asleft", "guarded", "non-binary", "resumed", "risk", "simple", "skipped"]


def _set(run: Path) -> str:
    return run.name.split("-", 1)[0]


#: The stored runs written in the record format verirun writes today.
CURRENT = [run for run in RUNS if WRITTEN_WITH[_set(run)][0] == RECORD_FORMAT]


def _steps(record: dict) -> list[tuple]:
    """What a step measured and how it was judged, as the record gives it."""
    return [
        (row["index"], row["range"], row["nominal"], row["typed"], row["reading"], row["verdict"])
        for row in record["points"]
    ]


def test_every_kind_of_stored_run_is_present():
    """Each stored set covers every rule, a resume, an amendment, an as-left run and a skip with
    a note."""
    assert [path.name for path in RUNS] == [
        f"{name}-{kind}" for name in sorted(WRITTEN_WITH) for kind in KINDS
    ]
    # A change of record format comes with a set written in the format before it (regenerate.py),
    # so that the bytes of the records and certificates of the format being left are checked.
    assert CURRENT, f"no stored set is in record format {RECORD_FORMAT}"


@pytest.mark.parametrize("run", CURRENT, ids=lambda path: path.name)
def test_journal_closes_into_the_stored_record_bytes(run, tmp_path):
    """While the record format is the one the run was written in, closing its journal again
    writes the stored record, byte for byte (and an amended run's earlier revision too)."""
    documents = read_journal(run / "journal.jsonl").documents
    for path in sorted(run.glob("record*.json")):
        stored = json.loads(path.read_text(encoding="utf-8"))
        rebuilt = build_record(documents[: stored["run"]["documents"]])
        written = write_record(rebuilt, tmp_path / path.name)
        assert written.read_bytes() == path.read_bytes(), path.name


@pytest.mark.parametrize("run", RUNS, ids=lambda path: path.name)
class TestStoredRun:
    def test_verifies(self, run, capsys):
        """`verirun verify` accepts the stored run as it was written."""
        assert main(["verify", str(run)]) == 0
        assert "verified" in capsys.readouterr().out

    def test_journal_gives_the_stored_results(self, run):
        """Rebuilding the record from the journal gives the stored reading and verdict at every
        step."""
        stored = json.loads((run / "record.json").read_text(encoding="utf-8"))
        rebuilt = build_record_document(read_journal(run / "journal.jsonl").documents)
        assert _steps(rebuilt) == _steps(stored)
        # every count the stored summary holds is the same; later formats add counts of their own
        assert {key: rebuilt["summary"][key] for key in stored["summary"]} == stored["summary"]

    def test_certifies(self, run, tmp_path):
        """`verirun certify` renders the stored run; with the same template, to the stored bytes;
        with another, to the same verdict at every step."""
        assert main(["certify", str(run), "--reports", str(tmp_path)]) == 0
        written = certificate_path(verified_record(run), tmp_path)
        # Besides the current revision, an amended run's earlier one, marked as replaced.
        assert written.is_file()
        assert len(list(tmp_path.glob("*.html"))) == (2 if run.name.endswith("-amended") else 1)
        # Every stored run is a dry run on the simulated calibrator: since template 2 its number
        # carries the dry-run prefix in place of the lab's, and is otherwise the same.
        _, template = WRITTEN_WITH[_set(run)]
        name = written.name
        if template == "1":
            name = name.replace(f"{DRY_RUN_PREFIX}-", "THCL-", 1)
        stored = run / "certificate" / name
        assert written.name.startswith(f"{DRY_RUN_PREFIX}-")
        assert stored.is_file(), f"certificate number changed: {written.name}"
        if TEMPLATE_VERSION == template:
            assert written.read_bytes() == stored.read_bytes()
            assert render_html(verified_record(run)).encode("utf-8") == stored.read_bytes()
        else:
            verdicts = _verdicts(written.read_text(encoding="utf-8"))
            assert len(verdicts) >= 20 and verdicts == _verdicts(stored.read_text(encoding="utf-8"))


def _verdicts(html: str) -> dict:
    """Each step's verdict(s) as a certificate prints them, by pass and point key: from the
    separate as-found and as-left tables of template 1, or the side-by-side table of template 2."""
    from bs4 import BeautifulSoup

    out = {}
    for table in BeautifulSoup(html, "html.parser").select("table.results"):
        for row in table.select("tr[data-key]"):
            if table["data-pass"] == "as-found-and-as-left":
                for name in ("as-found", "as-left"):
                    out[(name, row["data-key"])] = (
                        row.select_one(f'td[data-verdict="{name}"]').get_text().split()[0]
                    )
            else:
                name = "single" if table["data-pass"] == "single" else table["data-pass"]
                out[(name, row["data-key"])] = row.select("td")[-1].get_text().split()[0]
    return out
