"""tunelab: time-boxed, resumable hyperparameter search for tabular data, from the shell or Python.

The shell verbs are typed functions here (``tunelab.run``, ``tunelab.importance``, ...; see
:mod:`tunelab.api`); the CLI in :mod:`tunelab.cli` is a thin layer over the same operations.
"""

from tunelab.api import export, freeze, importance, predict, profile, report, resume, run, status
from tunelab.errors import TunelabError

__version__ = "0.1.0"

__all__ = ["TunelabError", "__version__", "export", "freeze", "importance", "predict", "profile", "report",
           "resume", "run", "status"]
