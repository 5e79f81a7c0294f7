"""Turning sampled configs into scikit-learn pipelines (the torch MLP included)."""

from tunelab.models._families import FAMILIES, Family, build_pipeline, family_params, preload
from tunelab.models._row_cap import ROWS_KEY, capped_rows, row_cap

__all__ = ["FAMILIES", "Family", "ROWS_KEY", "build_pipeline", "capped_rows", "family_params", "preload", "row_cap"]
