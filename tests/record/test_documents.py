"""The journal's document models and the JSON Schema shipped with the package."""

from __future__ import annotations

import json
from importlib.resources import files
from pathlib import Path

import jsonschema
import pytest
from pydantic import ValidationError
from runkit import undescribed_fields

from verirun.record.documents import KINDS, journal_schema, validate_document

STORED = Path(__file__).resolve().parents[1] / "data" / "stored-runs"
#: The runs of earlier code the step tests keep beside theirs.
STEPS = Path(__file__).resolve().parents[1] / "data" / "steps" / "stored"
LINES = [
    (f"{path.parent.name}:{number}", json.loads(line))
    for path in sorted(STORED.glob("*/journal.jsonl")) + sorted(STEPS.glob("*/journal.jsonl"))
    for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1)
]
SHIPPED = json.loads(
    (files("verirun") / "schema" / "journal.schema.json").read_text(encoding="utf-8")
)


def _observation() -> dict:
    """A fresh copy of a stored observation, for a test to change."""
    return json.loads(json.dumps(next(doc for _, doc in LINES if doc["kind"] == "observation")))


class TestShippedSchema:
    def test_is_the_schema_of_the_models(self):
        """The schema file in the package is the one the models give (regenerate it with
        ``python -m verirun.record.documents journal > verirun/schema/journal.schema.json``)."""
        assert SHIPPED == journal_schema()

    def test_is_a_valid_json_schema(self):
        """The shipped schema is itself valid JSON Schema (draft 2020-12, which pydantic writes)."""
        jsonschema.Draft202012Validator.check_schema(SHIPPED)

    def test_every_field_is_described(self):
        """Every field of every document kind and of every part of one says what it means, itself
        or by the part it refers to."""
        assert undescribed_fields(SHIPPED, "Document") == []

    @pytest.mark.parametrize("where, doc", LINES, ids=[where for where, _ in LINES])
    def test_every_stored_document_fits(self, where, doc):
        """Every line of every stored journal fits the shipped schema and its model."""
        jsonschema.validate(doc, SHIPPED, cls=jsonschema.Draft202012Validator)
        assert validate_document(doc).kind == doc["kind"]

    def test_stored_runs_hold_seven_kinds_and_fresh_runs_the_rest(self):
        """The stored journals, made by earlier code, hold seven of the kinds, so each of those
        models is tried on real data. The other four came later and are checked against the
        shipped schema as the tests' fresh runs make them: a withdrawal by an undo at the console
        (tests/console/test_console_input.py), an issue and an as-found revision
        (tests/certificate/test_adjustment.py), a certificate number given by the register
        (tests/register/test_register_store.py)."""
        stored = {doc["kind"] for _, doc in LINES}
        assert stored == {"start", "resume", "observation", "skip", "note", "correction", "stop"}
        fresh = {"withdrawal", "issue", "as-found", "certificate-number"}
        assert stored | fresh == set(KINDS)


class TestValidateDocument:
    def test_refuses_an_unknown_key(self):
        """A key the model does not describe is refused, naming it."""
        with pytest.raises(ValidationError, match="surprise"):
            validate_document({**_observation(), "surprise": 1})

    def test_refuses_an_unknown_kind(self):
        """A kind that is none of the document kinds is refused."""
        with pytest.raises(ValidationError, match="does not match any of the expected tags"):
            validate_document({**_observation(), "kind": "reading"})

    def test_refuses_text_for_a_number(self):
        """A reading stored as text is refused: nothing is coerced."""
        with pytest.raises(ValidationError, match="reading"):
            validate_document({**_observation(), "reading": "2.1"})

    def test_refuses_a_missing_key(self):
        """A document without one of its fields is refused, naming it."""
        doc = _observation()
        del doc["typed"]
        with pytest.raises(ValidationError, match="typed"):
            validate_document(doc)

    def test_refuses_a_broken_hash(self):
        """``prev`` must be a SHA-256 in hex."""
        with pytest.raises(ValidationError, match="prev"):
            validate_document({**_observation(), "prev": "xyz"})

    def test_models_cannot_be_changed(self):
        """A validated document is frozen: its reading cannot be changed in place."""
        doc = validate_document(_observation())
        with pytest.raises(ValidationError):
            doc.reading = 1.0


class TestOptionalInputs:
    def test_a_start_of_a_bench_and_lab_that_leave_optional_fields_out_is_valid(self):
        """A bench file may leave out its location and the standard's traceability, and a lab
        profile its accreditation and conditions (their models make them optional); the start
        document of such a run is one verirun writes, so it must read back."""
        start = json.loads(json.dumps(next(doc for _, doc in LINES if doc["kind"] == "start")))
        start["bench"]["location"] = None
        start["bench"]["calibrator"]["traceability"] = None
        start["lab"]["accreditation"] = None
        start["lab"]["conditions"] = None
        jsonschema.validate(start, SHIPPED, cls=jsonschema.Draft202012Validator)
        assert validate_document(start).bench.location is None


class TestCertificateNumber:
    def _number(self) -> dict:
        after = next(doc for _, doc in LINES if doc["kind"] == "stop")
        return {
            "kind": "certificate-number",
            "seq": after["seq"] + 1,
            "prev": "0" * 64,
            "time": after["time"],
            "number": "LAB-2026-00001",
            "register_url": "/srv/lab/register.db",
        }

    def test_is_a_document_of_the_schema_and_frozen(self):
        doc = self._number()
        jsonschema.validate(doc, SHIPPED, cls=jsonschema.Draft202012Validator)
        model = validate_document(doc)
        assert model.number == "LAB-2026-00001"
        with pytest.raises(ValidationError):
            model.number = "LAB-2026-00002"

    @pytest.mark.parametrize("change", [{"number": 1}, {"surprise": True}, {"register_url": None}])
    def test_refuses_what_does_not_fit(self, change):
        """A number stored as an int, an unknown key or a missing register is refused: strict."""
        with pytest.raises(ValidationError):
            validate_document({**self._number(), **change})
