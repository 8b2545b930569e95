"""Write to the register: a closed run record (whole, with its points) and certificate numbers.

Each write is one transaction. Storing a closed record is idempotent on the run's uid and the
length of the journal it closed (a resumed run closes again with more documents; a correction
closes again as the next revision), so sending the same record twice stores it once.
"""

from __future__ import annotations

import datetime as dt
import hashlib

import sqlalchemy as sa

from verirun.record.documents import Record
from verirun.register.db import Register, RegisterError, RegisterUnreachable, _reason
from verirun.register.schema import items, numbers, points, records, runs


def now_text() -> str:
    """The time now, UTC, as the record writes times."""
    return dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _insert(register: Register, table: sa.Table):
    """An INSERT that does nothing where a unique key already holds (both dialects have it)."""
    if register.dialect == "postgresql":
        from sqlalchemy.dialects.postgresql import insert
    else:
        from sqlalchemy.dialects.sqlite import insert
    return insert(table)


def sequence_of(record: Record) -> tuple[str, str]:
    """The lab's number sequence a record's certificate takes its number from, and its prefix:
    the lab's certificate prefix and the year the run started (numbers start again each year)."""
    prefix = record.lab.certificate_prefix or "CERT"
    year = record.run.started[:4]
    return f"{prefix}-{year}", f"{prefix}-{year}-"


def _lock_key(sequence: str) -> int:
    """A signed 64-bit key for PostgreSQL's advisory lock on one number sequence."""
    return int.from_bytes(hashlib.sha256(sequence.encode("utf-8")).digest()[:8], "big", signed=True)


def allocate_number(register: Register, record: Record) -> str:
    """The certificate number of the run of ``record``: the next in its lab's sequence, or the
    one it was given before (a run has one number, whichever bench asks, however often).

    Taking the highest number and writing the next happen under one lock (PostgreSQL: an
    advisory transaction lock on the sequence; SQLite: the write lock taken by BEGIN IMMEDIATE),
    so numbers are neither shared nor skipped when several benches close runs at once; a
    transaction that fails takes its number back with it.
    """
    uid = record.run.uid
    sequence, prefix = sequence_of(record)
    try:
        with register.engine.begin() as connection:
            given = connection.execute(
                sa.select(numbers.c.text).where(numbers.c.run_uid == uid)
            ).scalar()
            if given is not None:
                return given
            if register.dialect == "postgresql":
                connection.execute(
                    sa.text("SELECT pg_advisory_xact_lock(:key)"), {"key": _lock_key(sequence)}
                )
                given = connection.execute(
                    sa.select(numbers.c.text).where(numbers.c.run_uid == uid)
                ).scalar()
                if given is not None:
                    return given
            highest = (
                connection.execute(
                    sa.select(sa.func.max(numbers.c.number)).where(numbers.c.sequence == sequence)
                ).scalar()
                or 0
            )
            text = f"{prefix}{highest + 1:05d}"
            connection.execute(
                numbers.insert().values(
                    sequence=sequence,
                    number=highest + 1,
                    text=text,
                    run_uid=uid,
                    allocated=now_text(),
                )
            )
            return text
    except sa.exc.IntegrityError as exc:
        raise RegisterError(
            f"register {register.name}: a certificate number could not be taken: {_reason(exc)}"
        ) from None
    except (sa.exc.OperationalError, sa.exc.InterfaceError) as exc:
        raise RegisterUnreachable(f"register {register.name}: {_reason(exc)}") from None


def item_key(serial: str | None) -> str | None:
    """An item serial as ``verirun runs --item`` matches it: in any case, without outer spaces."""
    return None if serial is None else serial.strip().casefold()


def run_row(record: Record, folder: str) -> dict:
    """The ``runs`` row of a closed record."""
    from verirun.certificate.render import certificate_number
    from verirun.metrology.summary import summarise
    from verirun.record.build import record_judged

    run = record.run
    # The counts of the one summary function, worked out again from the rows (a record of an
    # earlier format may store fewer counts, or none of the conditional verdicts).
    summary = summarise(record_judged(record), record.decision_rule.rule)
    return {
        "uid": run.uid,
        "revision": run.revision,
        "documents": run.documents,
        "journal_sha256_last": run.journal_sha256_last,
        "folder": folder,
        "item_serial": record.item.serial,
        "item_key": item_key(record.item.serial),
        "item_model": record.meter.model or "",
        "item_asset": record.item.asset,
        "customer": record.customer.name,
        "procedure_id": record.procedure.id,
        "procedure_revision": record.procedure.revision,
        "bench_id": record.bench.id,
        "standard_asset": record.bench.calibrator.asset,
        "operator": run.operator,
        "started": run.started,
        "ended": run.ended,
        "rule": record.decision_rule.rule,
        "points": summary.points,
        "passed": summary.passed,
        "conditional_pass": summary.conditional_pass,
        "conditional_fail": summary.conditional_fail,
        "failed": summary.failed,
        "skipped": summary.skipped,
        "not_measured": summary.not_measured,
        "overall": summary.overall,
        "outside_tolerance": summary.outside_tolerance,
        "status": run.status,
        "simulated": record.bench.simulated,
        "certificate": certificate_number(record),
        "certificate_revision": run.revision,
        "as_found_uid": record.as_found.run if record.as_found is not None else None,
        "stored": now_text(),
    }


def _fraction(percent: float | None) -> float | None:
    return None if percent is None else percent / 100.0


def point_rows(run_id: int, record: Record) -> list[dict]:
    """The ``points`` rows of a closed record, one per step."""
    return [
        {
            "run_id": run_id,
            "step": row.index + 1,
            "key": row.key,
            "range_id": row.range,
            "unit": row.unit,
            "nominal": row.nominal,
            "frequency": row.frequency,
            "reading": row.reading,
            "error": row.error,
            "error_unit": row.error_unit,
            "error_fraction": _fraction(row.percent_of_tolerance),
            "expanded": row.U,
            "expanded_fraction": _fraction(row.U_pct),
            "verdict": row.verdict,
            "within_tolerance": row.is_within_tolerance(),
        }
        for row in record.points
    ]


def store_record(register: Register, record: Record, folder: str, *, by: str = "verirun") -> bool:
    """Store a closed run record whole, with its points and its item; ``False`` if it was there.

    Raises
    ------
    RegisterUnreachable
        If the database cannot be reached or written.
    """
    return store_records(register, [(record, folder)], by=by) == 1


def store_records(
    register: Register, closed: list[tuple[Record, str]], *, by: str = "verirun"
) -> int:
    """Store several closed records (each with its run folder's name) in one transaction; return
    how many were not there before."""
    from verirun.record.documents import record_document
    from verirun.record.journal import dumps

    # Statements made once and given their values as parameters, so each is compiled once.
    add_run = (
        _insert(register, runs)
        .on_conflict_do_nothing(index_elements=["uid", "documents"])
        .returning(runs.c.id)
    )
    add_item = _insert(register, items).on_conflict_do_nothing(
        index_elements=["serial", "model", "revision"]
    )
    stored = 0
    try:
        with register.engine.begin() as connection:
            for record, folder in closed:
                inserted = connection.execute(add_run, run_row(record, folder)).scalar()
                if inserted is None:
                    continue
                stored += 1
                if record.points:
                    connection.execute(points.insert(), point_rows(inserted, record))
                body = dumps(record_document(record))
                connection.execute(
                    records.insert(),
                    {
                        "run_id": inserted,
                        "body": body,
                        "sha256": hashlib.sha256(body.encode("utf-8")).hexdigest(),
                    },
                )
                meter = record.meter
                connection.execute(
                    add_item,
                    {
                        "serial": record.item.serial or "",
                        "model": meter.model or "",
                        "revision": 1,
                        "maker": meter.maker,
                        "kind": meter.kind,
                        "customer": record.customer.name,
                        "asset": record.item.asset,
                        "interval_days": None,
                        "entered": now_text(),
                        "entered_by": by,
                    },
                )
    except (sa.exc.OperationalError, sa.exc.InterfaceError) as exc:
        raise RegisterUnreachable(f"register {register.name}: {_reason(exc)}") from None
    return stored
