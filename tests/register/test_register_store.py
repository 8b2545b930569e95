"""The register's store: append-only tables, certificate numbers, closed records stored whole,
the outbox and its sync, on SQLite and on a real PostgreSQL server."""

from __future__ import annotations

import datetime as dt
import json
import subprocess
import sys
from pathlib import Path

import pytest
import sqlalchemy as sa

from verirun.cli import main
from verirun.register.closing import OUTBOX_NAME
from verirun.register.schema import APPEND_ONLY, numbers, records, runs

HERE = Path(__file__).resolve().parent
DATA = HERE.parent / "data" / "register"


def _count(register, table, *where) -> int:
    with register.reading() as connection:
        return connection.execute(
            sa.select(sa.func.count()).select_from(table).where(*where)
        ).scalar()


class TestAppendOnly:
    def test_update_and_delete_of_every_table_are_refused(self, register, tmp_path, closed_run):
        """The database itself refuses to change or remove a stored row, whoever asks."""
        closed_run(tmp_path / "runs")
        assert main(["register", "standard", "--from-bench", str(DATA / "bench.yaml")]) == 0
        for table in APPEND_ONLY:
            key = "run_id" if table == "records" else "id"
            for statement in (f"UPDATE {table} SET {key} = {key}", f"DELETE FROM {table}"):
                with pytest.raises(sa.exc.DBAPIError, match="append-only"):
                    with register.engine.begin() as connection:
                        connection.execute(sa.text(statement))
        assert _count(register, runs) == 1

    def test_truncate_is_refused_on_postgresql(self, register, tmp_path, closed_run):
        """On PostgreSQL a TRUNCATE, which row triggers do not see, is refused as well."""
        if register.dialect != "postgresql":
            pytest.skip("SQLite has no TRUNCATE")
        closed_run(tmp_path / "runs")
        with pytest.raises(sa.exc.DBAPIError, match="append-only"):
            with register.engine.begin() as connection:
                connection.execute(sa.text("TRUNCATE runs CASCADE"))


class TestClosing:
    def test_a_complete_run_takes_the_next_number_of_the_lab_sequence(
        self, register, tmp_path, closed_run
    ):
        """Numbers run RTL-<year>-00001, -00002 in the order runs close, and start again each year;
        the certificate is named by that number and the stored record is the run folder's."""
        first = closed_run(tmp_path / "runs", serial="A-1")
        second = closed_run(tmp_path / "runs", serial="A-2")
        later = closed_run(
            tmp_path / "runs", serial="A-3", when=dt.datetime(2027, 1, 4, tzinfo=dt.timezone.utc)
        )
        assert [f.record.run.certificate_number for f in (first, second, later)] == [
            "RTL-2026-00001",
            "RTL-2026-00002",
            "RTL-2027-00001",
        ]
        assert first.certificate.name == "RTL-2026-00001.html"
        assert main(["verify", str(first.run_dir)]) == 0
        from verirun.record.documents import validate_document
        from verirun.record.journal import read_journal

        docs = read_journal(first.run_dir / "journal.jsonl").documents
        assert docs[-2]["kind"] == "stop" and validate_document(docs[-1]).number == "RTL-2026-00001"
        with register.reading() as connection:
            body = connection.execute(
                sa.select(records.c.body).join(runs).where(runs.c.uid == first.record.run.uid)
            ).scalar()
        assert json.loads(body) == json.loads((first.run_dir / "record.json").read_text())

    def test_points_are_stored_with_their_error_as_a_fraction_of_tolerance(
        self, register, tmp_path, closed_run
    ):
        """Reading 2.05 V at 2 V with ±2 % of 10 V full scale (±0.2 V) is an error of 0.25 of the
        tolerance (arithmetic of the accuracy statement)."""
        from verirun.register.schema import points

        closed_run(tmp_path / "runs", readings=("2.05", "4.90", "8.30"))
        with register.reading() as connection:
            rows = connection.execute(sa.select(points).order_by(points.c.step)).mappings().all()
        assert [r["step"] for r in rows] == [1, 2, 3]
        assert rows[0]["error_fraction"] == pytest.approx(0.25)
        assert rows[1]["error_fraction"] == pytest.approx(-0.5) and rows[1]["nominal"] == 5.0
        assert rows[2]["error_fraction"] == pytest.approx(1.5) and rows[2]["verdict"] == "fail"

    def test_a_correction_is_a_new_revision_not_an_update(self, register, tmp_path, closed_run):
        """Amending a reading stores revision 2 beside revision 1; the number stays, with -R2."""
        finished = closed_run(tmp_path / "runs")
        assert (
            main(
                [
                    "amend",
                    str(finished.run_dir),
                    "--point",
                    "2",
                    "--reading",
                    "5.02",
                    "--reason",
                    "typo",
                    "--reports",
                    str(tmp_path / "reports"),
                ]
            )
            == 0
        )
        uid = finished.record.run.uid
        with register.reading() as connection:
            rows = connection.execute(
                sa.select(runs.c.revision, runs.c.certificate)
                .where(runs.c.uid == uid)
                .order_by(runs.c.revision)
            ).all()
        assert rows == [(1, "RTL-2026-00001"), (2, "RTL-2026-00001-R2")]
        assert (tmp_path / "reports" / "RTL-2026-00001-R2.html").exists()

    def test_a_stopped_run_is_stored_without_a_number(self, register, tmp_path, closed_run):
        """A run stopped part-way is listed with its status and takes no certificate number."""
        from verirun.errors import RunAborted

        with pytest.raises(RunAborted):
            closed_run(tmp_path / "runs", readings=("2.00", "abort"))
        assert _count(register, runs, runs.c.status == "aborted") == 1
        assert _count(register, numbers) == 0


class TestOutbox:
    def _down(self, register_url, tmp_path, monkeypatch):
        import socket

        if "://" in register_url:
            with socket.socket() as sock:
                sock.bind(("127.0.0.1", 0))
                port = sock.getsockname()[1]
            down = f"postgresql://verirun@127.0.0.1:{port}/nothing"
        else:
            down = str(tmp_path / "unmounted" / "register.db")
        monkeypatch.setenv("VERIRUN_REGISTER", down)

    def test_a_run_closed_while_the_register_is_down_is_synced_later_exactly_once(
        self, register, register_url, tmp_path, closed_run, monkeypatch
    ):
        """The run is kept in its folder's outbox with no certificate; sync numbers and stores
        it; a second sync, or a sync after a crash that left the outbox file, stores nothing."""
        self._down(register_url, tmp_path, monkeypatch)
        finished = closed_run(tmp_path / "runs")
        assert (finished.run_dir / OUTBOX_NAME).exists()
        assert finished.certificate is None and finished.record.run.certificate_number is None
        assert main(["certify", str(finished.run_dir), "--reports", str(tmp_path / "reports")]) == 1
        monkeypatch.setenv("VERIRUN_REGISTER", register_url)
        closed_run(tmp_path / "runs", serial="B-2")  # another bench's run closes meanwhile
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert not (finished.run_dir / OUTBOX_NAME).exists()
        uid = finished.record.run.uid
        assert _count(register, runs, runs.c.uid == uid) == 1
        with register.reading() as connection:
            assert (
                connection.execute(
                    sa.select(numbers.c.text).where(numbers.c.run_uid == uid)
                ).scalar()
                == "RTL-2026-00002"
            )
        assert main(["verify", str(finished.run_dir)]) == 0
        # A crash between storing and removing the outbox file: sending again doubles nothing.
        (finished.run_dir / OUTBOX_NAME).write_text("{}", encoding="utf-8")
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert _count(register, runs) == 2 and _count(register, numbers) == 2
        assert main(["certify", str(finished.run_dir), "--reports", str(tmp_path / "reports")]) == 0
        assert (tmp_path / "reports" / "RTL-2026-00002.html").exists()

    def test_a_signal_while_sending_leaves_the_run_in_the_outbox(
        self, register, tmp_path, closed_run, monkeypatch
    ):
        """Ctrl-C (or SIGTERM) landing while the register is written: the run is kept in the
        outbox, and a later sync numbers and stores it."""
        from verirun.register import store

        real = store.store_records

        def interrupted(*args, **kwargs):
            raise KeyboardInterrupt("terminated (SIGTERM)")

        monkeypatch.setattr(store, "store_records", interrupted)
        with pytest.raises(KeyboardInterrupt):
            closed_run(tmp_path / "runs")
        folder = next((tmp_path / "runs").iterdir())
        assert (folder / OUTBOX_NAME).exists() and _count(register, runs) == 0
        monkeypatch.setattr(store, "store_records", real)
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert _count(register, runs) == 1 and not (folder / OUTBOX_NAME).exists()

    def test_a_correction_made_while_the_register_is_down_is_issued_and_synced(
        self, register, register_url, tmp_path, closed_run, monkeypatch, capsys
    ):
        """A numbered run corrected with the register down keeps its number (the certificate
        -R2 is issued at once); the operator is told, and sync stores revision 2."""
        finished = closed_run(tmp_path / "runs")
        self._down(register_url, tmp_path, monkeypatch)
        assert (
            main(
                [
                    "amend",
                    str(finished.run_dir),
                    "--point",
                    "2",
                    "--reading",
                    "5.01",
                    "--reason",
                    "typo",
                    "--reports",
                    str(tmp_path / "reports"),
                ]
            )
            == 0
        )
        assert "waits in the run's outbox" in capsys.readouterr().err
        assert (tmp_path / "reports" / "RTL-2026-00001-R2.html").exists()
        monkeypatch.setenv("VERIRUN_REGISTER", register_url)
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert _count(register, runs, runs.c.revision == 2) == 1 and _count(register, numbers) == 1

    def test_issuing_waits_for_the_number_and_the_issued_record_is_stored(
        self, register, register_url, tmp_path, closed_run, monkeypatch, capsys
    ):
        """A run closed with the register down cannot be issued yet (its number would change
        after issue; ISO/IEC 17025:2017 7.8.2.1 b asks for a unique identification, from memory);
        once synced it is issued under the register's number, and the issued record is stored
        whole as well."""
        self._down(register_url, tmp_path, monkeypatch)
        finished = closed_run(tmp_path / "runs")
        before = finished.run_dir.joinpath("journal.jsonl").read_bytes()
        assert main(["issue", str(finished.run_dir), "--by", "A. Tester"]) == 1
        assert "waits for its certificate number" in capsys.readouterr().err
        assert finished.run_dir.joinpath("journal.jsonl").read_bytes() == before  # nothing written
        monkeypatch.setenv("VERIRUN_REGISTER", register_url)
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert (
            main(
                [
                    "issue",
                    str(finished.run_dir),
                    "--by",
                    "A. Tester",
                    "--reports",
                    str(tmp_path / "reports"),
                ]
            )
            == 0
        ), capsys.readouterr().err
        issued = json.loads((finished.run_dir / "record.json").read_text())
        assert (
            issued["issues"][0]["certificate"]
            == issued["run"]["certificate_number"]
            == "RTL-2026-00001"
        )
        uid = issued["run"]["uid"]
        assert _count(register, runs, runs.c.uid == uid) == 2  # as closed, and as issued
        assert main(["verify", str(finished.run_dir)]) == 0

    def test_a_tampered_run_in_the_outbox_is_not_sent(
        self, register, register_url, tmp_path, closed_run, monkeypatch, capsys
    ):
        """Sync verifies first: an edited record stays in the outbox, reported, exit 1."""
        self._down(register_url, tmp_path, monkeypatch)
        finished = closed_run(tmp_path / "runs")
        path = finished.run_dir / "record.json"
        path.write_text(path.read_text().replace('"tester"', '"someone else"'))
        monkeypatch.setenv("VERIRUN_REGISTER", register_url)
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 1
        assert "not sent" in capsys.readouterr().out
        assert (finished.run_dir / OUTBOX_NAME).exists() and _count(register, runs) == 0

    def test_sync_leaves_a_run_another_process_is_writing_and_sends_it_after(
        self, register, register_url, tmp_path, closed_run, monkeypatch, capsys
    ):
        """A run whose writer lock another process holds (an amend, a resume, a second sync) is
        not touched: reported busy, exit 5, its journal as it was; sent once the lock is free."""
        from verirun.locks import run_lock

        self._down(register_url, tmp_path, monkeypatch)
        finished = closed_run(tmp_path / "runs")
        monkeypatch.setenv("VERIRUN_REGISTER", register_url)
        journal = finished.run_dir / "journal.jsonl"
        before = journal.read_bytes()
        with run_lock(finished.run_dir):
            assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 5
            assert "in use by another verirun process" in capsys.readouterr().out
            assert journal.read_bytes() == before and _count(register, numbers) == 0
        assert main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        assert journal.read_text().count('"kind":"certificate-number"') == 1
        assert _count(register, numbers) == 1
        from runkit import fits_the_journal_schema

        fits_the_journal_schema(
            [json.loads(line) for line in journal.read_text(encoding="utf-8").splitlines()]
        )

    def test_two_syncs_at_once_append_each_number_once(
        self, register, register_url, tmp_path, closed_run, monkeypatch
    ):
        """Two processes sync the same six waiting runs at the same moment: each run's journal
        gets one certificate-number document, the numbers are 1 to 6, and every run verifies."""
        import os
        import time

        self._down(register_url, tmp_path, monkeypatch)
        made = [closed_run(tmp_path / "runs", serial=f"S-{n}") for n in range(6)]
        monkeypatch.setenv("VERIRUN_REGISTER", register_url)
        env = {**os.environ, "VERIRUN_REGISTER": register_url}
        start_at = str(time.time() + 4.0)  # after both processes have imported what they need
        procs = [
            subprocess.Popen(
                [sys.executable, "-c", _SYNCER, str(tmp_path / "runs"), start_at],
                env=env,
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
            )
            for _ in range(2)
        ]
        outs = [p.communicate(timeout=240) for p in procs]
        assert sorted(p.returncode for p in procs) in ([0, 0], [0, 5], [5, 5]), outs
        assert (
            main(["register", "sync", "--runs", str(tmp_path / "runs")]) == 0
        )  # anything left busy
        for finished in made:
            text = (finished.run_dir / "journal.jsonl").read_text()
            assert text.count('"kind":"certificate-number"') == 1, finished.run_dir
            assert not (finished.run_dir / OUTBOX_NAME).exists()
            assert main(["verify", str(finished.run_dir)]) == 0
        with register.reading() as connection:
            assert sorted(connection.execute(sa.select(numbers.c.number)).scalars()) == list(
                range(1, 7)
            )


_SYNCER = r"""
import sys, time
from verirun.cli import main
time.sleep(max(0.0, float(sys.argv[2]) - time.time()))  # both start sending at the same moment
sys.exit(main(["register", "sync", "--runs", sys.argv[1]]))
"""


_CLOSER = r"""
import sys, datetime as dt
from pathlib import Path
sys.path[:0] = [sys.argv[1], str(Path(sys.argv[1]).parent)]  # the register's conftest, runkit
from conftest import close_run
import time
runs_dir, count = Path(sys.argv[2]), int(sys.argv[3])
time.sleep(max(0.0, float(sys.argv[5]) - time.time()))  # every bench starts closing at the same moment
for n in range(count):
    close_run(runs_dir, serial=f"{sys.argv[4]}-{n}")
print("done")
"""  # noqa: E501


class TestConcurrency:
    def test_four_benches_closing_runs_at_once_share_no_number_and_lose_none(
        self, register, register_url, tmp_path
    ):
        """Four processes close five runs each at the same time: twenty runs stored, numbered
        1 to 20 with no gap and no number shared."""
        import os
        import time

        env = {**os.environ, "VERIRUN_REGISTER": register_url}
        start_at = str(time.time() + 4.0)  # after every process has imported what it needs
        procs = [
            subprocess.Popen(
                [
                    sys.executable,
                    "-c",
                    _CLOSER,
                    str(HERE),
                    str(tmp_path / f"bench{b}"),
                    "5",
                    f"C{b}",
                    start_at,
                ],
                env=env,
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
            )
            for b in range(4)
        ]
        outs = [p.communicate(timeout=240) for p in procs]
        assert all(p.returncode == 0 for p in procs), [err[-2000:] for _, err in outs]
        with register.reading() as connection:
            taken = sorted(connection.execute(sa.select(numbers.c.number)).scalars())
            stored = connection.execute(sa.select(runs.c.certificate)).scalars().all()
        assert taken == list(range(1, 21))
        assert len(stored) == 20 and len(set(stored)) == 20
        folders = [p for b in range(4) for p in (tmp_path / f"bench{b}").iterdir()]
        assert all(not (p / OUTBOX_NAME).exists() for p in folders) and len(folders) == 20


class TestCertificatesOfANumberedRun:
    def test_verify_with_reports_finds_the_certificate_by_the_register_number(
        self, register, tmp_path, closed_run
    ):
        """The certificate of a run numbered by the register is named by that number; verify
        --reports finds it by that name, so one issued from more of the journal than it now
        holds is refused as for a run numbered by its uid."""
        from verirun.record.journal import read_journal
        from verirun.record.verify import certificates_of, reach_problems

        finished = closed_run(tmp_path / "runs")
        docs = read_journal(finished.run_dir / "journal.jsonl").documents
        assert certificates_of(docs, finished.certificate.parent) == [finished.certificate]
        # The journal as it stood before its stop: the certificate was issued from more of it.
        found = reach_problems(finished.run_dir, docs[:-2], finished.certificate.parent)
        assert any(str(finished.certificate) in line for line in found)
