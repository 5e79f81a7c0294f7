"""Where the store lives: a path or a SQLAlchemy URL, from --store, TUNELAB_STORE, or the default."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from sqlalchemy.engine import make_url

from tunelab.errors import StoreError

DEFAULT_STORE = "tunelab.db"
ENV_VAR = "TUNELAB_STORE"
_SQLITE_HEADER = b"SQLite format 3\x00"


@dataclass(frozen=True)
class Location:
    """A resolved store: its SQLAlchemy URL, and the file path when it is SQLite."""

    url: str
    path: Path | None

    @property
    def is_sqlite(self) -> bool:
        return self.path is not None or self.url.startswith("sqlite")

    def display(self) -> str:
        """The location as a user should see it (no password)."""
        if self.path is not None:
            return str(self.path)
        return make_url(self.url).render_as_string(hide_password=True)


def resolve(store: str | None) -> Location:
    """Turn ``--store`` (or the env var, or the default file) into a :class:`Location`."""
    raw = store or os.environ.get(ENV_VAR) or DEFAULT_STORE
    if "://" in raw:
        try:
            url = make_url(raw)
        except Exception as exc:
            raise StoreError(f"cannot read store URL '{raw}'", "use a path or a URL like postgresql://host/db") from exc
        if url.drivername.startswith("sqlite"):
            path = Path(url.database).resolve() if url.database and url.database != ":memory:" else None
            return Location(raw if path is None else f"sqlite:///{path}", path)
        if url.drivername in ("postgresql", "postgres"):
            raw = url.set(drivername="postgresql+psycopg2").render_as_string(hide_password=False)
        return Location(raw, None)
    path = Path(raw).expanduser().resolve()
    return Location(f"sqlite:///{path}", path)


def check_sqlite_file(path: Path, create: bool) -> None:
    """Refuse a path that is not a SQLite file, cannot be created, or is a folder."""
    if path.is_dir():
        raise StoreError(f"store path {path} is a folder", "pass a file path, e.g. --store studies.db")
    if path.exists():
        if path.stat().st_size == 0:
            return
        with open(path, "rb") as handle:
            head = handle.read(16)
        if head != _SQLITE_HEADER:
            raise StoreError(f"{path} is not a SQLite database (corrupt, or another kind of file)",
                             "pass another --store path; tunelab never overwrites it")
        if not os.access(path, os.R_OK | os.W_OK):
            raise StoreError(f"store {path} is not readable and writable",
                             "fix its permissions or pass another --store")
        return
    if not create:
        raise StoreError(f"no store at {path}", "start a study with `tunelab run`, or pass --store / TUNELAB_STORE")
    parent = path.parent
    if not parent.exists():
        raise StoreError(f"folder {parent} does not exist", "create it, or pass another --store path")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise StoreError(f"cannot write a store in {parent} (permission denied)", "pass a writable --store path")
