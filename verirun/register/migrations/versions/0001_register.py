"""The register: items, standards, runs, their points and records, certificate numbers.

Revision ID: 0001
Revises:
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

_TABLES = ("items", "standards", "runs", "points", "records", "numbers")


def upgrade() -> None:
    op.create_table(
        "items",
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
    op.create_table(
        "standards",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("asset", sa.String(200), nullable=False),
        sa.Column("revision", sa.Integer, nullable=False),
        sa.Column("description", sa.String(400)),
        sa.Column("certificate", sa.String(200), nullable=False),
        sa.Column("calibration_due", sa.Date, nullable=False),
        sa.Column("traceability", sa.Text),
        sa.Column("accuracy", sa.Text, nullable=False),
        sa.Column("entered", sa.String(32), nullable=False),
        sa.Column("entered_by", sa.String(200), nullable=False),
        sa.UniqueConstraint("asset", "revision", name="standards_asset_revision"),
    )
    op.create_table(
        "runs",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("uid", sa.String(64), nullable=False),
        sa.Column("revision", sa.Integer, nullable=False),
        sa.Column("documents", sa.Integer, nullable=False),
        sa.Column("journal_sha256_last", sa.String(64), nullable=False),
        sa.Column("folder", sa.String(400), nullable=False),
        sa.Column("item_serial", sa.String(200)),
        sa.Column("item_key", sa.String(200)),
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
        sa.Column("status", sa.String(20), nullable=False),
        sa.Column("simulated", sa.Boolean, nullable=False),
        sa.Column("certificate", sa.String(200), nullable=False),
        sa.Column("certificate_revision", sa.Integer, nullable=False),
        sa.Column("as_found_uid", sa.String(64)),
        sa.Column("stored", sa.String(32), nullable=False),
        sa.UniqueConstraint("uid", "documents", name="runs_uid_documents"),
    )
    op.create_index("runs_item", "runs", ["item_serial", "started"])
    op.create_index(
        "runs_model",
        "runs",
        ["item_model", "status", "simulated", "as_found_uid", "uid", "documents", "overall"],
    )
    op.create_index(
        "runs_listing",
        "runs",
        [
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
        ],
    )
    op.create_index("runs_item_key", "runs", ["item_key", "started"])
    op.create_index("runs_as_found", "runs", ["as_found_uid", "folder"])
    op.create_table(
        "points",
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
        sa.Column("error_fraction", sa.Float),
        sa.Column("expanded", sa.Float),
        sa.Column("expanded_fraction", sa.Float),
        sa.Column("verdict", sa.String(20), nullable=False),
        sa.UniqueConstraint("run_id", "step", name="points_run_step"),
    )
    op.create_table(
        "records",
        sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), primary_key=True),
        sa.Column("sha256", sa.String(64), nullable=False),
        sa.Column("body", sa.Text, nullable=False),
    )
    op.create_table(
        "numbers",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("sequence", sa.String(200), nullable=False),
        sa.Column("number", sa.Integer, nullable=False),
        sa.Column("text", sa.String(200), nullable=False, unique=True),
        sa.Column("run_uid", sa.String(64), nullable=False, unique=True),
        sa.Column("allocated", sa.String(32), nullable=False),
        sa.UniqueConstraint("sequence", "number", name="numbers_sequence_number"),
    )
    _append_only(op.get_bind().dialect.name)


def _append_only(dialect: str) -> None:
    """Triggers refusing UPDATE and DELETE (and on PostgreSQL TRUNCATE) on every table."""
    if dialect == "postgresql":
        op.execute("""
            CREATE FUNCTION verirun_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
            BEGIN
                RAISE EXCEPTION 'the register is append-only: % on % refused (a correction is a new revision)',
                    TG_OP, TG_TABLE_NAME USING ERRCODE = 'insufficient_privilege';
            END $$""")  # noqa: E501
        for table in _TABLES:
            op.execute(
                f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table}"
                " FOR EACH ROW EXECUTE FUNCTION verirun_append_only()"
            )
            op.execute(
                f"CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table}"
                " FOR EACH STATEMENT EXECUTE FUNCTION verirun_append_only()"
            )
    elif dialect == "sqlite":
        for table in _TABLES:
            for action in ("UPDATE", "DELETE"):
                op.execute(
                    f"CREATE TRIGGER {table}_no_{action.lower()} BEFORE {action} ON {table}"
                    f" BEGIN SELECT RAISE(ABORT, 'the register is append-only: {action} on {table}"
                    " refused (a correction is a new revision)'); END"
                )


def downgrade() -> None:
    raise NotImplementedError("the register is append-only; its first revision is not undone")
