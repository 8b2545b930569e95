"""Register fixtures: a register on SQLite and on a real PostgreSQL server, and a way to close
runs of the register tests' procedure at a given time with given readings.

The PostgreSQL server is started once per test session by the tests themselves (initdb and
pg_ctl in a temporary folder, on a free loopback port, as a non-root user when run as root) and
stopped at the end; each test gets a fresh database on it. Without the server binaries the
PostgreSQL tests are skipped, except in CI (CI=true), where they must run.
"""

from __future__ import annotations

import datetime as dt
import glob
import os
import shutil
import socket
import subprocess
import tempfile
import uuid
from pathlib import Path

import pytest

DATA = Path(__file__).resolve().parent.parent / "data" / "register"


def _pg_bin() -> Path | None:
    found = shutil.which("pg_ctl")
    if found:
        return Path(os.path.realpath(found)).parent
    versions = sorted(
        glob.glob("/usr/lib/postgresql/*/bin/pg_ctl"),
        key=lambda p: (
            int(Path(p).parent.parent.name) if Path(p).parent.parent.name.isdigit() else 0
        ),
    )
    return Path(versions[-1]).parent if versions else None


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _as_server_user(command: list[str]) -> list[str]:
    """PostgreSQL refuses to run as root: run it as the ``postgres`` system user then."""
    if os.geteuid() != 0:
        return command
    return ["runuser", "-u", "postgres", "--"] + command


@pytest.fixture(scope="session")
def pg_server():
    """A PostgreSQL server for the whole session: (base URL without a database, admin DSN)."""
    bin_dir = _pg_bin()
    if bin_dir is None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(
                "CI must run the PostgreSQL tests, but no PostgreSQL server binaries were found"
                " (.ci/run installs the distribution's postgresql package)"
            )
        pytest.skip("no PostgreSQL server binaries (pg_ctl, initdb) on this machine")
    if (
        os.geteuid() == 0
        and subprocess.run(["id", "postgres"], capture_output=True).returncode != 0
    ):
        subprocess.run(["useradd", "--system", "--no-create-home", "postgres"], check=True)
    root = Path(tempfile.mkdtemp(prefix="verirun-pg-"))
    data, sockets = root / "data", root / "sock"
    sockets.mkdir()
    if os.geteuid() == 0:
        shutil.chown(root, "postgres")
        shutil.chown(sockets, "postgres")
    port = _free_port()
    subprocess.run(
        _as_server_user(
            [
                str(bin_dir / "initdb"),
                "-D",
                str(data),
                "-U",
                "verirun",
                "--auth=trust",
                "--encoding=UTF8",
                "--no-sync",
            ]
        ),
        check=True,
        capture_output=True,
    )
    options = (
        f"-p {port} -k {sockets} -c listen_addresses=127.0.0.1 -c fsync=off"
        " -c synchronous_commit=off -c full_page_writes=off -c max_connections=60"
    )
    subprocess.run(
        _as_server_user(
            [
                str(bin_dir / "pg_ctl"),
                "-D",
                str(data),
                "-o",
                options,
                "-w",
                "-t",
                "60",
                "-l",
                str(root / "server.log"),
                "start",
            ]
        ),
        check=True,
        capture_output=True,
    )
    base = f"postgresql://verirun@127.0.0.1:{port}"
    try:
        import psycopg

        from verirun.cli import main

        # One migrated database to copy for every test: a copy is faster than migrating anew.
        with psycopg.connect(base + "/postgres", autocommit=True) as connection:
            connection.execute("CREATE DATABASE verirun_template")
        assert main(["register", "migrate", "--register", base + "/verirun_template"]) == 0
        yield base
    finally:
        from verirun.register.db import forget_open

        forget_open()
        subprocess.run(
            _as_server_user(
                [str(bin_dir / "pg_ctl"), "-D", str(data), "-m", "immediate", "-w", "stop"]
            ),
            check=False,
            capture_output=True,
        )
        shutil.rmtree(root, ignore_errors=True)


@pytest.fixture
def pg_url(pg_server):
    """A fresh, migrated database on the session's server."""
    import psycopg

    name = "t_" + uuid.uuid4().hex[:12]
    with psycopg.connect(pg_server + "/postgres", autocommit=True) as connection:
        connection.execute(f"CREATE DATABASE {name} TEMPLATE verirun_template")
    return f"{pg_server}/{name}"


@pytest.fixture(params=["sqlite", "postgresql"])
def register_url(request, tmp_path):
    """The register's name, on each database verirun keeps it in."""
    if request.param == "sqlite":
        return str(tmp_path / "register.db")
    return request.getfixturevalue("pg_url")


@pytest.fixture
def register(register_url, monkeypatch):
    """The open register, also named for the commands (VERIRUN_REGISTER)."""
    from verirun.register import config
    from verirun.register.db import open_register

    monkeypatch.setenv("VERIRUN_REGISTER", register_url)
    config.use(None)
    return open_register(register_url)


class _Typed:
    """Readings given as typed text, one per step in order."""

    interactive = False

    def __init__(self, typed: list[str]):
        self._typed = list(typed)

    def take(self, point):
        from verirun.readings import parse_entry

        return parse_entry(self._typed.pop(0), point)


def close_run(
    runs_dir: Path,
    *,
    serial: str = "PV3-0001",
    readings=("2.00", "5.00", "8.00"),
    when: dt.datetime | None = None,
    bench: str = "bench.yaml",
    simulated: bool = False,
    as_left_of: Path | None = None,
    procedure: str = "procedure.yaml",
):
    """Run the test procedure (or ``procedure`` of the test data) on the simulated calibrator
    and close it; return what it left.

    ``simulated=False`` records it as a calibration (the record says so; the calibrator driven
    is still the simulated one), so that it counts in an item's history and due date.
    """
    from runkit import build_run

    from verirun.clock import VirtualClock
    from verirun.conduct import as_found_of
    from verirun.procedure.load import load_procedure
    from verirun.register.standards import load_bench

    when = when or dt.datetime(2026, 3, 1, 9, 0, tzinfo=dt.timezone.utc)
    procedure = load_procedure(DATA / procedure)
    as_found = (
        None
        if as_left_of is None
        else as_found_of(as_left_of, serial=serial, procedure=procedure, adjustment="span trimmed")
    )
    return build_run(
        runs_dir=runs_dir,
        procedure=procedure,
        bench=load_bench(DATA / bench),
        readings=_Typed(list(readings)),
        lab=DATA / "lab.yaml",
        customer="Test Customer",
        item={"serial": serial, "asset": None, "condition": "No damage seen.", "received": None},
        operator="tester",
        simulated=simulated,
        environment={"temperature_c": 23.0, "humidity_pct": 40.0},
        as_found=as_found,
        clock=VirtualClock(when),
    )


@pytest.fixture
def closed_run():
    return close_run
