"""Record integrity: the chain shows any edit, gap or reordering; corrections are new revisions."""

from __future__ import annotations

import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from runkit import simulated_run_args

from verirun.certificate.render import safe_file_name, write_certificate
from verirun.cli import main
from verirun.record.build import build_record
from verirun.record.documents import validate_record
from verirun.record.journal import Journal, dumps, read_journal, verify_chain, write_record
from verirun.record.verify import problems


@pytest.fixture
def run_dir(tmp_path):
    assert (
        main(
            simulated_run_args(
                tmp_path,
                serial="SN-9",
                customer="Test customer",
            )
        )
        == 0
    )
    (folder,) = (tmp_path / "runs").iterdir()
    return folder


def lines_of(path):
    return path.read_text(encoding="utf-8").splitlines(keepends=True)


class TestVerify:
    def test_untouched_run_verifies(self, run_dir, capsys):
        """A run as written verifies, and `verirun verify` says so with exit 0."""
        assert problems(run_dir) == []
        assert main(["verify", str(run_dir)]) == 0
        assert "verified" in capsys.readouterr().out

    def test_edited_observation_is_reported(self, run_dir, capsys):
        """Changing one reading in the journal breaks the chain at the next document."""
        journal = run_dir / "journal.jsonl"
        lines = lines_of(journal)
        index = next(i for i, line in enumerate(lines) if '"typed":"4.6"' in line)
        lines[index] = (
            lines[index]
            .replace('"typed":"4.6"', '"typed":"4.7"')
            .replace('"reading":4.6', '"reading":4.7')
        )
        journal.write_text("".join(lines), encoding="utf-8")
        found = problems(run_dir)
        assert any(f"between document {index + 1}" in p for p in found), found
        assert main(["verify", str(run_dir)]) == 1
        assert main(["certify", str(run_dir), "--reports", str(run_dir / "out")]) == 1
        assert not (run_dir / "out").exists()

    def test_missing_document_is_reported(self, run_dir):
        """Deleting a document shows as a gap in the sequence numbers and the chain."""
        journal = run_dir / "journal.jsonl"
        lines = lines_of(journal)
        del lines[5]
        journal.write_text("".join(lines), encoding="utf-8")
        found = problems(run_dir)
        assert any("sequence number" in p for p in found) and any(
            "chain breaks" in p for p in found
        )

    def test_reordered_documents_are_reported(self, run_dir):
        """Swapping two documents is reported."""
        journal = run_dir / "journal.jsonl"
        lines = lines_of(journal)
        lines[3], lines[4] = lines[4], lines[3]
        journal.write_text("".join(lines), encoding="utf-8")
        assert any("out of order" in p or "sequence" in p for p in problems(run_dir))

    def test_edited_record_is_reported(self, run_dir):
        """An edit to record.json that its journal does not support is reported."""
        path = run_dir / "record.json"
        record = json.loads(path.read_text())
        record["points"][3]["verdict"] = "pass"
        path.write_text(json.dumps(record))
        assert any("differs from what its journal records" in p for p in problems(run_dir))

    def test_missing_run_folder_is_named(self, tmp_path, capsys):
        """A run folder that does not exist is named as such by verify and amend."""
        missing = tmp_path / "no-such-run"
        assert main(["verify", str(missing)]) == 1
        assert f"{missing}: no such run folder" in capsys.readouterr().out
        assert main(["amend", str(missing), "--point", "1", "--reading", "1", "--reason", "x"]) == 1
        assert f"{missing}: no such run folder" in capsys.readouterr().err

    def test_record_file_is_the_canonical_json_of_the_record(self, run_dir, tmp_path):
        """record.json, written a piece at a time, is byte for byte the one-shot canonical
        encoding of the record by the standard library (json.dumps, sorted keys, compact)."""
        record = json.loads((run_dir / "record.json").read_text(encoding="utf-8"))
        record["notes"].append({"text": 'é ✓ \u2028 "quoted"', "point": None, "time": "x"})
        record["empty"] = []
        written = write_record(record, tmp_path / "again.json").read_bytes()
        expected = (
            json.dumps(
                record, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(",", ":")
            )
            + "\n"
        )
        assert written == expected.encode("utf-8")
        assert (run_dir / "record.json").read_bytes().endswith(b"}\n")

    def test_record_closed_by_the_run_is_the_one_its_journal_alone_gives(self, run_dir, tmp_path):
        """The run closes its journal with what it already worked out (plan, evaluations); the
        record file is byte for byte the one rebuilt from the journal alone."""
        docs = read_journal(run_dir / "journal.jsonl").documents
        rebuilt = write_record(build_record(docs, "journal"), tmp_path / "rebuilt.json")
        assert rebuilt.read_bytes() == (run_dir / "record.json").read_bytes()

    def test_closing_uses_the_plan_the_run_made_only_for_the_texts_it_journaled(self, run_dir):
        """Given what the run planned, the build takes that very plan when the start document
        holds the procedure's and the bench's texts and names, and plans from the journal
        otherwise (a resume on a renewed bench file, another file of the same text)."""
        import dataclasses

        from verirun.bench.config import load_bench_text
        from verirun.procedure.load import load_procedure_text
        from verirun.procedure.plan import plan
        from verirun.record.build import _plan_of

        start = read_journal(run_dir / "journal.jsonl").documents[0]
        procedure = load_procedure_text(start["procedure"]["text"], start["procedure"]["source"])
        bench = load_bench_text(start["bench"]["text"], start["bench"]["source"])
        points = plan(procedure, bench)
        got = _plan_of(start, (procedure, bench, points))
        assert got[0] is procedure and got[1] is bench
        assert all(a is b for a, b in zip(got[2], points, strict=True))
        renewed = dataclasses.replace(bench, text=bench.text + "\n# renewed\n")
        elsewhere = dataclasses.replace(procedure, source="elsewhere.yaml")
        for made in ((procedure, renewed, points), (elsewhere, bench, points), None):
            got = _plan_of(start, made)
            assert got[1].text == start["bench"]["text"]
            assert got[0].source == start["procedure"]["source"]
            assert not any(a is b for a, b in zip(got[2], points))

    def test_chain_function_on_a_fresh_journal(self, tmp_path):
        """Documents appended by the journal chain to one another from a zero hash."""
        with Journal(tmp_path / "j.jsonl") as journal:
            for n in range(3):
                journal.append(
                    {"kind": "note", "time": "2026-12-01T09:00:00Z", "point": None, "text": str(n)}
                )
        docs = read_journal(tmp_path / "j.jsonl").documents
        assert [d["seq"] for d in docs] == [0, 1, 2]
        assert verify_chain(docs) == []


class TestAmend:
    def test_correction_is_a_new_revision_keeping_the_old(self, run_dir, capsys):
        """Correcting a reading writes revision 2 beside the kept revision 1; the new certificate
        says which one it replaces (ISO/IEC 17025:2017 7.5.2 and 7.8.8)."""
        first = json.loads((run_dir / "record.json").read_text())
        assert first["run"]["revision"] == 1
        assert (
            main(
                [
                    "amend",
                    str(run_dir),
                    "--point",
                    "4",
                    "--reading",
                    "4.7",
                    "--reason",
                    "misread the scale",
                    "--reports",
                    str(run_dir / "certs"),
                ]
            )
            == 0
        )
        kept = json.loads((run_dir / "record.r1.json").read_text())
        assert kept == first
        second = json.loads((run_dir / "record.json").read_text())
        assert second["run"]["revision"] == 2
        row = second["points"][3]
        assert (
            row["typed"] == "4.7" and row["verdict"] == "pass"
        )  # 4.7 V within 4.65 .. 4.95 V (4.8 V ± 2.5 % of 6 V)
        assert row["correction"]["previous_typed"] == "4.6"
        assert problems(run_dir) == []
        (cert,) = (run_dir / "certs").glob("*-R2.html")
        html = cert.read_text()
        assert "replaces certificate" in html and "misread the scale" in html

    @pytest.mark.parametrize(
        "args, words",
        [
            (["--point", "99", "--reading", "1", "--reason", "x"], "no step 99"),
            (["--point", "4", "--reading", "8,15", "--reason", "x"], "decimal point"),
            (
                ["--point", "4", "--reading", "skip broken", "--reason", "x"],
                "not an operator command",
            ),
            (["--point", "nope@1", "--reading", "1", "--reason", "x"], "no point"),
        ],
    )
    def test_bad_corrections_are_refused(self, run_dir, capsys, args, words):
        """A correction naming no point, or with an unreadable value, is refused with the reason."""
        assert main(["amend", str(run_dir), *args]) == 1
        assert words in capsys.readouterr().err
        assert not (run_dir / "record.r1.json").exists()


class TestEscapingAndFileNames:
    def test_customer_script_is_escaped_on_the_certificate(self, tmp_path):
        """Text from the user reaches the certificate escaped: a <script> in a customer name is
        shown as text, never run."""
        assert (
            main(
                simulated_run_args(
                    tmp_path,
                    serial="<b>SN</b>",
                    customer="<script>alert('x')</script>",
                )
            )
            == 0
        )
        (cert,) = (tmp_path / "reports").glob("*.html")
        html = cert.read_text()
        assert "<script>" not in html
        assert "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;" in html
        assert "&lt;b&gt;SN&lt;/b&gt;" in html

    @pytest.mark.parametrize(
        "name", ["../../etc/passwd", "..", "/abs/path", "a/b\\c", "", "...", "x" * 500]
    )
    def test_file_names_from_user_data_stay_in_the_folder(self, tmp_path, name):
        """A file name made from user data has no separators or parent steps and stays short."""
        safe = safe_file_name(name)
        assert (
            "/" not in safe
            and "\\" not in safe
            and not safe.startswith(".")
            and 0 < len(safe) <= 120
        )
        assert (tmp_path / safe).resolve().parent == tmp_path.resolve()

    def test_run_folder_from_a_hostile_serial_stays_in_runs(self, tmp_path):
        """A serial number with path separators still makes its run folder inside runs/."""
        assert (
            main(
                simulated_run_args(
                    tmp_path,
                    serial="../../escape",
                )
            )
            == 0
        )
        (folder,) = (tmp_path / "runs").iterdir()
        assert folder.parent == tmp_path / "runs" and ".." not in folder.name
        assert not (tmp_path / "escape").exists()

    def test_certificate_number_with_separators_stays_in_reports(self, tmp_path, run_dir):
        """A lab prefix with path separators cannot put the certificate outside the reports
        folder."""
        record = json.loads((run_dir / "record.json").read_text())
        record["lab"]["certificate_prefix"] = "../../evil"
        path = write_certificate(validate_record(record), tmp_path / "rep")
        assert path.parent == tmp_path / "rep"


_json_values = st.recursive(
    st.none()
    | st.booleans()
    | st.integers()
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(),
    lambda children: (
        st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=6), children, max_size=4)
    ),
    max_leaves=20,
)


@settings(max_examples=300, deadline=None)
@given(_json_values)
def test_canonical_lines_are_the_standard_librarys_canonical_json(value):
    """Journal lines are exactly the standard library's json.dumps with sorted keys, compact
    separators and UTF-8 text kept as is (the form every chain hash is taken over)."""
    assert dumps(value) == json.dumps(
        value, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(",", ":")
    )


def test_canonical_lines_refuse_what_json_cannot_hold():
    """NaN, infinities and a document that holds itself are refused (as json.dumps refuses them
    with allow_nan=False), and refusing one does not spoil the next document."""
    circular: dict = {}
    circular["self"] = circular
    for bad in ({"a": [{"b": float("nan")}]}, {"x": float("inf")}, circular):
        with pytest.raises(ValueError):
            dumps(bad)
    assert dumps({"a": [{"b": 1.0}]}) == '{"a":[{"b":1.0}]}'


def test_record_file_of_a_record_with_other_keys(tmp_path):
    """A record given keys other than text is written as json.dumps writes it."""
    written = write_record({1: "a", 2: [2.5]}, tmp_path / "r.json").read_text(encoding="utf-8")
    assert written == json.dumps({1: "a", 2: [2.5]}, sort_keys=True, separators=(",", ":")) + "\n"
