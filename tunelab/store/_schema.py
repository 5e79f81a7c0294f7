"""The store's own tables (trials live in optuna's tables in the same database).

Timestamps are UTC ISO strings plus epoch seconds for arithmetic; structured values are JSON text.
"""

from __future__ import annotations

from sqlalchemy import Column, Float, ForeignKey, Integer, LargeBinary, MetaData, String, Table, Text, UniqueConstraint

SCHEMA_VERSION = 2  # 2: out-of-fold predictions (tl_prediction)

metadata = MetaData()

meta = Table(
    "tl_meta", metadata,
    Column("key", String(64), primary_key=True),
    Column("value", Text, nullable=False),
)

studies = Table(
    "tl_study", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("name", String(200), nullable=False, unique=True),
    Column("created_at", String(40), nullable=False),
    Column("data_path", Text, nullable=False),
    Column("data_sha256", String(64), nullable=False),
    Column("fingerprint", String(64), nullable=False),
    Column("target", Text, nullable=False),
    Column("task", String(20), nullable=False),
    Column("metric", String(20), nullable=False),
    Column("direction", String(10), nullable=False),
    Column("seed", Integer, nullable=False),
    Column("budget_wall", Float),
    Column("budget_cpu", Float),
    Column("budget_trials", Integer),
    Column("settings_json", Text, nullable=False, default="{}"),
)

phases = Table(
    "tl_phase", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("study_id", Integer, ForeignKey("tl_study.id"), nullable=False),
    Column("number", Integer, nullable=False),
    Column("created_at", String(40), nullable=False),
    Column("reason", Text, nullable=False),
    Column("space_json", Text, nullable=False),
    Column("first_trial", Integer, nullable=False, default=0),
    UniqueConstraint("study_id", "number"),
)

launches = Table(
    "tl_launch", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("study_id", Integer, ForeignKey("tl_study.id"), nullable=False),
    Column("kind", String(20), nullable=False),
    Column("host", String(200), nullable=False),
    Column("pid", Integer, nullable=False),
    Column("started_at", String(40), nullable=False),
    Column("started_epoch", Float, nullable=False),
    Column("heartbeat_at", String(40), nullable=False),
    Column("heartbeat_epoch", Float, nullable=False),
    Column("wall_seconds", Float, nullable=False, default=0.0),
    Column("cpu_seconds", Float, nullable=False, default=0.0),
    Column("trials_done", Integer, nullable=False, default=0),
    Column("state", String(20), nullable=False),
    Column("stop_reason", Text, nullable=False, default=""),
)

exports = Table(
    "tl_export", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("study_id", Integer, ForeignKey("tl_study.id"), nullable=False),
    Column("created_at", String(40), nullable=False),
    Column("path", Text, nullable=False),
    Column("sha256", String(64), nullable=False),
    Column("trial_number", Integer, nullable=False),
)

requeues = Table(
    "tl_requeue", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("study_id", Integer, ForeignKey("tl_study.id"), nullable=False),
    Column("trial_number", Integer, nullable=False),
    Column("created_at", String(40), nullable=False),
    UniqueConstraint("study_id", "trial_number"),
)

# A complete trial's predictions on the held-out rows of each fold, for ensemble selection: plain
# little-endian float32 arrays (rows x cols, in the order of the fold's held-out rows), never pickles;
# the sha256 of the bytes refuses a damaged array.
predictions = Table(
    "tl_prediction", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("study_id", Integer, ForeignKey("tl_study.id"), nullable=False),
    Column("trial_number", Integer, nullable=False),
    Column("fold", Integer, nullable=False),
    Column("value", Float, nullable=False),  # the trial's cross-validated score, to keep the best K
    Column("n_rows", Integer, nullable=False),
    Column("n_cols", Integer, nullable=False),
    Column("data", LargeBinary, nullable=False),
    Column("sha256", String(64), nullable=False),
    UniqueConstraint("study_id", "trial_number", "fold"),
)
