"""As found, adjusted, as left: one certificate with both results of each point side by side.

ISO/IEC 17025:2017 7.8.4.1 d) asks for the results before and after an adjustment; 7.8.6 for a
statement of conformity that says which results it covers; 7.8.8 for an amendment to be a new,
identified revision. The whole path: as-found run -> adjust -> as-left run -> combined
certificate -> amend the as-found run -> the combined certificate re-rendered as a new revision
-> issued.
"""

from __future__ import annotations

import json

from bs4 import BeautifulSoup
from test_issue import DATA, bench_run, text

from verirun.certificate.render import certificate_path
from verirun.cli import main
from verirun.record.journal import load_record, read_journal


def test_as_found_adjust_as_left_combined_amend_issue(at_the_bench, tmp_path, capsys):
    reports = tmp_path / "rep"
    found_readings = tmp_path / "found.csv"
    found_readings.write_text(
        (DATA / "qm40-procedure-readings.csv")
        .read_text()
        .replace("dcv-50,25 V,25\n", "dcv-50,25 V,skip pointer stuck at zero\n")
    )
    found = bench_run(tmp_path, readings=found_readings)
    left_readings = tmp_path / "left.csv"
    left_readings.write_text(
        (DATA / "qm40-procedure-readings.csv")
        .read_text()
        .replace("dcv-10,8 V,8.25", "dcv-10,8 V,8.0")
    )
    left = bench_run(
        tmp_path,
        "--as-left-of",
        str(found),
        "--adjustment",
        "span trimmer reset",
        readings=left_readings,
    )
    # The as-left journal carries the as-found results as the as-found record's file holds
    # them, key for key, and its start document fits the journal's typed model.
    found_file = json.loads((found / "record.json").read_text(encoding="utf-8"))
    start = read_journal(left / "journal.jsonl").documents[0]
    assert start["as_found"]["points"] == found_file["points"]
    assert start["as_found"]["summary"] == found_file["summary"]
    assert "pass" in start["as_found"]["summary"] and "passed" not in start["as_found"]["summary"]
    record = load_record(left)
    soup = BeautifulSoup(
        certificate_path(record, reports).read_text(encoding="utf-8"), "html.parser"
    )

    # One table per range; each point's as-found and as-left result in one row, both verdicts.
    tables = soup.select('table[data-pass="as-found-and-as-left"]')
    assert [t["data-range"] for t in tables] == [r.id for r in record.ranges]
    row = soup.select_one('tr[data-key="dcv-10@8V"]')
    assert row.select_one('td[data-verdict="as-found"]').get_text() == "FAIL"
    assert row.select_one('td[data-verdict="as-left"]').get_text() == "PASS"
    # The statement of conformity covers what was found and what was left.
    overall = text(soup, "#overall")
    assert "As found, before the adjustment: Statement of conformity" in overall
    assert "does NOT conform" in overall.split("As left, after the adjustment:")[0]
    assert "As left, after the adjustment:" in overall
    # Deviations of both runs: the point skipped as found is listed.
    assert "skipped as found: pointer stuck at zero" in text(soup, "#deviations")

    # Amending the as-found run re-renders the combined certificate as its next revision.
    before = certificate_path(record, reports).stem
    assert (
        main(
            [
                "amend",
                str(found),
                "--point",
                "7",
                "--reading",
                "24.9",
                "--reason",
                "misread scale",
                "--operator",
                "T. Quayle",
                "--reports",
                str(reports),
            ]
        )
        == 0
    )
    assert "combined certificate takes the corrected as-found results" in capsys.readouterr().out
    revised = load_record(left)
    assert revised.run.revision == 2
    assert revised.as_found.certificate.endswith("-R2")
    soup = BeautifulSoup(
        certificate_path(revised, reports).read_text(encoding="utf-8"), "html.parser"
    )
    assert text(soup, 'tr[data-key="dcv-50@25V"] td[data-pass="as-found"]').startswith("24.9")
    changes = text(soup, "#revision-changes")
    assert (
        f"replaces the draft {before}, which was not issued" in changes
        and "misread scale" in changes
    )
    assert "skipped as found" not in text(soup, "#deviations")
    assert main(["verify", str(left), str(found)]) == 0

    # Issued like any certificate.
    assert main(["issue", str(left), "--by", "A. Thorneycroft", "--reports", str(reports)]) == 0
    issued = BeautifulSoup(
        certificate_path(load_record(left), reports).read_text(encoding="utf-8"), "html.parser"
    )
    assert text(issued, "#issued-by") == "A. Thorneycroft, Quality Manager"

    # Every document these journals hold (issue, correction, as-found revision) fits the
    # journal's shipped JSON Schema and its model.
    fits_the_schema(found, left)


def fits_the_schema(*runs):
    import json
    from importlib.resources import files

    import jsonschema

    from verirun.record.documents import validate_document
    from verirun.record.journal import read_journal

    schema = json.loads(
        (files("verirun") / "schema" / "journal.schema.json").read_text(encoding="utf-8")
    )
    kinds = set()
    for run in runs:
        for doc in read_journal(run / "journal.jsonl").documents:
            jsonschema.validate(doc, schema, cls=jsonschema.Draft202012Validator)
            assert validate_document(doc).kind == doc["kind"]
            kinds.add(doc["kind"])
    assert {
        "start",
        "observation",
        "skip",
        "note",
        "correction",
        "as-found",
        "issue",
        "stop",
    } <= kinds


def test_a_dry_run_as_left_of_a_calibration_is_refused(at_the_bench, tmp_path, capsys):
    """A certificate never mixes a dry run with a calibration: the as-left run is made the way
    the as-found run was."""
    found = bench_run(tmp_path)
    assert (
        main(
            [
                "run",
                str(DATA / "qm40-procedure.yaml"),
                "--bench",
                str(DATA / "bench-kestrel.yaml"),
                "--simulate",
                "--readings",
                str(DATA / "qm40-procedure-readings.csv"),
                "--serial",
                "QM40-77",
                "--customer",
                "Fenmouth Drainage Board",
                "--as-left-of",
                str(found),
                "--adjustment",
                "x",
                "--runs",
                str(tmp_path / "runs"),
            ]
        )
        == 1
    )
    assert "the as-left run must be made the same way" in capsys.readouterr().err
    assert len(list((tmp_path / "runs").iterdir())) == 1
