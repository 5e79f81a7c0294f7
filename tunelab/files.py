"""Files tunelab writes (model files, reports, predictions, space files): whole or not at all.

Each is written to a temporary name beside its target and renamed over it once complete, so a
reader never sees half a file and a full disk leaves nothing under the final name; the temporary
file is removed whatever happens.
"""

from __future__ import annotations

import contextlib
import errno
import os
from collections.abc import Callable
from pathlib import Path

from tunelab.errors import InputError


def write_atomically(path: Path, write: Callable[[Path], object], what: str = "file") -> None:
    """Call ``write(tmp)`` on a temporary path beside ``path``, then rename it over ``path``.

    Raises
    ------
    InputError
        The folder is missing or not writable, or the disk is full; nothing is left behind.
    """
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        write(tmp)
        with open(tmp, "rb") as handle:
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        raise disk_error(exc, path, what) from exc
    finally:
        with contextlib.suppress(OSError):  # gone, or its folder never was one
            tmp.unlink(missing_ok=True)


def disk_error(exc: OSError, path: Path, what: str) -> InputError:
    """An OS error while writing, as one line that says what to do."""
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return InputError(f"disk full at {path.parent}: the {what} {path.name} was not written",
                          "free space and run the command again; nothing was left under that name")
    return InputError(f"cannot write the {what} {path}: {exc.strerror or exc}",
                      "choose a path in a folder you can write to")


__all__ = ["disk_error", "write_atomically"]
