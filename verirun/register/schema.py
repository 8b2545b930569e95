"""The register's tables, as SQLAlchemy Core metadata (what the queries are written against).

Every table is append-only: a row, once written, is never updated or deleted. A change of an
item or a standard is a new row with the next ``revision``; a correction of a run is a new
``runs`` row (the next revision of its record). The migrations under ``migrations/`` create
these tables and, on PostgreSQL and SQLite alike, triggers that refuse UPDATE and DELETE.
"""

from __future__ import annotations

import sqlalchemy as sa

metadata = sa.MetaData()

#: The tables whose rows are never updated or deleted (all of them but Alembic's own).
APPEND_ONLY = ("items", "standards", "runs", "points", "records", "numbers")

items = sa.Table(
    "items",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("serial", sa.String(200), nullable=False),
    sa.Column("model", sa.String(200), nullable=False),
    sa.Column("revision", sa.Integer, nullable=False),
    sa.Column("maker", sa.String(200)),
    sa.Column("kind", sa.String(200)),
    sa.Column("customer", sa.String(400)),
    sa.Column("asset", sa.String(200)),
    sa.Column("interval_days", sa.Integer),
    sa.Column("entered", sa.String(32), nullable=False),
    sa.Column("entered_by", sa.String(200), nullable=False),
    sa.UniqueConstraint("serial", "model", "revision", name="items_serial_model_revision"),
)

standards = sa.Table(
    "standards",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("asset", sa.String(200), nullable=False),
    sa.Column("revision", sa.Integer, nullable=False),
    sa.Column("description", sa.String(400)),
    sa.Column("certificate", sa.String(200), nullable=False),
    sa.Column("calibration_due", sa.Date, nullable=False),
    sa.Column("traceability", sa.Text),
    sa.Column("accuracy", sa.Text, nullable=False),  # the accuracy lines, canonical JSON
    sa.Column("entered", sa.String(32), nullable=False),
    sa.Column("entered_by", sa.String(200), nullable=False),
    sa.UniqueConstraint("asset", "revision", name="standards_asset_revision"),
)

runs = sa.Table(
    "runs",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("uid", sa.String(64), nullable=False),
    sa.Column("revision", sa.Integer, nullable=False),
    sa.Column("documents", sa.Integer, nullable=False),
    sa.Column("journal_sha256_last", sa.String(64), nullable=False),
    sa.Column("folder", sa.String(400), nullable=False),
    sa.Column("item_serial", sa.String(200)),
    sa.Column("item_key", sa.String(200)),  # the serial as found in any case (stripped, casefolded)
    sa.Column("item_model", sa.String(200)),
    sa.Column("item_asset", sa.String(200)),
    sa.Column("customer", sa.String(400)),
    sa.Column("procedure_id", sa.String(200), nullable=False),
    sa.Column("procedure_revision", sa.String(50), nullable=False),
    sa.Column("bench_id", sa.String(200)),
    sa.Column("standard_asset", sa.String(200)),
    sa.Column("operator", sa.String(200)),
    sa.Column("started", sa.String(32), nullable=False),
    sa.Column("ended", sa.String(32)),
    sa.Column("rule", sa.String(40)),
    sa.Column("points", sa.Integer, nullable=False),
    sa.Column("passed", sa.Integer, nullable=False),
    sa.Column("conditional_pass", sa.Integer, nullable=False),
    sa.Column("conditional_fail", sa.Integer, nullable=False),
    sa.Column("failed", sa.Integer, nullable=False),
    sa.Column("skipped", sa.Integer, nullable=False),
    sa.Column("not_measured", sa.Integer, nullable=False),
    sa.Column("overall", sa.String(20), nullable=False),
    # How many readings lie outside their tolerance limits (a rejection for the guard band alone
    # is not counted): none means the item was found in tolerance. Migration 0002; rows stored
    # before it hold null, and are judged by their overall verdict.
    sa.Column("outside_tolerance", sa.Integer),
    sa.Column("status", sa.String(20), nullable=False),
    sa.Column("simulated", sa.Boolean, nullable=False),
    sa.Column("certificate", sa.String(200), nullable=False),
    sa.Column("certificate_revision", sa.Integer, nullable=False),
    sa.Column("as_found_uid", sa.String(64)),
    sa.Column("stored", sa.String(32), nullable=False),
    # One row per closing of a run's journal: a resumed run closes again with more documents,
    # a correction closes again as the next revision; sending the same closing twice is a no-op.
    sa.UniqueConstraint("uid", "documents", name="runs_uid_documents"),
    sa.Index("runs_item", "item_serial", "started"),
    # The calibrations of a model, in the order a history reads them, from the index alone.
    sa.Index(
        "runs_model",
        "item_model",
        "status",
        "simulated",
        "as_found_uid",
        "uid",
        "documents",
        "overall",
        "outside_tolerance",
    ),
    # Every column ``verirun runs`` shows, in its order: the listing reads this index alone.
    sa.Index(
        "runs_listing",
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
    ),
    sa.Index("runs_item_key", "item_key", "started"),
    sa.Index("runs_as_found", "as_found_uid", "folder"),
)

points = sa.Table(
    "points",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
    sa.Column("step", sa.Integer, nullable=False),
    sa.Column("key", sa.String(200), nullable=False),
    sa.Column("range_id", sa.String(200), nullable=False),
    sa.Column("unit", sa.String(20), nullable=False),
    sa.Column("nominal", sa.Float, nullable=False),
    sa.Column("frequency", sa.Float),
    sa.Column("reading", sa.Float),
    sa.Column("error", sa.Float),
    sa.Column("error_unit", sa.String(20)),
    sa.Column("error_fraction", sa.Float),  # error as a fraction of the tolerance half-width
    sa.Column("expanded", sa.Float),  # U (k = 2) of the reading, in the point's unit
    sa.Column("expanded_fraction", sa.Float),  # U as a fraction of the tolerance half-width
    sa.Column("verdict", sa.String(20), nullable=False),
    # Whether the reading lies within its tolerance limits (null: not measured, or stored before
    # migration 0002); under a guard band a fail may lie within them.
    sa.Column("within_tolerance", sa.Boolean),
    sa.UniqueConstraint("run_id", "step", name="points_run_step"),
)

records = sa.Table(
    "records",
    metadata,
    sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), primary_key=True),
    sa.Column("sha256", sa.String(64), nullable=False),
    sa.Column("body", sa.Text, nullable=False),  # the whole run record, canonical JSON
)

numbers = sa.Table(
    "numbers",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("sequence", sa.String(200), nullable=False),
    sa.Column("number", sa.Integer, nullable=False),
    sa.Column("text", sa.String(200), nullable=False, unique=True),
    sa.Column("run_uid", sa.String(64), nullable=False, unique=True),
    sa.Column("allocated", sa.String(32), nullable=False),
    sa.UniqueConstraint("sequence", "number", name="numbers_sequence_number"),
)
