"""Turning sampled configs into scikit-learn pipelines (the torch MLP included), and model files.

The family registry (``FAMILIES``) lives here; every other package asks it for the families.
"""

from tunelab.models._ensemble import WeightedEnsemble
from tunelab.models._families import FAMILIES, MLP_RUNGS, Family, build_pipeline, family_params, preload
from tunelab.models._model_file import check_columns, load_pipeline, read_meta, write_model_file
from tunelab.models._preprocess import ONE_HOT_MAX_CARDINALITY
from tunelab.models._row_cap import ROWS_KEY, capped_rows, row_cap

FAMILY_NAMES: tuple[str, ...] = tuple(FAMILIES)
"""Every model family tunelab can build, in the one order everyone lists them (the registry's)."""

__all__ = ["FAMILIES", "FAMILY_NAMES", "Family", "MLP_RUNGS", "ONE_HOT_MAX_CARDINALITY", "ROWS_KEY",
           "WeightedEnsemble", "build_pipeline", "capped_rows", "check_columns", "family_params", "load_pipeline",
           "preload", "read_meta", "row_cap", "write_model_file"]
