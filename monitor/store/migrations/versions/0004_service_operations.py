"""The service's operations: job records, the scheduler lease, HTTP-pull state, webhook rows in the
outbox with an idempotency key, HTML bodies and extra headers, and every delivery attempt.

Revision ID: 0004
Revises: 0003
"""

import sqlalchemy as sa
from alembic import op

import monitor.store.schema

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("outbox", schema=None) as batch_op:
        batch_op.add_column(sa.Column("channel", sa.String(length=16), server_default="email", nullable=False))
        batch_op.add_column(sa.Column("message_key", sa.String(length=200), nullable=True))
        batch_op.add_column(sa.Column("body_html", sa.Text(), nullable=True))
        batch_op.add_column(sa.Column("headers", sa.JSON(), nullable=True))
    # rows queued before this revision keep a key of their own, derived from their id
    op.execute("UPDATE outbox SET message_key = 'outbox-' || CAST(id AS VARCHAR(20)) WHERE message_key IS NULL")
    with op.batch_alter_table("outbox", schema=None) as batch_op:
        batch_op.alter_column("message_key", existing_type=sa.String(length=200), nullable=False)
        batch_op.create_unique_constraint(batch_op.f("uq_outbox_message_key"), ["message_key"])

    op.create_table(
        "delivery_attempts",
        sa.Column("id", sa.Integer(), autoincrement=True, nullable=False),
        sa.Column("outbox_id", sa.Integer(), nullable=False),
        sa.Column("attempt", sa.Integer(), nullable=False),
        sa.Column("started_utc", monitor.store.schema.UTCDateTime(), nullable=False),
        sa.Column("ended_utc", monitor.store.schema.UTCDateTime(), nullable=True),
        sa.Column("outcome", sa.String(length=16), nullable=False),
        sa.Column("detail", sa.Text(), nullable=True),
        sa.Column("owner", sa.String(length=128), nullable=False),
        sa.ForeignKeyConstraint(["outbox_id"], ["outbox.id"], name=op.f("fk_delivery_attempts_outbox_id_outbox")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_delivery_attempts")),
        sa.UniqueConstraint("outbox_id", "attempt", name=op.f("uq_delivery_attempts_outbox_id_attempt")),
    )
    op.create_table(
        "job_runs",
        sa.Column("id", sa.Integer(), autoincrement=True, nullable=False),
        sa.Column("job", sa.String(length=32), nullable=False),
        sa.Column("water_body_id", sa.String(length=64), nullable=True),
        sa.Column("scheduled_utc", monitor.store.schema.UTCDateTime(), nullable=True),
        sa.Column("started_utc", monitor.store.schema.UTCDateTime(), nullable=False),
        sa.Column("ended_utc", monitor.store.schema.UTCDateTime(), nullable=True),
        sa.Column("duration_s", sa.Float(), nullable=True),
        sa.Column("outcome", sa.String(length=16), nullable=False),
        sa.Column("error", sa.Text(), nullable=True),
        sa.Column("counts", sa.JSON(), nullable=True),
        sa.Column("owner", sa.String(length=128), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_job_runs")),
    )
    with op.batch_alter_table("job_runs", schema=None) as batch_op:
        batch_op.create_index("ix_job_runs_job_wb_started", ["job", "water_body_id", "started_utc"], unique=False)
    op.create_table(
        "scheduler_lease",
        sa.Column("name", sa.String(length=64), nullable=False),
        sa.Column("holder", sa.String(length=128), nullable=False),
        sa.Column("term", sa.Integer(), nullable=False),
        sa.Column("acquired_utc", monitor.store.schema.UTCDateTime(), nullable=False),
        sa.Column("heartbeat_utc", monitor.store.schema.UTCDateTime(), nullable=False),
        sa.Column("expires_utc", monitor.store.schema.UTCDateTime(), nullable=False),
        sa.PrimaryKeyConstraint("name", name=op.f("pk_scheduler_lease")),
    )
    op.create_table(
        "pull_states",
        sa.Column("feed", sa.String(length=100), nullable=False),
        sa.Column("etag", sa.Text(), nullable=True),
        sa.Column("last_modified", sa.String(length=100), nullable=True),
        sa.Column("last_sha256", sa.String(length=64), nullable=True),
        sa.Column("failures", sa.Integer(), nullable=False),
        sa.Column("next_attempt_utc", monitor.store.schema.UTCDateTime(), nullable=True),
        sa.Column("last_error", sa.Text(), nullable=True),
        sa.Column("last_status", sa.Integer(), nullable=True),
        sa.Column("history", sa.JSON(), nullable=True),
        sa.Column("updated_utc", monitor.store.schema.UTCDateTime(), nullable=False),
        sa.PrimaryKeyConstraint("feed", name=op.f("pk_pull_states")),
    )


def downgrade() -> None:
    op.drop_table("pull_states")
    op.drop_table("scheduler_lease")
    with op.batch_alter_table("job_runs", schema=None) as batch_op:
        batch_op.drop_index("ix_job_runs_job_wb_started")
    op.drop_table("job_runs")
    op.drop_table("delivery_attempts")
    with op.batch_alter_table("outbox", schema=None) as batch_op:
        batch_op.drop_constraint(batch_op.f("uq_outbox_message_key"), type_="unique")
        batch_op.drop_column("headers")
        batch_op.drop_column("body_html")
        batch_op.drop_column("message_key")
        batch_op.drop_column("channel")
