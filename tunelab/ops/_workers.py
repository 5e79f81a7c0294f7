"""Extra worker processes for ``--jobs N``: forked from the launch once its data is loaded.

Each worker joins the study through the store as ``tunelab worker`` would, with its own store
connection and launch row, but it does not read or hash the data file again: it is a fork of
the launching process, so the data, the imported libraries and the warmed-up models are pages it
shares with its parent until one of them writes there (copy-on-write).  The memory of N workers
is then one copy of the data plus what each trial allocates (``benchmarks/big_tables.py``
measures the processes' proportional set size at ``--jobs 1`` and ``--jobs 2``).
"""

from __future__ import annotations

import multiprocessing as mp
import os
import signal
import sys
import time
import traceback
from collections.abc import Callable
from typing import Any

from tunelab.engine import StopRequested
from tunelab.errors import TunelabError

Work = Callable[[], int]  # what a worker does; its return value is the worker's exit code


class WorkerGroup:
    """``n`` forked workers on one study; stopped with the parent's signal, waited for at the end."""

    def __init__(self, n: int, work: Work) -> None:
        context = mp.get_context("fork")
        self.procs: list[Any] = []
        for _ in range(n):
            proc = context.Process(target=_worker_main, args=(work,), daemon=False)
            proc.start()
            self.procs.append(proc)

    @property
    def pids(self) -> list[int]:
        return [int(p.pid) for p in self.procs]

    def signal_all(self, sig: int = signal.SIGTERM) -> None:
        for proc in self.procs:
            if proc.is_alive():
                try:
                    os.kill(proc.pid, sig)
                except ProcessLookupError:
                    pass

    def wait(self, timeout: float) -> list[int | None]:
        """Wait for every worker; terminate those still running after ``timeout`` seconds."""
        end = time.monotonic() + timeout
        for proc in self.procs:
            proc.join(max(0.1, end - time.monotonic()))
            if proc.is_alive():
                proc.terminate()
                proc.join(10)
            if proc.is_alive():
                proc.kill()
                proc.join()
        return [p.exitcode for p in self.procs]

    def __enter__(self) -> WorkerGroup:
        return self

    def __exit__(self, exc_type: Any, *_: object) -> None:
        if exc_type is not None:
            self.signal_all(signal.SIGTERM)
        self.wait(timeout=30)


def _worker_main(work: Work) -> None:
    """The forked worker: do the work, and leave with its exit code (never through the parent's code)."""
    code = 1
    try:
        code = int(work())
    except TunelabError:
        code = 2  # the parent's launch reports the study's state; a worker stays quiet
    except KeyboardInterrupt:
        code = 130
    except StopRequested as stop:
        code = stop.exit_code
    except BaseException:  # a bug: say where, as `tunelab worker --debug` would
        traceback.print_exc()
    finally:
        sys.stdout.flush()
        sys.stderr.flush()
    os._exit(code)
