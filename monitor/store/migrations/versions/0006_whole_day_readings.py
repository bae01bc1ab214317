"""Whole-day readings: a value for the local day ending at its time stamp (a date without a time of day).

Revision ID: 0006_realdata
Revises: 0005
"""

import sqlalchemy as sa
from alembic import op

revision = "0006_realdata"
down_revision = "0005"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("readings", sa.Column("whole_day", sa.SmallInteger(), nullable=False, server_default=sa.text("0")))


def downgrade() -> None:
    with op.batch_alter_table("readings") as batch:
        batch.drop_column("whole_day")
