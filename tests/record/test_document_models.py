"""A journal read back as typed documents, and new documents composed in one place.

The models :func:`verirun.record.journal.read_journal` keeps are the documents of the lines, so
what is read by attribute is what the journal says; :func:`verirun.record.documents.compose`
makes a document with exactly the keys it is given, validated against its kind's model.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from verirun.record.documents import (
    Environment,
    Issue,
    Observation,
    Renewal,
    Start,
    as_journaled,
    compose,
)
from verirun.record.journal import (
    Journal,
    confirmed_steps,
    dumps,
    latest_environment,
    latest_time,
    read_journal,
    read_start,
)

STORED = Path(__file__).resolve().parents[1] / "data" / "stored-runs"
JOURNALS = sorted(STORED.glob("*/journal.jsonl"))
TIME = "2026-01-05T10:00:00Z"
SHA = "ab" * 32


def _observation(index: int, **change) -> dict:
    return {
        "kind": "observation",
        "time": TIME,
        "point": f"dcv-10@{index}V",
        "index": index,
        "range": "dcv-10",
        "function": "dc-voltage",
        "applied": {"value": float(index), "frequency": None},
        "typed": str(index),
        "reading": float(index),
        **change,
    }


class TestReadBack:
    @pytest.mark.parametrize("path", JOURNALS, ids=lambda p: p.parent.name)
    def test_the_models_are_the_lines(self, path):
        """Each stored run's models, written back as journaled, are its lines key for key
        and value for value (so nothing is read by attribute that the line does not say)."""
        read = read_journal(path)
        assert len(read.models) == len(read.documents) > 2
        assert [dumps(as_journaled(model)) for model in read.models] == [
            dumps(doc) for doc in read.documents
        ]
        assert read.start is read.models[0] and isinstance(read.start, Start)

    def test_the_models_are_frozen(self):
        start = read_journal(JOURNALS[0]).start
        with pytest.raises(ValueError):
            start.operator = "someone else"

    def test_a_journal_not_beginning_with_a_start_has_none(self, tmp_path):
        with Journal(tmp_path / "journal.jsonl") as journal:
            journal.append(_observation(2))
        read = read_journal(tmp_path / "journal.jsonl")
        assert read.start is None and isinstance(read.models[0], Observation)
        assert read_start(tmp_path / "journal.jsonl") is None

    def test_read_start_reads_the_first_line_alone(self, tmp_path):
        """The start of a stored run, as the whole read gives it; a later line that does not
        parse is not read (an as-left run is looked for among many folders)."""
        journal = tmp_path / "journal.jsonl"
        shutil.copyfile(STORED / "format1-asleft" / "journal.jsonl", journal)
        whole = read_journal(journal).start
        with open(journal, "a", encoding="utf-8") as fh:
            fh.write("not a document\n")
        assert read_start(journal) == whole and whole.as_found is not None
        assert read_start(tmp_path / "missing.jsonl") is None


class TestQuestions:
    def test_latest_time(self):
        """ISO 8601 UTC text sorts as time does (common practice, no source)."""
        docs = [
            Observation(seq=0, prev=SHA, **_observation(1, time="2026-01-05T10:00:02Z")),
            Observation(seq=1, prev=SHA, **_observation(2, time="2026-01-05T10:00:01Z")),
        ]
        assert latest_time(docs) == "2026-01-05T10:00:02Z"
        assert latest_time([]) is None

    def test_confirmed_steps_of_a_stored_run_with_a_skip(self):
        """format1-skipped has a step skipped: skipped steps are confirmed entries too."""
        read = read_journal(STORED / "format1-skipped" / "journal.jsonl")
        entries = {d["index"] for d in read.documents if d["kind"] in ("observation", "skip")}
        assert confirmed_steps(read.models) == frozenset(entries) and entries

    def test_latest_environment_is_the_latest_given(self):
        """The start's conditions, until a resume gives others; a resume giving none (an empty
        environment) keeps them."""
        start = read_journal(STORED / "format1-resumed" / "journal.jsonl").start
        resume = {
            "kind": "resume",
            "seq": 1,
            "prev": SHA,
            "time": TIME,
            "identity": None,
            "pending": 0,
            "recovered_torn_line": False,
            "recovered_text": None,
        }
        from verirun.record.documents import validate_document

        empty = validate_document({**resume, "environment": {}})
        given = validate_document({**resume, "environment": {"temperature_c": 21.5}})
        assert latest_environment([start]) == as_journaled(start.environment)
        assert latest_environment([start, empty]) == as_journaled(start.environment)
        assert latest_environment([start, given, empty]) == {"temperature_c": 21.5}


class TestCompose:
    def test_exactly_the_keys_given(self):
        """An optional field not given stays absent (not null); one given as None is kept."""
        note = compose("note", time=TIME, point=None, text="a remark")
        assert note == {"kind": "note", "time": TIME, "point": None, "text": "a remark"}
        assert compose("note", time=TIME, point="p", text="t", by="operator")["by"] == "operator"

    def test_a_part_given_as_its_model_is_written_as_made(self):
        renewal = Renewal(
            certificate="C-2",
            calibration_due="2027-01-31",
            traceability=None,
            bench_sha256=SHA,
            bench_source="bench.yaml",
            bench_text="bench: {}\n",
        )
        doc = compose(
            "resume",
            time=TIME,
            identity="SIM,1",
            pending=3,
            environment=Environment(humidity_pct=40.0),
            recovered_torn_line=False,
            recovered_text=None,
            standard_renewed=renewal,
        )
        assert doc["environment"] == {"humidity_pct": 40.0}
        assert doc["standard_renewed"]["traceability"] is None
        assert json.loads(dumps(doc)) == doc

    @pytest.mark.parametrize(
        "kind, fields, named",
        [
            ("issue", {"by": "A. Person", "role": "reviewer", "revision": 0}, "revision"),
            ("issue", {"by": "A. Person", "role": "r", "revision": 1}, "certificate"),
            ("note", {"point": None, "text": "t", "surprise": 1}, "surprise"),
            ("reading", {}, "reading"),
        ],
    )
    def test_a_document_that_does_not_fit_is_refused_naming_the_field(self, kind, fields, named):
        with pytest.raises(ValueError, match=named):
            compose(kind, time=TIME, **fields)

    def test_a_composed_document_reads_back_as_its_model(self, tmp_path):
        doc = compose(
            "issue", time=TIME, by="A. Person", role="reviewer", revision=1, certificate="N-1"
        )
        with Journal(tmp_path / "journal.jsonl") as journal:
            journal.append(doc)
        (model,) = read_journal(tmp_path / "journal.jsonl").models
        assert isinstance(model, Issue) and (model.by, model.revision) == ("A. Person", 1)
