"""The live verification record: one score record per issued run, basin, quantity, lead day and forecaster.

Revision ID: 0005
Revises: 0004
"""

import sqlalchemy as sa
from alembic import op

import monitor.store.schema

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    utc = monitor.store.schema.UTCDateTime()
    op.create_table(
        "forecast_scores",
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("basin_id", sa.String(length=64), nullable=False),
        sa.Column("quantity", sa.String(length=64), nullable=False),
        sa.Column("lead_days", sa.SmallInteger(), nullable=False),
        sa.Column("forecaster", sa.String(length=32), nullable=False),
        sa.Column("water_body_id", sa.String(length=64), nullable=False),
        sa.Column("origin_utc", utc, nullable=False),
        sa.Column("valid_utc", utc, nullable=False),
        sa.Column("variable", sa.String(length=64), nullable=False),
        sa.Column("observed", sa.Float(), nullable=False),
        sa.Column("observed_n", sa.Integer(), nullable=False),
        sa.Column("members", sa.SmallInteger(), nullable=False),
        sa.Column("crps", sa.Float(), nullable=False),
        sa.Column("crps_fair", sa.Float(), nullable=True),
        sa.Column("q05", sa.Float(), nullable=False),
        sa.Column("q25", sa.Float(), nullable=False),
        sa.Column("median", sa.Float(), nullable=False),
        sa.Column("q75", sa.Float(), nullable=False),
        sa.Column("q95", sa.Float(), nullable=False),
        sa.Column("log_mean", sa.Float(), nullable=False),
        sa.Column("log_sd", sa.Float(), nullable=True),
        sa.Column("rank", sa.SmallInteger(), nullable=False),
        sa.Column("p_level_1", sa.Float(), nullable=True),
        sa.Column("p_level_2", sa.Float(), nullable=True),
        sa.Column("p_level_3", sa.Float(), nullable=True),
        sa.Column("p_level_4", sa.Float(), nullable=True),
        sa.ForeignKeyConstraint(["run_id"], ["forecast_runs.id"],
                                name=op.f("fk_forecast_scores_run_id_forecast_runs")),
        sa.PrimaryKeyConstraint("run_id", "basin_id", "quantity", "lead_days", "forecaster",
                                name=op.f("pk_forecast_scores")),
    )
    op.create_index("ix_forecast_scores_wb_valid", "forecast_scores", ["water_body_id", "valid_utc"])


def downgrade() -> None:
    op.drop_index("ix_forecast_scores_wb_valid", table_name="forecast_scores")
    op.drop_table("forecast_scores")
