"""Read the register: runs (the latest closing of each), and what is coming due."""

from __future__ import annotations

import contextlib
import datetime as dt
import gc

import sqlalchemy as sa

from verirun.register.schema import items, runs, standards


def latest_closings(*where):
    """The latest closing (the most journal documents) of each run matching ``where``."""
    return (
        sa.select(runs.c.uid, sa.func.max(runs.c.documents).label("documents"))
        .where(*where)
        .group_by(runs.c.uid)
        .subquery("latest")
    )


def _day_after(day: str) -> str:
    return (dt.date.fromisoformat(day) + dt.timedelta(days=1)).isoformat()


#: The columns ``verirun runs`` shows, in the order of the listing index (which holds them all,
#: so that listing reads the index alone).
LISTED = (
    "started",
    "folder",
    "documents",
    "uid",
    "item_serial",
    "procedure_id",
    "procedure_revision",
    "overall",
    "status",
    "bench_id",
    "certificate",
    "revision",
    "customer",
    "simulated",
    "as_found_uid",
)


@contextlib.contextmanager
def _rows_without_cycles():
    """Build many rows of plain values (text, numbers) with the cyclic garbage collector paused.

    Such rows can hold no reference cycle, so the collector has nothing to find in them; but
    building 100,000 of them set it off again and again over an ever larger heap, which was
    about a third of listing 100,000 runs (``benchmarks/register.py``). It runs as usual after.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


def list_runs(
    register, *, item: str | None = None, since: str | None = None, until: str | None = None
) -> list[dict]:
    """Runs in the register, oldest first, in the rows a folder scan gives ``verirun runs``
    (the same keys, and ``bench``), filtered by item serial (any case) and dates.

    A run closed more than once (resumed, or corrected) is shown by its latest closing: its
    closings come one after another in this order, the latest last, so each replaces the one
    before it as the rows are read (cheaper than asking the database for the latest of each).
    An as-found run names the as-left run that followed it, and the other way round.
    """
    from verirun.register.store import item_key

    where = []
    if item is not None:
        where.append(runs.c.item_key == item_key(item))
    if since is not None:
        where.append(runs.c.started >= since)
    if until is not None:
        where.append(runs.c.started < _day_after(until))
    query = (
        sa.select(*(runs.c[name] for name in LISTED if name != "documents"))
        .where(*where)
        .order_by(runs.c.started, runs.c.folder, runs.c.documents)
    )
    as_found_uids = sa.select(runs.c.as_found_uid).where(runs.c.as_found_uid.is_not(None))
    with register.reading() as connection, _rows_without_cycles():
        # The few runs adjusted between an as-found and an as-left pass, each way round.
        as_left_folder = dict(connection.execute(as_found_uids.add_columns(runs.c.folder)).all())
        as_found_folder = dict(
            connection.execute(
                sa.select(runs.c.uid, runs.c.folder).where(runs.c.uid.in_(as_found_uids)).distinct()
            ).all()
        )
        listed: list[dict] = []
        for (
            started,
            folder,
            uid,
            serial,
            procedure,
            revision,
            overall,
            status,
            bench,
            certificate,
            record_revision,
            customer,
            simulated,
            as_found_uid,
        ) in connection.execute(query).all():
            row = {
                "run": folder,
                "path": None,
                "item": serial,
                "procedure": procedure,
                "revision": revision,
                "date": started[:10],
                "verdict": overall,
                "status": "aborted" if status == "failed" else status,
                "uid": uid,
                "record_revision": record_revision,
                "certificate": certificate if status == "complete" else None,
                "customer": customer,
                "simulated": bool(simulated),
                "as_found_run": (
                    as_found_folder.get(as_found_uid, as_found_uid) if as_found_uid else None
                ),
                "as_left_run": as_left_folder.get(uid),
                "bench": bench,
            }
            if listed and listed[-1]["uid"] == uid:  # a later closing of the run just listed
                listed[-1] = row
            else:
                listed.append(row)
        return listed


def parse_within(text: str) -> int:
    """A span such as ``30d``, ``6w``, ``3m`` (30-day months) or ``1y`` (365 days), in days.

    Raises
    ------
    UnitError
        If it is not such a span.
    """
    from verirun.errors import UnitError

    text = text.strip().lower()
    factors = {"d": 1, "w": 7, "m": 30, "y": 365}
    if len(text) >= 2 and text[-1] in factors and text[:-1].isdigit():
        return int(text[:-1]) * factors[text[-1]]
    if text.isdigit():
        return int(text)
    raise UnitError(f"{text!r} is not a span; write it as 30d, 6w, 12m or 1y")


def coming_due(register, *, within_days: int, today: dt.date) -> list[dict]:
    """Standards and items due on or before ``today`` + ``within_days`` (overdue ones included),
    soonest first. An item is due its calibration interval after its last complete run that was
    not a dry run; items with no interval in the register are not listed."""
    horizon = today + dt.timedelta(days=within_days)
    out = []
    latest_std = (
        sa.select(standards.c.asset, sa.func.max(standards.c.revision).label("revision"))
        .group_by(standards.c.asset)
        .subquery()
    )
    latest_item = (
        sa.select(items.c.serial, items.c.model, sa.func.max(items.c.revision).label("revision"))
        .group_by(items.c.serial, items.c.model)
        .subquery()
    )
    last_run = (
        sa.select(runs.c.item_serial, runs.c.item_model, sa.func.max(runs.c.started).label("last"))
        .where(runs.c.status == "complete", runs.c.simulated.is_(False))
        .group_by(runs.c.item_serial, runs.c.item_model)
        .subquery()
    )
    with register.reading() as connection:
        for row in connection.execute(
            sa.select(
                standards.c.asset,
                standards.c.description,
                standards.c.certificate,
                standards.c.calibration_due,
            )
            .join(
                latest_std,
                sa.and_(
                    standards.c.asset == latest_std.c.asset,
                    standards.c.revision == latest_std.c.revision,
                ),
            )
            .where(standards.c.calibration_due <= horizon)
        ):
            out.append(
                {
                    "kind": "standard",
                    "id": row.asset,
                    "what": row.description or "",
                    "reference": row.certificate,
                    "due": row.calibration_due.isoformat(),
                    "days": (row.calibration_due - today).days,
                }
            )
        for row in connection.execute(
            sa.select(
                items.c.serial,
                items.c.model,
                items.c.customer,
                items.c.interval_days,
                last_run.c.last,
            )
            .join(
                latest_item,
                sa.and_(
                    items.c.serial == latest_item.c.serial,
                    items.c.model == latest_item.c.model,
                    items.c.revision == latest_item.c.revision,
                ),
            )
            .outerjoin(
                last_run,
                sa.and_(
                    last_run.c.item_serial == items.c.serial, last_run.c.item_model == items.c.model
                ),
            )
            .where(items.c.interval_days.is_not(None))
        ):
            if row.last is None:
                due, reference = today, "never calibrated here"
            else:
                due = dt.date.fromisoformat(row.last[:10]) + dt.timedelta(days=row.interval_days)
                reference = f"last calibrated {row.last[:10]}, every {row.interval_days} days"
            if due <= horizon:
                out.append(
                    {
                        "kind": "item",
                        "id": row.serial,
                        "what": f"{row.model} ({row.customer or ''})",
                        "reference": reference,
                        "due": due.isoformat(),
                        "days": (due - today).days,
                    }
                )
    return sorted(out, key=lambda r: (r["due"], r["kind"], r["id"]))


def enter_item(
    register,
    *,
    serial: str,
    model: str,
    interval_days: int | None,
    customer: str | None,
    asset: str | None,
    by: str,
) -> dict:
    """Enter the next revision of an item (its interval, customer or asset changed): the
    fields not given are those of its latest revision."""
    from verirun.register.store import now_text

    with register.engine.begin() as connection:
        latest = (
            connection.execute(
                sa.select(items)
                .where(items.c.serial == serial, items.c.model == model)
                .order_by(items.c.revision.desc())
                .limit(1)
            )
            .mappings()
            .first()
        )
        base = (
            dict(latest)
            if latest
            else {
                "maker": None,
                "kind": None,
                "customer": None,
                "asset": None,
                "interval_days": None,
                "revision": 0,
            }
        )
        row = {
            "serial": serial,
            "model": model,
            "revision": base["revision"] + 1,
            "maker": base["maker"],
            "kind": base["kind"],
            "customer": customer if customer is not None else base["customer"],
            "asset": asset if asset is not None else base["asset"],
            "interval_days": interval_days if interval_days is not None else base["interval_days"],
            "entered": now_text(),
            "entered_by": by,
        }
        connection.execute(items.insert().values(**row))
    return row
