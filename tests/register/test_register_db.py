"""Naming and opening a register, and migrating a server's schema on purpose."""

from __future__ import annotations

import uuid

import pytest

from verirun.cli import main
from verirun.register.db import RegisterError, url_of


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
