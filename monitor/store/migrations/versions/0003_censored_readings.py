"""Censored readings (below a detection limit) and the unit of a station's stored-only variables.

Revision ID: 0003
Revises: 0002
"""

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("readings", sa.Column("censored", sa.SmallInteger(), nullable=False, server_default=sa.text("0")))
    op.add_column("readings", sa.Column("detection_limit", sa.Float(), nullable=True))
    op.add_column("readings", sa.Column("unit", sa.String(length=64), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("readings") as batch:
        batch.drop_column("unit")
        batch.drop_column("detection_limit")
        batch.drop_column("censored")
