"""Schema migrations: each brings a store from schema N to N + 1, in place, with alembic's operations.

A migration must be safe to run again: SQLite's driver commits DDL on its own, so a crash after a
table was created and before the version row moved re-runs the step on the next open.
"""

from __future__ import annotations

from collections.abc import Callable

from sqlalchemy import Column, Float, ForeignKey, Integer, LargeBinary, String, UniqueConstraint, inspect
from sqlalchemy.engine import Connection


def _add_predictions(conn: Connection) -> None:
    """1 -> 2: the table of out-of-fold predictions (``tl_prediction``), as schema 2 defines it.

    Spelled out here rather than taken from ``_schema``: a migration is frozen in time, whatever
    later schemas do to the table.
    """
    from alembic.migration import MigrationContext
    from alembic.operations import Operations

    if "tl_prediction" in inspect(conn).get_table_names():
        return
    Operations(MigrationContext.configure(conn)).create_table(
        "tl_prediction",
        Column("id", Integer, primary_key=True, autoincrement=True),
        Column("study_id", Integer, ForeignKey("tl_study.id"), nullable=False),
        Column("trial_number", Integer, nullable=False),
        Column("fold", Integer, nullable=False),
        Column("value", Float, nullable=False),
        Column("n_rows", Integer, nullable=False),
        Column("n_cols", Integer, nullable=False),
        Column("data", LargeBinary, nullable=False),
        Column("sha256", String(64), nullable=False),
        UniqueConstraint("study_id", "trial_number", "fold"),
    )


MIGRATIONS: dict[int, Callable[[Connection], None]] = {1: _add_predictions}

__all__ = ["MIGRATIONS"]
