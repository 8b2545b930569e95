"""What the customer reads, and nothing the customer is not told (ISO/IEC 17025:2017 7.8.2,
7.8.4, 7.5): the internal run log stays in the record; notes sit beside their points; facts not
recorded are said to be so, never filled in; the lab's own spelling and remarks."""

from __future__ import annotations

from bs4 import BeautifulSoup
from test_issue import DATA, text

from verirun.certificate.render import certificate_path
from verirun.cli import main
from verirun.record.journal import load_record


def dry_run(tmp, *extra, readings=None, lab=None):
    """A scripted dry run of the test procedure (its 50 V AC point is a hazardous output,
    permitted for a scripted run by the bench file and journaled)."""
    assert (
        main(
            [
                "run",
                str(DATA / "qm40-procedure.yaml"),
                "--bench",
                str(DATA / "bench-kestrel.yaml"),
                "--simulate",
                "--lab",
                str(lab or DATA / "lab-test.yaml"),
                "--readings",
                str(readings or DATA / "qm40-procedure-readings.csv"),
                "--serial",
                "S",
                "--customer",
                "C",
                "--runs",
                str(tmp / "runs"),
                "--reports",
                str(tmp / "rep"),
                *extra,
            ]
        )
        == 0
    )
    (run,) = (tmp / "runs").iterdir()
    record = load_record(run)
    return record, BeautifulSoup(
        certificate_path(record, tmp / "rep").read_text(encoding="utf-8"), "html.parser"
    )


def test_the_internal_log_stays_in_the_record(tmp_path):
    """The hazard permission is journaled into the record's internal run log, not printed for
    the customer; nor is the bench's safety caution."""
    record, soup = dry_run(
        tmp_path, "--temperature", "23", "--humidity", "40", "--condition", "as new"
    )
    assert any(note.text.startswith("hazardous output") for note in record.run_log)
    assert not any(note.text.startswith("hazardous output") for note in record.notes)
    page = soup.get_text(" ")
    assert (
        "hazardous" not in page
        and "shock hazard" not in page
        and soup.select_one(".caution") is None
    )


def test_an_operator_note_sits_beside_its_point(tmp_path):
    """A note typed at a point is printed in the row under that point, not in a list at the end."""
    readings = tmp_path / "r.csv"
    readings.write_text(
        (DATA / "qm40-procedure-readings.csv")
        .read_text()
        .replace(
            "dcv-10,6 V,6.2\n",
            "dcv-10,6 V,note pointer sticks near 6 V; tapped free\ndcv-10,6 V,6.2\n",
        )
    )
    record, soup = dry_run(tmp_path, readings=readings)
    row = soup.select_one('tr[data-key="dcv-10@6V"]')
    note = row.find_next_sibling("tr")
    assert note["data-note-for"] == "dcv-10@6V"
    assert text(note, "td") == "Note: pointer sticks near 6 V; tapped free"
    assert soup.select_one("#notes") is None  # no other notes for the customer


def test_facts_not_recorded_are_deviations_not_defaults(tmp_path):
    """A scripted dry run given no conditions and no condition on receipt says so."""
    record, soup = dry_run(tmp_path)
    assert record.item.condition is None
    assert record.environment.temperature_c is None and record.environment.humidity_pct is None
    assert text(soup, "#condition") == "not recorded"
    deviations = text(soup, "#deviations")
    assert "The laboratory temperature was not recorded at the start of the run." in deviations
    assert "The relative humidity was not recorded at the start of the run." in deviations
    assert "The condition of the item on receipt was not recorded." in deviations
    assert text(soup, "#date-received") == "not recorded"
    assert "The date the item was received was not recorded." in deviations


def test_the_labs_spelling_and_remarks(tmp_path):
    """A lab profile choosing American spelling gets it throughout; its remarks are printed."""
    lab = tmp_path / "lab.yaml"
    lab.write_text((DATA / "lab-test.yaml").read_text() + "  spelling: american\n")
    record, soup = dry_run(tmp_path, lab=lab)
    page = soup.get_text(" ")
    assert "Authorization" in page and "center" in text(soup, 'section[data-range="ohm-x1"] h3')
    assert "Authoris" not in page and "authoris" not in page and "centre" not in page
    assert "Readings were taken on the mirror scale to avoid parallax." in text(soup, "#remarks")


def test_verirun_s_own_sentences_follow_the_lab_s_spelling(tmp_path):
    """The decision rule's statement (verirun's words) is spelt the lab's way: a non-binary
    rule's "more favourable statement" becomes "more favorable statement"."""
    lab = tmp_path / "lab.yaml"
    lab.write_text((DATA / "lab-test.yaml").read_text() + "  spelling: american\n")
    procedure = tmp_path / "p.yaml"
    procedure.write_text(
        (DATA / "qm40-procedure.yaml").read_text().replace("  rule: simple", "  rule: non-binary")
    )
    assert (
        main(
            [
                "run",
                str(procedure),
                "--bench",
                str(DATA / "bench-kestrel.yaml"),
                "--simulate",
                "--lab",
                str(lab),
                "--readings",
                str(DATA / "qm40-procedure-readings.csv"),
                "--serial",
                "S",
                "--customer",
                "C",
                "--runs",
                str(tmp_path / "runs"),
                "--reports",
                str(tmp_path / "rep"),
            ]
        )
        == 0
    )
    (run,) = (tmp_path / "runs").iterdir()
    record = load_record(run)
    assert "favourable" in record.decision_rule.statement  # as the record keeps it
    soup = BeautifulSoup(
        certificate_path(record, tmp_path / "rep").read_text(encoding="utf-8"), "html.parser"
    )
    assert "more favorable statement" in text(soup, "#decision-rule")
    assert "favour" not in soup.get_text(" ")


def test_spelt_keeps_capitals_and_whole_words():
    """Only whole words change, and a capital stays a capital."""
    from verirun.certificate.reading import spelt

    assert spelt("Centre and centred; centrefold", "american") == "Center and centered; centrefold"
    assert spelt("Centre", "british") == "Centre"


def test_british_spelling_by_default(tmp_path):
    """Without a choice, the certificate keeps one (British) spelling throughout."""
    record, soup = dry_run(tmp_path)
    page = soup.get_text(" ")
    assert "Authorisation" in page and "Authoriz" not in page and " center " not in page
