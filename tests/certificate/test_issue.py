"""From a finished run to an issued certificate, as ISO/IEC 17025:2017 7.8, 7.5 and 8.4 ask.

A finished run renders a draft (7.8.1.1: reports are reviewed and authorised before release);
a person the lab profile lists issues it, and the journal records who, when and in which role
(7.5.1, 8.4.2); a correction after issue is a new revision that names the one it replaces and
says what changed and why, the old one kept and marked as replaced (7.8.8.1 to 7.8.8.3). A dry
run on the simulated calibrator is never issued. The whole path is walked through the command
line, with the HTML parsed.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import pytest
from bs4 import BeautifulSoup

from verirun.certificate.render import certificate_path
from verirun.cli import main
from verirun.record.journal import load_record, read_journal

DATA = Path(__file__).resolve().parents[1] / "data"


def bench_run(tmp: Path, *extra: str, readings: Path | None = None, simulate: bool = False) -> Path:
    """One run of the test procedure at the test bench (or as a dry run); its run folder."""
    before = set((tmp / "runs").iterdir()) if (tmp / "runs").exists() else set()
    assert (
        main(
            [
                "run",
                str(DATA / "qm40-procedure.yaml"),
                "--bench",
                str(DATA / "bench-kestrel.yaml"),
                "--lab",
                str(DATA / "lab-test.yaml"),
                *(["--simulate"] if simulate else []),
                "--readings",
                str(readings or DATA / "qm40-procedure-readings.csv"),
                "--serial",
                "QM40-77",
                "--customer",
                "Fenmouth Drainage Board",
                "--condition",
                "Case cracked at the hinge; works.",
                "--received",
                "2025-06-30",
                "--temperature",
                "23.0",
                "--humidity",
                "45",
                "--runs",
                str(tmp / "runs"),
                "--reports",
                str(tmp / "rep"),
                *extra,
            ]
        )
        == 0
    )
    (run,) = set((tmp / "runs").iterdir()) - before
    return run


def amend_point_4(run: Path, reason: str = "typed wrong", *extra: str) -> int:
    """`verirun amend`: step 4's reading corrected to 8.0 for ``reason``; the exit code."""
    return main(
        [
            "amend",
            str(run),
            "--point",
            "4",
            "--reading",
            "8.0",
            "--reason",
            reason,
            "--operator",
            "T. Quayle",
            *extra,
        ]
    )


def soup_of(record: dict, reports: Path) -> BeautifulSoup:
    return BeautifulSoup(
        certificate_path(record, reports).read_text(encoding="utf-8"), "html.parser"
    )


def text(soup, selector) -> str:
    node = soup.select_one(selector)
    assert node is not None, selector
    return " ".join(node.get_text(" ").split())


def files_of(*folders: Path) -> dict[str, bytes]:
    """Every file under ``folders`` with its bytes: to show that nothing was written."""
    return {
        str(p): p.read_bytes()
        for folder in folders
        if folder.exists()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


class TestDraftIssueAmendReissue:
    def test_the_whole_path(self, at_the_bench, tmp_path, capsys):
        """run -> draft -> issue -> amend -> re-issue, each certificate read as the customer
        would."""
        run = bench_run(tmp_path)
        reports = tmp_path / "rep"
        record = load_record(run)
        number = certificate_path(record, reports).stem
        assert number.startswith("KFM-")

        # The finished run is a draft: marked on every page, no date of issue, no signature.
        draft = soup_of(record, reports)
        assert draft.body["data-state"] == "draft"
        assert text(draft, "#page-mark") == "DRAFT FOR REVIEW: NOT ISSUED"
        assert '@top-center { content: "DRAFT FOR REVIEW: NOT ISSUED"' in str(draft)
        assert draft.select_one("#date-issued") is None and draft.select_one("#issued-by") is None
        assert "no date of issue and no signature" in text(draft, "#authorisation")
        assert "Review the draft, then issue it: verirun issue" in capsys.readouterr().out

        # Someone the lab profile does not list is refused, and nothing is written.
        before = files_of(run, reports)
        assert main(["issue", str(run), "--by", "P. Nobody", "--reports", str(reports)]) == 1
        err = capsys.readouterr().err
        assert "'P. Nobody' is not among the people the lab profile authorises" in err
        assert "A. Thorneycroft (Quality Manager)" in err and "nothing was issued" in err
        assert files_of(run, reports) == before

        # A listed person issues it: the journal records who, in which role, when, what.
        assert (
            main(["issue", str(run), "--by", "A.  Thorneycroft ", "--reports", str(reports)]) == 0
        )
        issued_doc = read_journal(run / "journal.jsonl").documents[-1]
        assert {k: issued_doc[k] for k in ("kind", "by", "role", "revision", "certificate")} == {
            "kind": "issue",
            "by": "A. Thorneycroft",
            "role": "Quality Manager",
            "revision": 1,
            "certificate": number,
        }
        issued = soup_of(load_record(run), reports)
        assert issued.body["data-state"] == "issued" and issued.select_one("#page-mark") is None
        assert "@top-center" not in str(issued)
        assert text(issued, "#issued-by") == "A. Thorneycroft, Quality Manager"
        assert text(issued, "#date-issued") == issued_doc["time"][:10]
        assert main(["verify", str(run)]) == 0
        assert "revision 1 issued" in capsys.readouterr().out

        # Issuing twice is refused, nothing written; a correction goes through amendment.
        before = files_of(run, reports)
        assert main(["issue", str(run), "--by", "J. Ilesanmi", "--reports", str(reports)]) == 1
        err = capsys.readouterr().err
        assert "was issued already" in err and "amend the run" in err
        assert files_of(run, reports) == before

        # The amendment: a new revision, a draft until issued, naming what it replaces, what
        # changed and why; the old revision stays readable, marked as replaced.
        reason = "transcription error: 8.0 V was read, 8.25 typed"
        assert amend_point_4(run, reason, "--reports", str(reports)) == 0
        revised = load_record(run)
        r2 = certificate_path(revised, reports).stem
        assert r2 == f"{number}-R2"
        second = soup_of(revised, reports)
        assert second.body["data-state"] == "draft" and second.select_one("#date-issued") is None
        changes = text(second, "#revision-changes")
        assert f"replaces certificate {number}" in changes
        assert "corrected from '8.25' to '8.0'" in changes and reason in changes
        old = BeautifulSoup((reports / f"{number}.html").read_text(encoding="utf-8"), "html.parser")
        assert r2 in text(old, "#replaced-by") and reason in text(old, "#replaced-by")
        assert text(old, "#page-mark") == f"REPLACED BY CERTIFICATE {r2}: NOT CURRENT"
        assert text(old, "#issued-by") == "A. Thorneycroft, Quality Manager"  # as it was issued
        assert "8.25" in text(old, 'tr[data-key="dcv-10@8V"]')  # the reading as it was

        # Re-issue: the new revision gets its own issue, by another listed person.
        assert main(["issue", str(run), "--by", "J. Ilesanmi", "--reports", str(reports)]) == 0
        reissued = load_record(run)
        assert [(i.revision, i.by) for i in reissued.issues] == [
            (1, "A. Thorneycroft"),
            (2, "J. Ilesanmi"),
        ]
        final = soup_of(reissued, reports)
        assert text(final, "#issued-by") == "J. Ilesanmi, Deputy Technical Manager"
        assert text(final, "#date-issued") == reissued.issues[1].time[:10]
        assert main(["verify", str(run)]) == 0

    def test_an_unfinished_run_is_not_issued(self, at_the_bench, tmp_path, capsys):
        """A run stopped before its last point is refused (resume it first); nothing is written."""
        readings = tmp_path / "short.csv"
        readings.write_text(
            (DATA / "qm40-procedure-readings.csv")
            .read_text()
            .replace("dcv-10,8 V,8.25", "dcv-10,8 V,abort")
        )
        assert (
            main(
                [
                    "run",
                    str(DATA / "qm40-procedure.yaml"),
                    "--bench",
                    str(DATA / "bench-kestrel.yaml"),
                    "--lab",
                    str(DATA / "lab-test.yaml"),
                    "--readings",
                    str(readings),
                    "--serial",
                    "S",
                    "--customer",
                    "C",
                    "--condition",
                    "as new",
                    "--runs",
                    str(tmp_path / "runs"),
                ]
            )
            != 0
        )
        (run,) = (tmp_path / "runs").iterdir()
        before = files_of(run)
        assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 1
        assert "not complete" in capsys.readouterr().err
        assert files_of(run) == before

    def test_issue_by_the_current_lab_profile(self, at_the_bench, tmp_path, capsys):
        """--lab gives the lab's current profile (a person added since the run may issue); the
        profile of another lab is refused."""
        run = bench_run(tmp_path)
        current = tmp_path / "lab-now.yaml"
        current.write_text(
            (DATA / "lab-test.yaml")
            .read_text()
            .replace(
                "    - {name: J. Ilesanmi",
                "    - {name: K. Varga, role: Technical Manager}\n    - {name: J. Ilesanmi",
            )
        )
        other = tmp_path / "lab-other.yaml"
        other.write_text(current.read_text().replace("Kestrel Fen Metrology", "Other Lab"))
        assert main(["issue", str(run), "--by", "K. Varga", "--lab", str(other)]) == 1
        assert "the run was made for 'Kestrel Fen Metrology'" in capsys.readouterr().err
        assert (
            main(
                [
                    "issue",
                    str(run),
                    "--by",
                    "K. Varga",
                    "--lab",
                    str(current),
                    "--reports",
                    str(tmp_path / "rep"),
                ]
            )
            == 0
        )
        assert load_record(run).issues[0].role == "Technical Manager"


class TestDryRun:
    def test_a_dry_run_is_never_issued(self, tmp_path, capsys):
        """Issuing a run on the simulated calibrator is refused with the reason; nothing is
        written."""
        run = bench_run(tmp_path, simulate=True)
        before = files_of(run, tmp_path / "rep")
        assert (
            main(["issue", str(run), "--by", "A. Thorneycroft", "--reports", str(tmp_path / "rep")])
            == 1
        )
        err = capsys.readouterr().err
        assert (
            "dry run on the simulated calibrator, not a calibration" in err
            and "can never be issued" in err
        )
        assert files_of(run, tmp_path / "rep") == before

    def test_its_number_is_not_in_the_labs_sequence(self, tmp_path):
        """A dry run's number has its own prefix, never the lab's (KFM)."""
        run = bench_run(tmp_path, simulate=True)
        soup = soup_of(load_record(run), tmp_path / "rep")
        number = text(soup, "#certificate-number")
        assert number.startswith("DRYRUN-") and "KFM" not in number
        assert soup.body["data-state"] == "dry-run"
        assert text(soup, "#page-mark") == "DRY RUN ON THE SIMULATED CALIBRATOR: NOT A CALIBRATION"
        assert text(soup, ".watermark") == "DRY RUN"
        assert "can never be issued" in text(soup, "#authorisation")

    def test_a_bench_on_the_simulator_library_is_a_dry_run(self, tmp_path, capsys):
        """A bench file whose VISA library is the simulator makes a dry run, --simulate or not."""
        from verirun.bench.sim import sim_library

        bench = tmp_path / "bench.yaml"
        bench.write_text(
            (DATA / "bench-kestrel.yaml")
            .read_text()
            .replace(
                "  profile: scpi-generic\n",
                f"  profile: scpi-generic\n  visa-library: {sim_library(tmp_path / 'dev')}\n",
            )
        )
        assert (
            main(
                [
                    "run",
                    str(DATA / "qm40-procedure.yaml"),
                    "--bench",
                    str(bench),
                    "--lab",
                    str(DATA / "lab-test.yaml"),
                    "--readings",
                    str(DATA / "qm40-procedure-readings.csv"),
                    "--serial",
                    "S",
                    "--customer",
                    "C",
                    "--condition",
                    "as new",
                    "--runs",
                    str(tmp_path / "runs"),
                    "--reports",
                    str(tmp_path / "rep"),
                ]
            )
            == 0
        )
        (run,) = (tmp_path / "runs").iterdir()
        assert load_record(run).bench.simulated is True
        assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 1

    def test_a_forged_issue_of_a_dry_run_does_not_verify(self, tmp_path, capsys):
        """An issue document appended to a dry run's journal (chained, so the chain holds) is
        found by verify, and certify refuses the run."""
        from verirun.record.journal import Journal

        run = bench_run(tmp_path, simulate=True)
        with Journal(run / "journal.jsonl") as journal:
            journal.append(
                {
                    "kind": "issue",
                    "time": "2026-12-02T10:00:00Z",
                    "by": "A. Thorneycroft",
                    "role": "Quality Manager",
                    "revision": 1,
                    "certificate": "KFM-1",
                }
            )
        assert main(["verify", str(run)]) == 1
        assert "issues a dry run on the simulated calibrator" in capsys.readouterr().out
        assert main(["certify", str(run), "--reports", str(tmp_path / "again")]) == 1

    def test_the_pdf_carries_banner_and_watermark_on_every_page(self, demo_run_dir, tmp_path):
        """Every page of a dry run's PDF says it is a dry run, not a calibration, and carries the
        watermark."""
        pytest.importorskip("weasyprint")
        from pypdf import PdfReader

        from verirun.certificate.render import render_html, write_pdf

        pdf = write_pdf(render_html(load_record(demo_run_dir)), tmp_path / "dry.pdf")
        pages = PdfReader(pdf).pages
        assert len(pages) >= 3
        for page in pages:
            lines = page.extract_text().splitlines()
            assert "DRY RUN ON THE SIMULATED CALIBRATOR: NOT A CALIBRATION" in lines
            assert "DRY RUN" in lines  # the watermark


class TestTheDraftOnPaper:
    def test_every_page_of_a_drafts_pdf_is_marked(self, at_the_bench, tmp_path):
        """Every page of a draft's PDF says it is a draft, not issued; once issued, none does."""
        pytest.importorskip("weasyprint")
        from pypdf import PdfReader

        from verirun.certificate.render import render_html, write_pdf

        run = bench_run(tmp_path)
        pages = PdfReader(write_pdf(render_html(load_record(run)), tmp_path / "draft.pdf")).pages
        assert len(pages) >= 3
        assert all("DRAFT FOR REVIEW: NOT ISSUED" in p.extract_text() for p in pages)
        assert (
            main(
                [
                    "issue",
                    str(run),
                    "--by",
                    "A. Thorneycroft",
                    "--reports",
                    str(tmp_path / "rep"),
                    "--pdf",
                ]
            )
            == 0
        )
        issued = PdfReader(
            certificate_path(load_record(run), tmp_path / "rep").with_suffix(".pdf")
        ).pages
        assert not any("DRAFT" in p.extract_text() for p in issued)


def test_the_issue_document_is_in_the_record_and_journal_chain(at_the_bench, tmp_path):
    """The record lists each issue; the journal's chain runs through the issue document."""
    from verirun.record.journal import verify_chain

    run = bench_run(tmp_path)
    assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 0
    docs = read_journal(run / "journal.jsonl").documents
    assert verify_chain(docs) == [] and docs[-1]["kind"] == "issue"
    issued = json.loads((run / "record.json").read_text())["issues"]
    assert issued[0]["by"] == "A. Thorneycroft"
    assert dt.date.fromisoformat(issued[0]["time"][:10]) >= dt.date.fromisoformat(
        load_record(run).run.started[:10]
    )


def test_two_people_issuing_at_once_get_one_issue(at_the_bench, tmp_path, capsys):
    """While one process holds the run's writer lock, another's issue is refused as busy and
    writes nothing."""
    from verirun.locks import run_lock

    run = bench_run(tmp_path)
    before = files_of(run)
    assert main(["issue", str(run), "--by", "P. Nobody"]) == 1  # refused before the lock is taken
    assert files_of(run) == before
    with run_lock(run):
        assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 5
        assert "in use by another verirun process" in capsys.readouterr().err
        assert files_of(run) == before
    assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 0


def test_a_hostile_lab_prefix_cannot_break_out_of_the_page_mark(tmp_path):
    """Quotes, a closing style tag or a line break in the text of a page mark stay inside its
    CSS string."""
    from verirun.certificate.render import css_string

    quoted = str(css_string('A"}</style><script>x</script>\n\\'))
    assert quoted.startswith('"') and quoted.endswith('"')
    inner = quoted[1:-1]
    assert '"' not in inner and "<" not in inner and "\n" not in inner and "\\5c " in inner


def test_an_older_profile_s_signatory_may_issue():
    """A lab as recorded from a profile with one signatory (no list) lets that person issue."""
    from verirun.issue import find_person

    lab = {"signatory": {"name": "M. Okonkwo-Hale", "title": "Quality Manager"}}
    assert find_person(lab, "M. Okonkwo-Hale") == {
        "name": "M. Okonkwo-Hale",
        "role": "Quality Manager",
    }
    with pytest.raises(Exception, match="nobody|M. Okonkwo-Hale"):
        find_person(lab, "someone else")


def test_a_full_disk_while_issuing_is_said_not_a_traceback(
    at_the_bench, tmp_path, capsys, monkeypatch
):
    """If the journal cannot be written (ENOSPC), issue exits 3 (a file that could not be
    written) with the reason, not as a bug."""
    import errno
    import os as os_module

    from verirun.record import journal as record_module

    run = bench_run(tmp_path)

    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(record_module.os, "fsync", full)
    assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 3
    assert "journal.jsonl: no space left on the device" in capsys.readouterr().err
    monkeypatch.setattr(record_module.os, "fsync", os_module.fsync)


def test_certify_renders_the_issued_state_again(at_the_bench, tmp_path, capsys):
    """`verirun certify` of an issued run renders it issued, the same bytes as at issue, and says
    so."""
    run = bench_run(tmp_path)
    assert (
        main(["issue", str(run), "--by", "A. Thorneycroft", "--reports", str(tmp_path / "rep")])
        == 0
    )
    path = certificate_path(load_record(run), tmp_path / "rep")
    issued = path.read_bytes()
    capsys.readouterr()
    assert main(["certify", str(run), "--reports", str(tmp_path / "again")]) == 0
    assert "(revision 1 issued" in capsys.readouterr().out
    assert (tmp_path / "again" / path.name).read_bytes() == issued


def test_runs_lists_each_certificate_state(at_the_bench, tmp_path, capsys):
    """`verirun runs --json` says of each run whether its certificate is a draft, issued, or a dry
    run."""
    draft = bench_run(tmp_path)
    issued = bench_run(tmp_path)
    dry = bench_run(tmp_path, simulate=True)
    assert main(["issue", str(issued), "--by", "A. Thorneycroft"]) == 0
    capsys.readouterr()
    assert main(["runs", "--runs", str(tmp_path / "runs"), "--json"]) == 0
    states = {row["run"]: row["certificate_state"] for row in json.loads(capsys.readouterr().out)}
    assert states == {draft.name: "draft", issued.name: "issued", dry.name: "dry run"}


def test_the_issued_certificate_replaces_the_draft_where_it_is(at_the_bench, tmp_path):
    """Without --reports, issue writes into the folder the run put its draft in."""
    run = bench_run(tmp_path)
    draft = certificate_path(load_record(run), tmp_path / "rep")
    assert (
        BeautifulSoup(draft.read_text(encoding="utf-8"), "html.parser").body["data-state"]
        == "draft"
    )
    assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 0
    assert (
        BeautifulSoup(draft.read_text(encoding="utf-8"), "html.parser").body["data-state"]
        == "issued"
    )
    assert not Path("reports").exists()


def test_a_name_with_markup_is_printed_as_text(at_the_bench, tmp_path):
    """A person's name and role with markup in the lab profile appear on the certificate as the
    text they are, never as markup."""
    lab = tmp_path / "lab.yaml"
    lab.write_text(
        (DATA / "lab-test.yaml")
        .read_text()
        .replace(
            "    - {name: J. Ilesanmi, role: Deputy Technical Manager}",
            "    - {name: '<b>Eve</b>', role: '\"/><script>alert(1)</script>'}",
        )
    )
    run = bench_run(tmp_path)
    assert (
        main(
            [
                "issue",
                str(run),
                "--by",
                "<b>Eve</b>",
                "--lab",
                str(lab),
                "--reports",
                str(tmp_path / "rep"),
            ]
        )
        == 0
    )
    html = certificate_path(load_record(run), tmp_path / "rep").read_text(encoding="utf-8")
    soup = BeautifulSoup(html, "html.parser")
    assert text(soup, "#issued-by") == '<b>Eve</b>, "/><script>alert(1)</script>'
    assert soup.select_one("#issued-by b") is None and soup.find("script") is None


def test_certify_renders_a_replaced_revision_marked_as_replaced(at_the_bench, tmp_path, capsys):
    """From the stored run alone, certify renders the current revision and, marked as replaced
    and as it was issued, the revision it replaces."""
    run = bench_run(tmp_path)
    assert main(["issue", str(run), "--by", "A. Thorneycroft"]) == 0
    assert amend_point_4(run) == 0
    capsys.readouterr()
    again = tmp_path / "again"
    assert main(["certify", str(run), "--reports", str(again)]) == 0
    assert "marked as replaced" in capsys.readouterr().out
    record = load_record(run)
    current = certificate_path(record, again)
    old = again / current.name.replace("-R2.html", ".html")
    assert sorted(again.glob("*.html")) == sorted([current, old])
    soup = BeautifulSoup(old.read_text(encoding="utf-8"), "html.parser")
    assert current.stem in text(soup, "#replaced-by") and "typed wrong" in text(
        soup, "#replaced-by"
    )
    assert text(soup, "#issued-by") == "A. Thorneycroft, Quality Manager"
    # The same bytes as amend wrote into the run's own folder.
    assert old.read_bytes() == (tmp_path / "rep" / old.name).read_bytes()


def test_amending_a_draft_says_the_draft_was_not_issued(at_the_bench, tmp_path):
    """A correction before anyone issued the run replaces a draft, and says so."""
    run = bench_run(tmp_path)
    number = certificate_path(load_record(run), tmp_path / "rep").stem
    assert amend_point_4(run) == 0
    soup = BeautifulSoup(
        certificate_path(load_record(run), tmp_path / "rep").read_text(encoding="utf-8"),
        "html.parser",
    )
    assert f"replaces the draft {number}, which was not issued" in text(soup, "#revision-changes")
