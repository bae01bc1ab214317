"""Members' daily means of the chlorophyll forecasts of Bloomline and of the baselines, for verification.

Revision ID: 0002
Revises: 0001
"""

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "forecast_members",
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("basin_id", sa.String(length=64), nullable=False),
        sa.Column("quantity", sa.String(length=64), nullable=False),
        sa.Column("forecaster", sa.String(length=32), nullable=False),
        sa.Column("variable", sa.String(length=64), nullable=False),
        sa.Column("days", sa.SmallInteger(), nullable=False),
        sa.Column("members", sa.SmallInteger(), nullable=False),
        sa.Column("data", sa.LargeBinary(), nullable=False),
        sa.ForeignKeyConstraint(["run_id"], ["forecast_runs.id"],
                                name=op.f("fk_forecast_members_run_id_forecast_runs")),
        sa.PrimaryKeyConstraint("run_id", "basin_id", "quantity", "forecaster", name=op.f("pk_forecast_members")),
    )


def downgrade() -> None:
    op.drop_table("forecast_members")
