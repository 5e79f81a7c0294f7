"""Trial runners: where an objective executes, and how it is stopped when time runs out.

``InProcessRunner`` calls the objective directly (cheap; used for fast objectives and tests).
``ForkRunner`` runs each trial in a forked child process that the engine can kill at the deadline,
so no single slow fit can overrun the budget.  Both speak the same protocol: the child reports
intermediate values, the engine answers "go on" or "prune".
"""

from __future__ import annotations

import ctypes
import multiprocessing as mp
import os
import signal
import traceback
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any, Literal, TypedDict

from tunelab.engine._clock import Clock
from tunelab.engine._objective import Objective, PruneSignal, TrialResult
from tunelab.engine._stop import raise_pending

OutcomeKind = Literal["complete", "pruned", "failed", "timeout"]
ShouldPrune = Callable[[int, float], bool]
_POLL_SECONDS = 0.1


class _LastReport(TypedDict):
    """The last step a trial reported, and its score there."""

    step: int
    value: float | None


@dataclass
class Outcome:
    """How a trial ended, with its result, the last report, and the CPU seconds it used."""

    kind: OutcomeKind
    result: TrialResult | None = None
    error: str = ""
    last_step: int = 0
    last_value: float | None = None
    cpu_seconds: float = 0.0
    extras: dict[str, Any] = field(default_factory=dict)
    fold_scores: list[float] | None = None  # a pruned trial's metric on the folds it finished


class Limits:
    """When a running trial must stop: a wall deadline and an optional CPU-seconds allowance."""

    def __init__(self, deadline: float | None, cpu_left: float | None = None) -> None:
        self.deadline = deadline
        self.cpu_left = cpu_left


class InProcessRunner:
    """Runs the objective in this process; a deadline is honoured only between reports."""

    def __init__(self, objective: Objective) -> None:
        self.objective = objective

    def run(self, config: Mapping[str, Any], should_prune: ShouldPrune, limits: Limits, clock: Clock) -> Outcome:
        state: _LastReport = {"step": 0, "value": None}
        cpu0 = _own_cpu()

        def report(step: int, value: float) -> None:
            state["step"], state["value"] = step, value
            if should_prune(step, value):
                raise PruneSignal()
            if limits.deadline is not None and clock.now() >= limits.deadline:
                raise _Timeout()

        folds: list[float] | None = None
        try:
            result = self.objective(config, report)
            kind: OutcomeKind = "complete"
            error = ""
        except PruneSignal as stop:
            result, kind, error, folds = None, "pruned", "", stop.fold_scores
        except _Timeout:
            result, kind, error = None, "timeout", ""
        except (KeyboardInterrupt, SystemExit):
            raise
        except Exception as exc:  # a failing config must not end the search
            result, kind, error = None, "failed", _error_text(exc)
        return Outcome(kind, result, error, int(state["step"]), state["value"], _own_cpu() - cpu0,
                       fold_scores=folds)

    def close(self) -> None:
        return None


class _Timeout(Exception):
    pass


class ForkRunner:
    """Runs each trial in a forked child that dies with the parent and is killed at the deadline."""

    def __init__(self, objective: Objective) -> None:
        self.objective = objective
        self._ctx = mp.get_context("fork")
        self._child: Any = None

    def run(self, config: Mapping[str, Any], should_prune: ShouldPrune, limits: Limits, clock: Clock) -> Outcome:
        parent_end, child_end = self._ctx.Pipe()
        child = self._ctx.Process(target=_child_main, args=(self.objective, dict(config), child_end), daemon=True)
        child.start()
        self._child = child
        child_end.close()
        last_step, last_value = 0, None
        try:
            while True:
                raise_pending()  # a stop whose signal landed where exceptions are swallowed (at fork)
                if limits.deadline is not None and clock.now() >= limits.deadline:
                    return self._stop(child, Outcome("timeout", last_step=last_step, last_value=last_value))
                if limits.cpu_left is not None and _process_cpu(child.pid) >= limits.cpu_left:
                    return self._stop(child, Outcome("timeout", last_step=last_step, last_value=last_value,
                                                     extras={"stopped_by": "cpu budget"}))
                wait = _POLL_SECONDS
                if limits.deadline is not None:
                    wait = max(0.0, min(wait, limits.deadline - clock.now()))
                if not parent_end.poll(wait):
                    if not child.is_alive() and not parent_end.poll(0):
                        child.join()
                        return Outcome("failed", error=f"trial process died (exit code {child.exitcode})",
                                       last_step=last_step, last_value=last_value)
                    continue
                try:
                    message = parent_end.recv()
                except EOFError:
                    child.join()
                    return Outcome("failed", error=f"trial process died (exit code {child.exitcode})",
                                   last_step=last_step, last_value=last_value)
                tag = message[0]
                if tag == "report":
                    last_step, last_value = message[1], message[2]
                    parent_end.send(should_prune(last_step, last_value))
                    continue
                cpu = message[-1]
                child.join()
                if tag == "done":
                    return Outcome("complete", result=message[1], last_step=last_step, last_value=last_value,
                                   cpu_seconds=cpu)
                if tag == "pruned":
                    return Outcome("pruned", last_step=last_step, last_value=last_value, cpu_seconds=cpu,
                                   fold_scores=message[1])
                return Outcome("failed", error=message[1], last_step=last_step, last_value=last_value, cpu_seconds=cpu)
        except BaseException:
            self._kill(child)
            raise
        finally:
            parent_end.close()
            self._child = None

    def live_cpu(self) -> float:
        """CPU seconds of the trial running now (not yet in this process's children times)."""
        child = self._child
        return _process_cpu(child.pid) if child is not None and child.is_alive() else 0.0

    def _stop(self, child: Any, outcome: Outcome) -> Outcome:
        outcome.cpu_seconds = _process_cpu(child.pid)
        self._kill(child)
        return outcome

    @staticmethod
    def _kill(child: Any) -> None:
        if child.is_alive():
            child.kill()
        child.join(timeout=5)

    def close(self) -> None:
        if self._child is not None:
            self._kill(self._child)


def _child_main(objective: Objective, config: dict[str, Any], conn: Any) -> None:
    _die_with_parent()
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides what Ctrl-C means
    signal.signal(signal.SIGTERM, signal.SIG_DFL)

    def report(step: int, value: float) -> None:
        conn.send(("report", step, value))
        if conn.recv():
            raise PruneSignal()

    try:
        result = objective(config, report)
        conn.send(("done", result, _own_cpu()))
    except PruneSignal as stop:
        conn.send(("pruned", stop.fold_scores, _own_cpu()))
    except BaseException as exc:  # report every failure to the parent as text
        conn.send(("error", _error_text(exc), _own_cpu()))
    finally:
        conn.close()
        os._exit(0)


def _die_with_parent() -> None:
    """Ask Linux to kill this child when the parent dies (kill -9 included); no-op elsewhere."""
    try:
        libc = ctypes.CDLL("libc.so.6", use_errno=True)
        libc.prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass


def _own_cpu() -> float:
    times = os.times()
    return times.user + times.system


def _process_cpu(pid: int | None) -> float:
    """CPU seconds a live process has used (0 once it is gone); psutil reads it on any platform."""
    if pid is None:
        return 0.0
    import psutil

    try:
        times = psutil.Process(pid).cpu_times()
    except (psutil.Error, OSError):
        return 0.0
    return float(times.user + times.system)


def _error_text(exc: BaseException) -> str:
    lines = traceback.format_exception_only(type(exc), exc)
    return "".join(lines).strip().splitlines()[-1][:2000]
