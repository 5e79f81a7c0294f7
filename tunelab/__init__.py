"""tunelab: time-boxed, resumable hyperparameter search for tabular data, from the shell.

The Python API mirrors the shell verbs; the CLI in :mod:`tunelab.cli` is a thin layer over it.
"""

__version__ = "0.1.0"

from tunelab.errors import TunelabError  # noqa: E402

__all__ = ["TunelabError", "__version__"]
