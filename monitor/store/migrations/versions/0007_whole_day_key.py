"""A whole-day value and an instant reading at the same time are two readings: ``whole_day`` joins the
readings' unique key (station, variable, time, source).

Revision ID: 0007_whole_day_key
Revises: 0006_realdata
"""

from alembic import op

revision = "0007_whole_day_key"
down_revision = "0006_realdata"
branch_labels = None
depends_on = None

OLD = "uq_readings_station_id_variable_time_utc_source"
NEW = "uq_readings_station_id_variable_time_utc_source_whole_day"


def upgrade() -> None:
    with op.batch_alter_table("readings") as batch:
        batch.drop_constraint(OLD, type_="unique")
        batch.create_unique_constraint(NEW, ["station_id", "variable", "time_utc", "source", "whole_day"])


def downgrade() -> None:
    # fails (as it should) while a whole-day value and an instant reading share a time: delete one first
    with op.batch_alter_table("readings") as batch:
        batch.drop_constraint(NEW, type_="unique")
        batch.create_unique_constraint(OLD, ["station_id", "variable", "time_utc", "source"])
