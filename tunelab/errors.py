"""One exception tree for everything tunelab reports to a user.

::

    TunelabError                 every error a user can act on (exit code 2 in the CLI)
    ├── InputError               bad data file, target, task, metric or option value
    ├── BudgetError              a budget string that cannot be parsed or is not positive
    ├── StoreError               the store cannot be opened, is corrupt, or is too new
    │   └── StudyNotFound        no study of that name in the store
    ├── StudyStateError          the study cannot do what was asked (no finished trials, data changed)
    └── ModelFileError           a model file fails its hash or column check

Every error carries a ``hint``: the next thing the user should try.  Errors raised by
pandas, SQLAlchemy and optuna are translated into these at the loader and store boundary
(``raise ... from exc``), so the CLI maps exactly one type to a one-line message.
"""

from __future__ import annotations


class TunelabError(Exception):
    """Base of every error a user can act on.

    Parameters
    ----------
    message
        What is wrong, in one line.
    hint
        What to do about it, in one line (may be empty).
    """

    def __init__(self, message: str, hint: str = "") -> None:
        super().__init__(message)
        self.message = message
        self.hint = hint

    def __str__(self) -> str:
        return self.message


class InputError(TunelabError):
    """Bad data file, target column, task, metric or option value."""


class BudgetError(TunelabError):
    """A budget that cannot be parsed or is not positive."""


class StoreError(TunelabError):
    """The store cannot be opened, is not a tunelab store, or was written by a newer tunelab.

    ``transient`` marks a fault that may pass on its own (a lost or refused connection): a search
    waits and tries again for a while before it gives up. ``disk_full`` marks a full disk, whose
    hint names the study to resume once the block that knows the study sees it.
    """

    def __init__(self, message: str, hint: str = "", *, transient: bool = False, disk_full: bool = False) -> None:
        super().__init__(message, hint)
        self.transient = transient
        self.disk_full = disk_full


class StudyNotFound(StoreError):
    """No study of that name in the store."""


class StudyStateError(TunelabError):
    """The study exists but cannot do what was asked."""


class ModelFileError(TunelabError):
    """A model file is missing, altered, or does not match the input columns."""


def first_line(exc: BaseException) -> str:
    """The first line of an exception's message, or its type's name: what fits on one line of output.

    Library errors (SQLAlchemy, pandas, torch) often carry pages of detail after the first line.
    """
    lines = str(exc).strip().splitlines()
    return lines[0] if lines else type(exc).__name__


__all__ = [
    "BudgetError",
    "InputError",
    "ModelFileError",
    "StoreError",
    "StudyNotFound",
    "StudyStateError",
    "TunelabError",
    "first_line",
]
