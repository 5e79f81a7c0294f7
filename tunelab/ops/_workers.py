"""Extra worker processes for ``--jobs N``: each is a ``tunelab worker`` sharing the study through the store."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from typing import Any


class WorkerGroup:
    """``n`` worker subprocesses on one study; stopped with the parent's signal, waited for at the end."""

    def __init__(self, study: str, store_url: str, n: int, data: str | None = None) -> None:
        self.procs: list[subprocess.Popen[bytes]] = []
        env = {**os.environ, "TUNELAB_STORE": store_url}  # the URL may hold a password: keep it out of argv
        args = [sys.executable, "-m", "tunelab", "worker", study, "-q", "--jobs", "1"]  # each is one worker
        if data:
            args += ["--data", data]
        for _ in range(n):
            self.procs.append(subprocess.Popen(args, env=env, stdout=subprocess.DEVNULL))

    @property
    def pids(self) -> list[int]:
        return [p.pid for p in self.procs]

    def signal_all(self, sig: int = signal.SIGTERM) -> None:
        for proc in self.procs:
            if proc.poll() is None:
                try:
                    proc.send_signal(sig)
                except ProcessLookupError:
                    pass

    def wait(self, timeout: float) -> list[int | None]:
        """Wait for every worker; terminate those still running after ``timeout`` seconds."""
        end = time.monotonic() + timeout
        for proc in self.procs:
            try:
                proc.wait(timeout=max(0.1, end - time.monotonic()))
            except subprocess.TimeoutExpired:
                proc.terminate()
                try:
                    proc.wait(timeout=10)
                except subprocess.TimeoutExpired:
                    proc.kill()
                    proc.wait()
        return [p.returncode for p in self.procs]

    def __enter__(self) -> WorkerGroup:
        return self

    def __exit__(self, exc_type: Any, *_: object) -> None:
        if exc_type is not None:
            self.signal_all(signal.SIGTERM)
        self.wait(timeout=30)
