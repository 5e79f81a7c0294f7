"""Real faults for tests/test_faults.py and benchmarks/fault_loop.py: a small full disk, a TCP link to
PostgreSQL that can be cut, and what a store holds afterwards.

Nothing here imitates a fault: the disk is a size-limited tmpfs mounted for the test (as root, as CI
runs), the link is a real socket proxy whose connections are really closed.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import socket
import sqlite3
import subprocess
import sys
import tempfile
import threading
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

TUNELAB = [sys.executable, "-m", "tunelab"]
PG_ADMIN_URL = os.environ.get("TUNELAB_TEST_POSTGRES", "postgresql://127.0.0.1:5432/test")


@contextlib.contextmanager
def small_disk(size_kb: int = 4096) -> Iterator[Path]:
    """A tmpfs of ``size_kb`` mounted on a fresh folder (needs root); unmounted afterwards."""
    folder = Path(tempfile.mkdtemp(prefix="tunelab-disk-"))
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size_kb}k", "tmpfs", str(folder)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        folder.rmdir()
        raise PermissionError(f"cannot mount a tmpfs: {done.stderr.strip()}")
    try:
        yield folder
    finally:
        subprocess.run(["umount", "-l", str(folder)], capture_output=True)
        with contextlib.suppress(OSError):
            folder.rmdir()


def can_mount() -> bool:
    try:
        with small_disk(64):
            return True
    except (PermissionError, FileNotFoundError):
        return False


def fill(folder: Path, leave_kb: int) -> Path:
    """Fill the disk under ``folder`` until about ``leave_kb`` KB are free; returns the filler file."""
    filler = folder / "filler"
    free_kb = shutil.disk_usage(folder).free // 1024
    with open(filler, "wb") as handle:
        handle.write(b"\0" * max(0, free_kb - leave_kb) * 1024)
    return filler


@dataclass
class StoreFacts:
    """What a SQLite store holds after a fault."""

    integrity: str
    states: dict[str, int]  # optuna's trial states, counted
    complete: set[int]  # trial numbers complete
    retries: dict[int, int]  # interrupted trial number -> times its config was re-queued
    launches: list[tuple[int, str]]  # (launch id, state)
    studies: int


def worker_processes(run_pid: int, store: Path) -> list[Any]:
    """The worker processes a ``run --jobs N`` forked (children of the run whose pid a worker launch holds)."""
    import psutil

    try:
        with sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=5) as conn:
            pids = {int(p) for (p,) in conn.execute("select pid from tl_launch where kind = 'worker'")}
    except sqlite3.Error:  # not created yet
        return []
    return [p for p in psutil.Process(run_pid).children() if p.pid in pids]


def read_store(path: Path) -> StoreFacts:
    with contextlib.closing(sqlite3.connect(path)) as conn:
        integrity = conn.execute("pragma integrity_check").fetchone()[0]
        states: dict[str, int] = {}
        for state, count in conn.execute("select state, count(*) from trials group by state"):
            states[state] = count
        complete = {n for (n,) in conn.execute("select number from trials where state = 'COMPLETE'")}
        retries: dict[int, int] = {}
        for (value,) in conn.execute("select value_json from trial_user_attributes where key = 'tl_retry_of'"):
            retries[int(value)] = retries.get(int(value), 0) + 1
        launches = list(conn.execute("select id, state from tl_launch order by id"))
        studies = conn.execute("select count(*) from tl_study").fetchone()[0]
    return StoreFacts(integrity, states, complete, retries, launches, studies)


class CuttableLink:
    """A TCP proxy from a local port to a server: ``cut()`` closes every connection and refuses new
    ones (a dropped network), ``restore()`` accepts again."""

    def __init__(self, target: tuple[str, int]) -> None:
        self.target = target
        self.listener = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self.listener.bind(("127.0.0.1", 0))
        self.listener.listen(64)
        self.port = self.listener.getsockname()[1]
        self.up = threading.Event()
        self.up.set()
        self._open: list[socket.socket] = []
        self._lock = threading.Lock()
        self._closed = False
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self) -> None:
        while not self._closed:
            try:
                client, _ = self.listener.accept()
            except OSError:
                return
            if not self.up.is_set():
                client.close()
                continue
            try:
                server = socket.create_connection(self.target, timeout=5)
            except OSError:
                client.close()
                continue
            with self._lock:
                self._open += [client, server]
            for a, b in ((client, server), (server, client)):
                threading.Thread(target=self._pump, args=(a, b), daemon=True).start()

    @staticmethod
    def _pump(source: socket.socket, sink: socket.socket) -> None:
        try:
            while True:
                data = source.recv(65536)
                if not data:
                    break
                sink.sendall(data)
        except OSError:
            pass
        finally:
            for s in (source, sink):
                with contextlib.suppress(OSError):
                    s.shutdown(socket.SHUT_RDWR)

    def cut(self) -> None:
        self.up.clear()
        with self._lock:
            for s in self._open:
                with contextlib.suppress(OSError):
                    s.shutdown(socket.SHUT_RDWR)
                    s.close()
            self._open.clear()

    def restore(self) -> None:
        self.up.set()

    def close(self) -> None:
        self._closed = True
        self.cut()
        self.listener.close()


@contextlib.contextmanager
def pg_database() -> Iterator[str]:
    """A fresh PostgreSQL database on the test server, dropped afterwards; yields its URL."""
    from sqlalchemy import create_engine, text

    name = f"tl_{uuid.uuid4().hex[:12]}"
    admin = create_engine(PG_ADMIN_URL.replace("postgresql://", "postgresql+psycopg2://"), isolation_level="AUTOCOMMIT",
                          connect_args={"connect_timeout": 5})
    with admin.connect() as conn:
        conn.execute(text(f'create database "{name}"'))
    try:
        yield PG_ADMIN_URL.rsplit("/", 1)[0] + "/" + name
    finally:
        with admin.connect() as conn:
            conn.execute(text("select pg_terminate_backend(pid) from pg_stat_activity where datname = :n"), {"n": name})
            conn.execute(text(f'drop database if exists "{name}"'))
        admin.dispose()


def pg_facts(url: str) -> StoreFacts:
    """The same facts as ``read_store``, from a PostgreSQL store."""
    from sqlalchemy import create_engine, text

    engine = create_engine(url.replace("postgresql://", "postgresql+psycopg2://"))
    try:
        with engine.connect() as conn:
            states = {s: c for s, c in conn.execute(text("select state, count(*) from trials group by state"))}
            complete = {n for (n,) in conn.execute(text("select number from trials where state = 'COMPLETE'"))}
            retries: dict[int, int] = {}
            for (value,) in conn.execute(text("select value_json from trial_user_attributes "
                                              "where key = 'tl_retry_of'")):
                retries[int(value)] = retries.get(int(value), 0) + 1
            launches = list(conn.execute(text("select id, state from tl_launch order by id")))
            studies = conn.execute(text("select count(*) from tl_study")).scalar()
    finally:
        engine.dispose()
    return StoreFacts("ok", {str(k): int(v) for k, v in states.items()}, complete, retries,
                      [(int(i), str(s)) for i, s in launches], int(studies or 0))
