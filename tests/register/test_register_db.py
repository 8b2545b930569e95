"""Naming and opening a register, and migrating a server's schema on purpose."""

from __future__ import annotations

import uuid
from pathlib import Path

import pytest
from at_the_bench import calibrator_at_the_bench

from verirun.cli import main
from verirun.register.db import RegisterError, url_of

DATA = Path(__file__).resolve().parents[1] / "data" / "register"


def standard_from_bench(register: str, *extra: str) -> int:
    """`verirun register standard --from-bench`: the register tests' bench's standard entered."""
    return main(
        [
            "register",
            "standard",
            "--from-bench",
            str(DATA / "bench.yaml"),
            *extra,
            "--register",
            register,
        ]
    )


def run_by_asset(readings: Path, serial: str, customer: str, register: str) -> int:
    """`verirun run` at the bench of the register tests' procedure, on the bench file that names
    its standard by asset, numbered by ``register``; the exit code."""
    return main(
        [
            "run",
            str(DATA / "procedure.yaml"),
            "--bench",
            str(DATA / "bench-by-asset.yaml"),
            "--readings",
            str(readings),
            "--serial",
            serial,
            "--customer",
            customer,
            "--condition",
            "as new",
            "--lab",
            str(DATA / "lab.yaml"),
            "--temperature",
            "23",
            "--humidity",
            "40",
            "--register",
            register,
        ]
    )


class TestNames:
    def test_a_path_is_sqlite_and_a_postgresql_url_uses_psycopg(self, tmp_path):
        """A plain path is an embedded SQLite file; postgresql:// is driven by psycopg 3."""
        assert url_of(str(tmp_path / "r.db")).drivername == "sqlite"
        assert url_of("postgresql://lab@db/register").drivername == "postgresql+psycopg"

    def test_another_database_is_refused_and_no_password_is_shown(self):
        """verirun keeps its register on SQLite or PostgreSQL only; a refusal hides the password."""
        with pytest.raises(RegisterError, match="SQLite or PostgreSQL") as caught:
            url_of("mysql://lab:secret@db/register")
        assert "secret" not in str(caught.value)


class TestMigrate:
    def test_an_empty_server_database_is_refused_until_migrated(self, pg_server, capsys):
        """A bench never migrates a shared server behind the lab's back: it says how, and after
        'register migrate' (run twice: the second does nothing) the register is used."""
        import psycopg

        name = "m_" + uuid.uuid4().hex[:12]
        with psycopg.connect(pg_server + "/postgres", autocommit=True) as connection:
            connection.execute(f"CREATE DATABASE {name}")
        url = f"{pg_server}/{name}"
        assert main(["runs", "--register", url]) == 1
        assert "verirun register migrate" in capsys.readouterr().err
        assert main(["register", "migrate", "--register", url]) == 0
        assert "(was empty)" in capsys.readouterr().out
        assert main(["register", "migrate", "--register", url]) == 0
        assert "(already)" in capsys.readouterr().out
        assert main(["runs", "--register", url]) == 0
        assert "no runs in register" in capsys.readouterr().out


class TestCommandLine:
    def test_a_run_at_the_command_line_uses_the_named_register(self, tmp_path, capsys, monkeypatch):
        """`run --register FILE` takes its standard by asset and its certificate number from an
        embedded register made on first use, and `runs --register FILE` lists it."""

        monkeypatch.delenv("VERIRUN_REGISTER", raising=False)
        name = str(tmp_path / "lab-register.db")
        assert standard_from_bench(name) == 0
        # A calibration at the bench (a dry run takes no number from the lab's sequence).
        with calibrator_at_the_bench():
            assert run_by_asset(DATA / "readings.csv", "CLI-1", "Test Customer", name) == 0
        reports = list((tmp_path / "reports").iterdir())
        assert (
            len(reports) == 1
            and reports[0].name.startswith("RTL-")
            and reports[0].name.endswith("-00001.html")
        )
        capsys.readouterr()
        assert main(["runs", "--json", "--register", name]) == 0
        import json

        (row,) = json.loads(capsys.readouterr().out)
        assert (row["item"], row["certificate"]) == ("CLI-1", reports[0].stem)

    @pytest.mark.parametrize("renewed", [False, True])
    def test_a_run_on_a_bench_naming_its_standard_by_asset_resumes_with_that_bench(
        self, tmp_path, capsys, monkeypatch, renewed
    ):
        """A run stopped part-way on a bench file that names its calibrator by asset resumes with
        `--bench` that same file: the standard is taken from the register again, so the bench is
        the one the run started with (or, after the standard's recalibration was entered, the same
        but for its renewed calibration, noted), and the run completes with its register number."""
        import json

        monkeypatch.delenv("VERIRUN_REGISTER", raising=False)
        name = str(tmp_path / "lab-register.db")
        assert standard_from_bench(name) == 0
        stopped = tmp_path / "stopped.csv"
        stopped.write_text(
            "range,at,reading\ndcv-10,2 V,2.01 V\ndcv-10,5 V,abort\n", encoding="utf-8"
        )
        rest = tmp_path / "rest.csv"
        rest.write_text(
            "range,at,reading\ndcv-10,5 V,5.02 V\ndcv-10,8 V,7.98 V\n", encoding="utf-8"
        )
        bench = calibrator_at_the_bench()  # a calibration: the register numbers it
        bench.__enter__()
        assert run_by_asset(stopped, "RES-1", "C", name) == 2
        (run_dir,) = (tmp_path / "runs").iterdir()
        if renewed:
            assert (
                standard_from_bench(name, "--certificate", "RT-CC-0002", "--due", "2100-06-30") == 0
            )
        capsys.readouterr()
        try:
            assert (
                main(
                    [
                        "resume",
                        str(run_dir),
                        "--bench",
                        str(DATA / "bench-by-asset.yaml"),
                        "--readings",
                        str(rest),
                        "--register",
                        name,
                    ]
                )
                == 0
            ), capsys.readouterr().err
        finally:
            bench.__exit__(None, None, None)
        record = json.loads((run_dir / "record.json").read_text())
        assert record["run"]["status"] == "complete"
        assert record["run"]["certificate_number"].endswith("-00001")
        assert (
            any(
                "certificate RT-CC-0002, due 2100-06-30" in note["text"] for note in record["notes"]
            )
            == renewed
        )
        # Without the register the asset cannot be resolved: a clear error, not a traceback.
        assert main(["resume", str(run_dir), "--bench", str(DATA / "bench-by-asset.yaml")]) == 1


def test_a_register_a_later_verirun_migrated_is_refused_in_words(tmp_path, capsys):
    """A bench whose verirun is older than the register's schema (another bench was upgraded
    and migrated it) is told to upgrade, not to migrate, and no traceback is printed."""
    import sqlalchemy as sa

    from verirun.register.db import RegisterError, forget_open, open_register

    url = f"sqlite:///{tmp_path / 'later.db'}"
    open_register(url)
    forget_open()
    engine = sa.create_engine(url)
    with engine.begin() as connection:
        connection.exec_driver_sql("UPDATE alembic_version SET version_num = '9999'")
    engine.dispose()
    with pytest.raises(RegisterError, match="revision 9999, newer than this verirun"):
        open_register(url)
    forget_open()
    assert main(["runs", "--register", url]) != 0
    err = capsys.readouterr().err
    assert "upgrade verirun" in err and "Traceback" not in err
