"""Whether readings lie within their tolerance limits: per point, and counted per run.

A history's share of calibrations found in tolerance, and whether an item was last found in
tolerance, are questions of the readings against the tolerance limits, not of the verdicts: under
a guard band a reading within the limits but too near one is rejected. Rows stored before this
revision hold null here and are judged by their verdicts; ``register rebuild`` into a new
register fills them.

Revision ID: 0002
Revises: 0001
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

_MODEL = ["item_model", "status", "simulated", "as_found_uid", "uid", "documents", "overall"]


def upgrade() -> None:
    op.add_column("runs", sa.Column("outside_tolerance", sa.Integer))
    op.add_column("points", sa.Column("within_tolerance", sa.Boolean))
    # The calibrations of a model are counted from this index alone, the new count included.
    op.drop_index("runs_model", table_name="runs")
    op.create_index("runs_model", "runs", [*_MODEL, "outside_tolerance"])


def downgrade() -> None:
    op.drop_index("runs_model", table_name="runs")
    op.create_index("runs_model", "runs", _MODEL)
    op.drop_column("points", "within_tolerance")
    op.drop_column("runs", "outside_tolerance")
