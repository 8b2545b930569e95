"""The register's commands: ``register migrate|rebuild|sync|standard|item``, ``due``, ``history``,
and the ``--register`` option of the commands that close or list runs."""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
from pathlib import Path

#: Commands that close, correct or list runs, and so use a register when one is named.
USES_REGISTER = ("demo", "run", "resume", "amend", "issue", "runs")

_HELP = (
    "the lab register: a file path (SQLite, made on first use) or a database URL such as"
    " postgresql://user@host/lab; default: $VERIRUN_REGISTER, else none"
)


def add_register_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--register", metavar="PATH|URL", help=_HELP)


def add_parsers(sub) -> None:
    """Add the register's commands to the CLI's subparsers, and its option to those that use it."""
    for name in USES_REGISTER:
        add_register_option(sub.choices[name])
    reg = sub.add_parser(
        "register", help="the lab register: migrate, rebuild, sync, enter standards and items"
    )
    rsub = reg.add_subparsers(dest="register_command", metavar="ACTION", required=True)
    migrate = rsub.add_parser(
        "migrate", help="bring the register's schema to this verirun's revision"
    )
    rebuild = rsub.add_parser(
        "rebuild", help="index run folders into the register; report any that do not verify"
    )
    rebuild.add_argument("folder", type=Path, help="a folder of run folders (or one run folder)")
    sync = rsub.add_parser("sync", help="send the runs kept while the register was unreachable")
    sync.add_argument("--runs", type=Path, default=Path("runs"), help="folder of run folders")
    standard = rsub.add_parser(
        "standard", help="enter a standard (its next revision) from a bench file"
    )
    standard.add_argument(
        "--from-bench",
        type=Path,
        required=True,
        metavar="BENCH",
        help="a complete bench file whose calibrator section describes the standard",
    )
    standard.add_argument(
        "--certificate", help="the standard's new certificate (default: the bench file's)"
    )
    standard.add_argument(
        "--due", help="its calibration due date, YYYY-MM-DD (default: the bench file's)"
    )
    item = rsub.add_parser(
        "item", help="enter an item's calibration interval, customer or asset (a new revision)"
    )
    item.add_argument("serial")
    item.add_argument("--model", required=True, help="the meter model (as the procedure names it)")
    item.add_argument("--interval", help="calibration interval: 365d, 52w, 12m or 1y")
    item.add_argument("--customer")
    item.add_argument("--asset")
    for parser in (migrate, rebuild, sync, standard, item):
        add_register_option(parser)
        parser.add_argument(
            "--operator", default=os.environ.get("USER", "operator"), help=argparse.SUPPRESS
        )

    due = sub.add_parser(
        "due", help="standards and items coming due for calibration (from the register)"
    )
    due.add_argument("--within", default="30d", help="how far ahead: 30d, 6w, 3m, 1y (default 30d)")
    due.add_argument("--json", action="store_true", help="print a JSON list")
    add_register_option(due)

    history = sub.add_parser(
        "history", help="an item's as-found errors over its calibrations, with drift"
    )
    history.add_argument("item", help="the item's serial")
    history.add_argument("--model", help="the meter model, when the serial is not unique")
    history.add_argument("--html", type=Path, metavar="FILE", help="write an HTML page with plots")
    history.add_argument(
        "--csv", type=Path, metavar="FILE", help="write every as-found result as CSV"
    )
    history.add_argument("--json", action="store_true", help="print the history as JSON")
    add_register_option(history)


def _open():
    from verirun.register.config import named
    from verirun.register.db import RegisterError, open_register

    name = named()
    if name is None:
        raise RegisterError("name the lab register with --register PATH|URL or VERIRUN_REGISTER")
    return open_register(name)


def cmd_register(args) -> int:
    return {
        "migrate": _migrate,
        "rebuild": _rebuild,
        "sync": _sync,
        "standard": _standard,
        "item": _item,
    }[args.register_command](args)


def _migrate(args) -> int:
    import sqlalchemy as sa

    from verirun.register.config import named
    from verirun.register.db import (
        Register,
        RegisterError,
        head_revision,
        migrate,
        open_register,
        shown,
        url_of,
    )

    name = named()
    if name is None:
        raise RegisterError("name the lab register with --register PATH|URL or VERIRUN_REGISTER")
    url = url_of(name)
    if url.get_backend_name() == "sqlite":
        register = open_register(name)  # an embedded register migrates itself as it opens
        print(f"{register.name}: schema at revision {head_revision()}")
        return 0
    register = Register(
        engine=sa.create_engine(url, connect_args={"connect_timeout": 5}), name=shown(url)
    )
    try:
        before, after = migrate(register)
    finally:
        register.engine.dispose()
    print(
        f"{register.name}: schema at revision {after}"
        + (f" (was {before or 'empty'})" if before != after else " (already)")
    )
    return 0


def _rebuild(args) -> int:
    from verirun.register.rebuild import rebuild

    register = _open()
    out = rebuild(register, args.folder)
    for folder, problems in sorted(out.failed.items()):
        for line in problems:
            print(line)
        print(
            f"{folder}: DOES NOT VERIFY ({len(problems)} problem{'s' if len(problems) > 1 else ''})"
        )
    print(
        f"{out.folders} run folders read, {out.stored} records stored,"
        f" {len(out.failed)} do not verify"
    )
    if out.unnumbered:
        print(
            f"{len(out.unnumbered)} wait in an outbox for the register and were left to"
            " 'verirun register sync'"
        )
    return 1 if out.failed else 0


def _sync(args) -> int:
    from verirun.register.closing import sync

    register = _open()
    busy: list = []
    results = sync(register, args.runs, busy=busy)
    failed = 0
    for folder, number, problem in results:
        if folder in busy:
            print(f"{folder}: not sent now: {problem}")
        elif number is None:
            failed += 1
            print(f"{folder}: not sent: {problem}")
        else:
            print(
                f"{folder}: in the register, certificate {number}"
                + (f" (some earlier revisions do not verify: {problem})" if problem else "")
            )
    sent = len(results) - failed - len(busy)
    print(
        f"{sent} sent, {failed} kept in the outbox"
        + (f", {len(busy)} in use by another process" if busy else "")
        if results
        else "nothing waits to be sent"
    )
    return 1 if failed else 5 if busy else 0  # 5: busy, as for any run another process holds


def _date(text: str | None, option: str) -> dt.date | None:
    from verirun.errors import UnitError

    if text is None:
        return None
    try:
        return dt.date.fromisoformat(text.strip())
    except ValueError:
        raise UnitError(f"{option}: {text!r} is not a date; write it as YYYY-MM-DD") from None


def _standard(args) -> int:
    from verirun.register.standards import enter_standard

    register = _open()
    row = enter_standard(
        register,
        bench_path=args.from_bench,
        certificate=args.certificate,
        due=_date(args.due, "--due"),
        by=args.operator,
    )
    print(
        f"standard {row['asset']} revision {row['revision']}: certificate {row['certificate']},"
        f" due {row['calibration_due'].isoformat()},"
        f" {len(json.loads(row['accuracy']))} accuracy lines"
    )
    return 0


def _item(args) -> int:
    from verirun.register.listing import enter_item, parse_within

    register = _open()
    row = enter_item(
        register,
        serial=args.serial,
        model=args.model,
        interval_days=parse_within(args.interval) if args.interval else None,
        customer=args.customer,
        asset=args.asset,
        by=args.operator,
    )
    print(
        f"item {row['serial']} ({row['model']}) revision {row['revision']}: interval"
        f" {row['interval_days'] or 'not set'} days"
    )
    return 0


def cmd_due(args) -> int:
    from verirun.register.listing import coming_due, parse_within

    register = _open()
    rows = coming_due(register, within_days=parse_within(args.within), today=dt.date.today())
    if args.json:
        print(json.dumps(rows, ensure_ascii=False, indent=1))
        return 0
    if not rows:
        print(f"nothing comes due within {args.within}")
        return 0
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    table = Table(title=f"Due within {args.within}")
    for name in ("due", "in days", "kind", "id", "what", "reference"):
        table.add_column(name)
    for row in rows:
        table.add_row(
            row["due"],
            str(row["days"]) if row["days"] >= 0 else f"{row['days']} (overdue)",
            row["kind"],
            escape(row["id"]),
            escape(row["what"]),
            escape(row["reference"]),
        )
    Console(highlight=False).print(table)
    return 0


def cmd_history(args) -> int:
    from verirun.register.history import item_history, write_csv, write_html

    register = _open()
    history = item_history(register, serial=args.item, model=args.model, today=dt.date.today())
    if args.csv:
        write_csv(history, args.csv)
    if args.html:
        write_html(history, args.html)
    if args.json:
        print(json.dumps(history.as_json(), ensure_ascii=False, indent=1))
        return 0
    print(history.text())
    for path in (args.csv, args.html):
        if path:
            print(f"written: {path}")
    return 0


COMMANDS = {"register": cmd_register, "due": cmd_due, "history": cmd_history}


def runs_source(runs_dir: Path):
    """What ``verirun runs`` reads: (a listing function, where) from the named register, or
    ``(None, runs_dir)`` to scan the run folders as when no register is named."""
    from verirun.register.config import named

    if named() is None:
        return None, runs_dir
    from verirun.register.listing import list_runs

    register = _open()
    return (
        lambda _runs_dir, **filters: list_runs(register, **filters)
    ), f"register {register.name}"
