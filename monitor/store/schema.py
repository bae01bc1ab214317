"""Bloomline's database schema (SQLAlchemy Core).

One ``MetaData`` for every table; alembic migrations in
``monitor/store/migrations`` create and change it. Times are stored as UTC.
"""

from __future__ import annotations

from sqlalchemy import (
    JSON,
    Column,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    SmallInteger,
    String,
    Table,
    Text,
    UniqueConstraint,
    text,
)
from sqlalchemy.types import TypeDecorator

from monitor.timeutil import as_utc, naive_utc

metadata = MetaData(
    naming_convention={
        "ix": "ix_%(table_name)s_%(column_0_N_name)s",
        "uq": "uq_%(table_name)s_%(column_0_N_name)s",
        "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
        "pk": "pk_%(table_name)s",
    }
)


class UTCDateTime(TypeDecorator):
    """A timestamp stored as naive UTC and returned as an aware UTC datetime."""

    impl = DateTime
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(f"naive datetime {value!r}: Bloomline stores aware UTC times only")
        return naive_utc(value)

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        return as_utc(value)


water_bodies = Table(
    "water_bodies", metadata,
    Column("id", String(64), primary_key=True),
    Column("name", String(200), nullable=False),
    Column("use", String(32), nullable=False),
    Column("timezone", String(64), nullable=False),
    Column("framework", String(64), nullable=False),
)

basins = Table(
    "basins", metadata,
    Column("water_body_id", String(64), ForeignKey("water_bodies.id"), primary_key=True),
    Column("id", String(64), primary_key=True),
    Column("name", String(200), nullable=False),
    Column("volume_m3", Float, nullable=False),
    Column("mean_depth_m", Float, nullable=False),
    Column("area_m2", Float, nullable=False),
    Column("flows_to", String(64), nullable=False),
)

stations = Table(
    "stations", metadata,
    Column("id", String(64), primary_key=True),
    Column("kind", String(16), nullable=False),
    Column("water_body_id", String(64), nullable=True),
    Column("basin_id", String(64), nullable=True),
)

ingest_batches = Table(
    "ingest_batches", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("feed", String(100), nullable=False),
    Column("origin", Text, nullable=False),  # file path, URL, push client or MQTT topic
    Column("sha256", String(64), nullable=False),
    Column("archive_path", Text, nullable=True),
    Column("received_at", UTCDateTime, nullable=False),
    Column("status", String(16), nullable=False),  # ok | partial | rejected | failed
    Column("message", Text, nullable=False, default=""),
    Column("received", Integer, nullable=False, default=0),
    Column("accepted", Integer, nullable=False, default=0),
    Column("flagged", Integer, nullable=False, default=0),
    Column("rejected", Integer, nullable=False, default=0),
    Column("duplicate", Integer, nullable=False, default=0),
    Index("ix_ingest_batches_feed_sha256", "feed", "sha256"),
)

rejected_rows = Table(
    "rejected_rows", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("batch_id", Integer, ForeignKey("ingest_batches.id"), nullable=False, index=True),
    Column("line", Integer, nullable=True),
    Column("raw", Text, nullable=False),
    Column("reason", Text, nullable=False),
)

readings = Table(
    "readings", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("station_id", String(64), nullable=False),
    Column("variable", String(64), nullable=False),
    Column("time_utc", UTCDateTime, nullable=False),
    # finite, in the variable's canonical unit; NULL = no number: missing (reported empty) or censored
    Column("value", Float, nullable=True),
    Column("qc_flag", SmallInteger, nullable=False),  # QARTOD: 1 pass, 2 not evaluated, 3 suspect, 4 fail, 9 missing
    Column("qc_tests", String(64), nullable=False, default=""),  # one digit per QC test, see monitor.ingest.qc
    Column("source", String(100), nullable=False),
    Column("batch_id", Integer, ForeignKey("ingest_batches.id"), nullable=False),
    # 1 = below the detection limit: value NULL, QC flag 9 (no number), the limit in detection_limit
    # (canonical unit; NULL when the feed did not say it); 0 = not censored
    Column("censored", SmallInteger, nullable=False, default=0, server_default=text("0")),
    Column("detection_limit", Float, nullable=True),
    Column("unit", String(64), nullable=True),  # a station's stored-only variable: its unit as sent; else NULL
    # 1 = a value for the whole local day ending at time_utc (a date without a time of day, see
    # monitor.ingest.cells); 0 = a value at the instant time_utc
    Column("whole_day", SmallInteger, nullable=False, default=0, server_default=text("0")),
    # The unique index also serves every (station, variable, time range) query: no second index.
    # a whole-day value (stamped at the end of its local day) and an instant reading at that time are two readings
    UniqueConstraint("station_id", "variable", "time_utc", "source", "whole_day"),
)

driver_forecasts = Table(
    "driver_forecasts", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("station_id", String(64), nullable=False),
    Column("variable", String(64), nullable=False),
    Column("issued_utc", UTCDateTime, nullable=False),
    Column("valid_utc", UTCDateTime, nullable=False),
    Column("value", Float, nullable=False),
    Column("source", String(100), nullable=False),
    Column("batch_id", Integer, ForeignKey("ingest_batches.id"), nullable=False),
    UniqueConstraint("station_id", "variable", "issued_utc", "valid_utc", "source"),
    Index("ix_driver_forecasts_station_issued", "station_id", "issued_utc"),
)

checkpoints = Table(
    "checkpoints", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("water_body_id", String(64), ForeignKey("water_bodies.id"), nullable=False),
    Column("time_utc", UTCDateTime, nullable=False),
    Column("created_at", UTCDateTime, nullable=False),
    Column("data", LargeBinary, nullable=False),
    UniqueConstraint("water_body_id", "time_utc"),
)

forecast_runs = Table(
    "forecast_runs", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("water_body_id", String(64), ForeignKey("water_bodies.id"), nullable=False),
    Column("analysis_utc", UTCDateTime, nullable=False),  # time of the analysis the forecast starts from
    Column("created_at", UTCDateTime, nullable=False),
    Column("status", String(16), nullable=False),  # ok | no_data | degraded | failed
    Column("message", Text, nullable=False, default=""),
    Column("diagnostics", JSON, nullable=True),
    UniqueConstraint("water_body_id", "analysis_utc"),
)

forecast_values = Table(
    "forecast_values", metadata,
    Column("run_id", Integer, ForeignKey("forecast_runs.id"), primary_key=True),
    Column("basin_id", String(64), primary_key=True),
    Column("valid_utc", UTCDateTime, primary_key=True),
    Column("quantity", String(64), primary_key=True),   # cyanobacteria_chlorophyll | total_chlorophyll | nitrogen | phosphorus
    Column("statistic", String(32), primary_key=True),  # mean | q05 | q25 | q50 | q75 | q95 | p_level_<n>
    Column("value", Float, nullable=False),
)

forecast_members = Table(
    "forecast_members", metadata,
    Column("run_id", Integer, ForeignKey("forecast_runs.id"), primary_key=True),
    Column("basin_id", String(64), primary_key=True),
    Column("quantity", String(64), primary_key=True),
    Column("forecaster", String(32), primary_key=True),  # bloomline | persistence | persistence_ensemble | …
    Column("variable", String(64), nullable=False),   # the observed variable it is verified against
    Column("days", SmallInteger, nullable=False),     # forecast days K + 1 (day 0 = the analysis)
    Column("members", SmallInteger, nullable=False),  # ensemble members M
    Column("data", LargeBinary, nullable=False),      # little-endian float32 (K + 1, M): members' daily means
)

forecast_scores = Table(
    "forecast_scores", metadata,
    Column("run_id", Integer, ForeignKey("forecast_runs.id"), primary_key=True),
    Column("basin_id", String(64), primary_key=True),
    Column("quantity", String(64), primary_key=True),
    Column("lead_days", SmallInteger, primary_key=True),
    Column("forecaster", String(32), primary_key=True),
    Column("water_body_id", String(64), nullable=False),
    Column("origin_utc", UTCDateTime, nullable=False),
    Column("valid_utc", UTCDateTime, nullable=False),
    Column("variable", String(64), nullable=False),
    Column("observed", Float, nullable=False),       # daily mean of the QC-passed readings [µg/L]
    Column("observed_n", Integer, nullable=False),
    Column("members", SmallInteger, nullable=False),
    Column("crps", Float, nullable=False),
    Column("crps_fair", Float, nullable=True),
    Column("q05", Float, nullable=False),
    Column("q25", Float, nullable=False),
    Column("median", Float, nullable=False),
    Column("q75", Float, nullable=False),
    Column("q95", Float, nullable=False),
    Column("log_mean", Float, nullable=False),
    Column("log_sd", Float, nullable=True),
    Column("rank", SmallInteger, nullable=False),
    Column("p_level_1", Float, nullable=True),
    Column("p_level_2", Float, nullable=True),
    Column("p_level_3", Float, nullable=True),
    Column("p_level_4", Float, nullable=True),
    Index("ix_forecast_scores_wb_valid", "water_body_id", "valid_utc"),
)

alert_status = Table(
    "alert_status", metadata,
    Column("water_body_id", String(64), primary_key=True),
    Column("basin_id", String(64), primary_key=True),
    Column("level", SmallInteger, nullable=False),  # 0 = no level; n = alert level n
    Column("since_utc", UTCDateTime, nullable=False),
    Column("quiet_cycles", Integer, nullable=False, default=0),
    Column("updated_utc", UTCDateTime, nullable=False),
)

alert_events = Table(
    "alert_events", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("water_body_id", String(64), nullable=False),
    Column("basin_id", String(64), nullable=False),
    Column("time_utc", UTCDateTime, nullable=False),
    Column("from_level", SmallInteger, nullable=False),
    Column("to_level", SmallInteger, nullable=False),
    Column("probability", Float, nullable=True),
    Column("observed_ugL", Float, nullable=True),
    Column("reason", Text, nullable=False, default=""),
    Index("ix_alert_events_wb_time", "water_body_id", "time_utc"),
)

subscribers = Table(
    "subscribers", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("name", String(200), nullable=False),
    Column("email", String(320), nullable=False),
    Column("water_body_id", String(64), nullable=False),
    Column("min_level", SmallInteger, nullable=False, default=1),
    Column("origin", String(16), nullable=False),  # config | web
    Column("token", String(64), nullable=False, unique=True),  # for unsubscribe links
    Column("active", SmallInteger, nullable=False, default=1),
    Column("created_at", UTCDateTime, nullable=False),
    UniqueConstraint("email", "water_body_id"),
)

outbox = Table(
    "outbox", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("event_id", Integer, ForeignKey("alert_events.id"), nullable=True),
    Column("recipient", String(320), nullable=False),  # an email address, or a webhook's name
    Column("subject", Text, nullable=False),  # email subject, or the webhook's event type
    Column("body", Text, nullable=False),  # plain text, or the webhook's JSON
    Column("created_at", UTCDateTime, nullable=False),
    Column("status", String(16), nullable=False),  # pending | sent | dead
    Column("attempts", Integer, nullable=False, default=0),  # delivery attempts started
    Column("next_attempt_at", UTCDateTime, nullable=False),
    Column("last_error", Text, nullable=True),
    Column("sent_at", UTCDateTime, nullable=True),
    Column("channel", String(16), nullable=False, server_default="email"),  # email | webhook
    # the idempotency key: Message-ID and X-Bloomline-Idempotency-Key, or the webhook's event id
    Column("message_key", String(200), nullable=False, unique=True),
    Column("body_html", Text, nullable=True),
    Column("headers", JSON, nullable=True),  # extra email headers (List-Unsubscribe …)
    UniqueConstraint("event_id", "recipient"),
    Index("ix_outbox_status_next", "status", "next_attempt_at"),
)

#: Every hand-over of an outbox row to a transport: started, then accepted or failed.
#: A row left "sending" is an attempt whose process died before it knew the answer.
delivery_attempts = Table(
    "delivery_attempts", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("outbox_id", Integer, ForeignKey("outbox.id"), nullable=False),
    Column("attempt", Integer, nullable=False),
    Column("started_utc", UTCDateTime, nullable=False),
    Column("ended_utc", UTCDateTime, nullable=True),
    Column("outcome", String(16), nullable=False),  # sending | accepted | failed
    Column("detail", Text, nullable=True),  # the server's answer or the error
    Column("owner", String(128), nullable=False),  # host:pid of the sender
    UniqueConstraint("outbox_id", "attempt"),
)

#: One row per job run: ingest rounds, each water body's daily cycle, send rounds.
job_runs = Table(
    "job_runs", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("job", String(32), nullable=False),  # ingest | cycle | send | webhooks
    Column("water_body_id", String(64), nullable=True),
    Column("scheduled_utc", UTCDateTime, nullable=True),  # a cycle's analysis time
    Column("started_utc", UTCDateTime, nullable=False),  # the service clock
    Column("ended_utc", UTCDateTime, nullable=True),
    Column("duration_s", Float, nullable=True),  # wall-clock duration [s]
    Column("outcome", String(16), nullable=False),  # running | ok | failed | interrupted
    Column("error", Text, nullable=True),
    Column("counts", JSON, nullable=True),
    Column("owner", String(128), nullable=False),  # host:pid of the process that ran it
    Index("ix_job_runs_job_wb_started", "job", "water_body_id", "started_utc"),
)

#: The one scheduler allowed to act: holder, heartbeat and a term raised at each takeover.
scheduler_lease = Table(
    "scheduler_lease", metadata,
    Column("name", String(64), primary_key=True),
    Column("holder", String(128), nullable=False),
    Column("term", Integer, nullable=False),
    Column("acquired_utc", UTCDateTime, nullable=False),  # wall clock
    Column("heartbeat_utc", UTCDateTime, nullable=False),
    Column("expires_utc", UTCDateTime, nullable=False),
)

#: What each http-pull feed remembers between polls and across restarts.
pull_states = Table(
    "pull_states", metadata,
    Column("feed", String(100), primary_key=True),
    Column("etag", Text, nullable=True),
    Column("last_modified", String(100), nullable=True),
    Column("last_sha256", String(64), nullable=True),
    Column("failures", Integer, nullable=False, default=0),
    Column("next_attempt_utc", UTCDateTime, nullable=True),
    Column("last_error", Text, nullable=True),
    Column("last_status", Integer, nullable=True),
    Column("history", JSON, nullable=True),
    Column("updated_utc", UTCDateTime, nullable=False),
)
