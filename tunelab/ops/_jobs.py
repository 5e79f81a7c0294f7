"""How many worker processes a search runs: ``--jobs N``, or ``auto`` for the machine it was given.

``auto`` is the CPUs this process may use — the affinity mask (``os.sched_getaffinity``, which a
container or ``taskset`` narrows) and the cgroup CPU quota (what a container's ``--cpus`` sets) —
with one thread per trial.  Each worker reads the data itself, so ``auto`` is also capped by the
memory available over what one process holds once the data is loaded.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

from tunelab.errors import InputError

AUTO = "auto"
ENV_VAR = "TUNELAB_JOBS"  # the default for --jobs, as TUNELAB_STORE is for --store
_CGROUP_V2 = Path("/sys/fs/cgroup/cpu.max")
_CGROUP_V1 = (Path("/sys/fs/cgroup/cpu/cpu.cfs_quota_us"), Path("/sys/fs/cgroup/cpu/cpu.cfs_period_us"))


@dataclass(frozen=True)
class Jobs:
    """The worker count a launch runs, and why (for the start line)."""

    count: int
    why: str


def parse_jobs(text: str | int | None) -> str | int:
    """``auto`` or a whole number of at least 1, as typed after ``--jobs``; ``None`` is the default
    (``TUNELAB_JOBS``, else ``auto``)."""
    if text is None:
        text = os.environ.get(ENV_VAR) or AUTO
    if isinstance(text, int) and not isinstance(text, bool):
        value = text
    elif str(text).strip().lower() == AUTO:
        return AUTO
    else:
        try:
            value = int(str(text).strip())
        except ValueError:
            raise InputError(f"--jobs must be auto or a whole number, got '{text}'",
                             "e.g. --jobs auto (the CPUs this machine gives), or --jobs 1") from None
    if value < 1:
        raise InputError(f"--jobs must be at least 1, got {value}", "e.g. --jobs auto, or --jobs 1")
    return value


def usable_cpus() -> tuple[int, str]:
    """The CPUs this process may use: its affinity, capped by the cgroup's CPU quota, with the reason."""
    try:
        cpus = len(os.sched_getaffinity(0))
        why = f"{cpus} CPU{'s' if cpus != 1 else ''} in this process's affinity"
    except AttributeError:  # not on Linux
        cpus = os.cpu_count() or 1
        why = f"{cpus} CPU{'s' if cpus != 1 else ''}"
    quota = cgroup_quota()
    if quota is not None and quota < cpus:
        cpus = quota
        why = f"a CPU quota of {quota} (cgroup)"
    return max(1, cpus), why


def cgroup_quota() -> int | None:
    """The cgroup's CPU quota in whole CPUs (rounded up), ``None`` when there is none."""
    try:
        if _CGROUP_V2.exists():
            quota, period = _CGROUP_V2.read_text().split()[:2]
            if quota != "max":
                return max(1, math.ceil(int(quota) / int(period)))
            return None
        if _CGROUP_V1[0].exists():
            quota_us = int(_CGROUP_V1[0].read_text())
            period_us = int(_CGROUP_V1[1].read_text())
            if quota_us > 0 and period_us > 0:
                return max(1, math.ceil(quota_us / period_us))
    except (OSError, ValueError):
        return None
    return None


def resolve_jobs(requested: str | int, *, process_bytes: int | None = None) -> Jobs:
    """The worker count for ``--jobs``: a number as given, or ``auto``.

    ``process_bytes`` is what one process holds with the data loaded (this one's resident memory);
    ``auto`` runs no more workers than the available memory holds of them.
    """
    if requested != AUTO:
        count = int(requested)
        return Jobs(count, f"--jobs {count}")
    cpus, why = usable_cpus()
    if process_bytes:
        import psutil

        fits = max(1, int(psutil.virtual_memory().available // process_bytes))
        if fits < cpus:
            return Jobs(fits, f"auto: {why}, but memory for {fits}")
    return Jobs(cpus, f"auto: {why}")


__all__ = ["AUTO", "ENV_VAR", "Jobs", "cgroup_quota", "parse_jobs", "resolve_jobs", "usable_cpus"]
