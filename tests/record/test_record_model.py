"""The run record's models and the JSON Schema shipped with the package: every stored record and
every record a run makes fits both, reads back to the same bytes, and a wrong field is refused
by name."""

from __future__ import annotations

import csv
import dataclasses
import json
from importlib.resources import files
from pathlib import Path

import jsonschema
import pytest
from pydantic import MISSING, ValidationError
from runkit import undescribed_fields

from verirun.cli import main
from verirun.errors import RecordError
from verirun.record.documents import PointResult, Record, record_schema, validate_record
from verirun.record.journal import RECORD_FORMAT, load_record, write_record

DATA = Path(__file__).resolve().parents[1] / "data"
STORED = sorted((DATA / "stored-runs").glob("*/record*.json")) + sorted(
    (DATA / "steps" / "stored").glob("*/record*.json")
)
SHIPPED = json.loads((files("verirun") / "schema" / "record.schema.json").read_text("utf-8"))


def _fits_schema(record: dict) -> None:
    jsonschema.validate(record, SHIPPED, cls=jsonschema.Draft202012Validator)


@pytest.fixture(scope="module")
def fresh(tmp_path_factory) -> list[Path]:
    """Records made now: the demo run, a run with skipped points, and that run amended."""
    work = tmp_path_factory.mktemp("fresh")
    assert main(["demo", "--runs", str(work / "demo"), "--reports", str(work / "rep")]) == 0
    readings = work / "r.csv"
    with open(readings, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(
            [
                ["range", "at", "reading"],
                *[["dcv-20", f"{v} V", str(v)] for v in (2, 5, 10, 15, 19)],
                *[["dcv-2", at, "skip not today"] for at in ("-1.9 V", "-1 V", "190 mV")],
                ["dcv-2", "1 V", "1.01"],
                ["dcv-2", "1.9 V", "1.9"],
                *[["ohm-s", f"{r} ohm", str(r)] for r in (1, 5, 10, 30, 90)],
                *[["ohm-p", f"{r} ohm", str(r)] for r in (5, 25, 50, 100, 400)],
            ]
        )
    args = ["--simulate", "--serial", "F-1", "--customer", "C", "--runs", str(work / "runs")]
    assert (
        main(
            [
                "run",
                str(DATA / "matrix-procedure.yaml"),
                "--bench",
                str(DATA / "matrix-bench.yaml"),
                "--readings",
                str(readings),
                "--reports",
                str(work / "rep"),
                *args,
            ]
        )
        == 0
    )
    (run,) = (work / "runs").iterdir()
    first = work / "first.json"
    first.write_bytes((run / "record.json").read_bytes())
    amend = ["amend", str(run), "--point", "1", "--reading", "2.01", "--reason", "misread"]
    assert main([*amend, "--operator", "A. Checker"]) == 0
    (demo,) = (work / "demo").iterdir()
    return [demo / "record.json", first, run / "record.json"]


class TestShippedSchema:
    def test_is_the_schema_of_the_models(self):
        """The schema file in the package is the one the models give (regenerate it with
        ``python -m verirun.record.documents record > verirun/schema/record.schema.json``)."""
        assert SHIPPED == record_schema()

    def test_is_a_valid_json_schema(self):
        """The shipped schema is itself valid JSON Schema (draft 2020-12, which pydantic writes)."""
        jsonschema.Draft202012Validator.check_schema(SHIPPED)

    def test_is_package_data(self):
        """pyproject.toml ships every file of verirun/schema with the package."""
        text = (Path(__file__).resolve().parents[2] / "pyproject.toml").read_text("utf-8")
        assert '"schema/*.json"' in text

    def test_every_field_is_described(self):
        """Every field of every part of the record says what it means, itself or by the part it
        refers to."""
        assert undescribed_fields(SHIPPED, "Record") == []


class TestStoredRecords:
    @pytest.mark.parametrize("path", STORED, ids=lambda p: f"{p.parent.name}/{p.name}")
    def test_fits_the_model_and_the_schema_and_reads_back_the_same(self, path, tmp_path):
        """Every stored record (of the format its set is named for: 1, or 3) fits its model and
        the shipped schema, and written again from its model gives the stored bytes."""
        record = json.loads(path.read_text(encoding="utf-8"))
        _fits_schema(record)
        model = validate_record(record)
        assert model.record_format == int(path.parent.name.split("-")[0].removeprefix("format"))
        assert write_record(model, tmp_path / "again.json").read_bytes() == path.read_bytes()

    def test_a_format_1_row_lacks_the_later_fields_and_says_so(self):
        """A format-1 row has no ``within_tolerance``: it stays absent, and whether the reading
        is within tolerance is worked out from its limits (1.25 V within 1.05 V to 1.35 V)."""
        path = DATA / "stored-runs" / "format1-guarded" / "record.json"
        row = load_record(path).points[0]
        assert row.within_tolerance is MISSING  # absent, not null
        assert (row.low, row.reading, row.high) == (1.0499999999999998, 1.25, 1.35)
        assert row.is_within_tolerance() is True


class TestFreshRecords:
    def test_fit_the_model_and_the_schema_and_read_back_the_same(self, fresh, tmp_path):
        """Records a run, a run with skips and an amendment make now are of the current format,
        fit the model and the shipped schema, and read back to their own bytes."""
        for path in fresh:
            record = json.loads(path.read_text(encoding="utf-8"))
            _fits_schema(record)
            model = load_record(path)
            assert model.record_format == RECORD_FORMAT
            assert write_record(model, tmp_path / "again.json").read_bytes() == path.read_bytes()

    def test_hold_every_kind_of_row(self, fresh):
        """Between them the fresh records hold measured, skipped and corrected rows."""
        rows = [row for path in fresh for row in load_record(path).points]
        assert {"pass", "fail", "skipped"} <= {row.verdict for row in rows}
        assert any(row.corrected() is not None for row in rows)
        assert all(row.skip_reason == "not today" for row in rows if row.verdict == "skipped")


class TestWrongField:
    def _record(self) -> dict:
        path = DATA / "stored-runs" / "format1-skipped" / "record.json"
        return json.loads(path.read_text(encoding="utf-8"))

    @pytest.mark.parametrize(
        "change, field",
        [
            (lambda r: r["points"][3].update(verdict="maybe"), "points.3.verdict"),
            (lambda r: r["points"][0].update(reading="1.25"), "points.0.reading"),
            (lambda r: r["run"].update(surprise=1), "run.surprise"),
            (lambda r: r["summary"].pop("overall"), "summary.overall"),
            (lambda r: r["points"][0]["budget"][0].update(u=None), "points.0.budget.0.u"),
        ],
        ids=["unknown verdict", "reading as text", "unknown key", "missing key", "null u"],
    )
    def test_is_refused_naming_the_field(self, change, field, tmp_path):
        """A record with a field of the wrong kind, an unknown key or a key missing is refused
        by the model, by the shipped schema, and by load_record, which names the field."""
        record = self._record()
        change(record)
        with pytest.raises(ValidationError):
            validate_record(record)
        with pytest.raises(jsonschema.ValidationError):
            _fits_schema(record)
        path = tmp_path / "record.json"
        path.write_text(json.dumps(record), encoding="utf-8")
        with pytest.raises(RecordError, match=rf"record\.json: .*field {field}: "):
            load_record(path)

    def test_a_row_is_frozen(self):
        """A typed row cannot be changed after it is made."""
        row = Record.model_validate(self._record()).points[0]
        assert isinstance(row, PointResult)
        with pytest.raises(dataclasses.FrozenInstanceError):
            row.verdict = "pass"


class TestReadersGetTheModel:
    """Every way a module outside the record package gets a record gives the typed model: it
    reads fields, and a key read would fail at once (a model is not a mapping)."""

    @pytest.mark.parametrize(
        "run", sorted(p.parent for p in STORED if p.name == "record.json"), ids=lambda p: p.name
    )
    def test_of_every_stored_format(self, run):
        from verirun.record.build import build_record
        from verirun.record.journal import read_journal
        from verirun.record.verify import verified_record, verified_records

        loaded, verified = load_record(run), verified_record(run)
        built = build_record(read_journal(run / "journal.jsonl").documents)
        (*_, current), problems = verified_records(run)
        assert problems == []
        for record in (loaded, verified, built, current):
            assert isinstance(record, Record)
            with pytest.raises(TypeError, match="not subscriptable"):
                record["run"]
        assert loaded == verified == current
        assert built.run.uid == loaded.run.uid and len(built.points) == len(loaded.points)

    def test_of_a_run_closed_now(self, tmp_path):
        from verirun.record.build import close_record

        assert main(["demo", "--runs", str(tmp_path / "runs"), "--reports", str(tmp_path)]) == 0
        (run,) = (tmp_path / "runs").iterdir()
        closed = close_record(run)
        assert isinstance(closed, Record) and closed == load_record(run)
