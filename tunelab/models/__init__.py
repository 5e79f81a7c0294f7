"""Turning sampled configs into scikit-learn pipelines (the torch MLP included)."""

from tunelab.models._families import FAMILIES, Family, build_pipeline, family_params, preload

__all__ = ["FAMILIES", "Family", "build_pipeline", "family_params", "preload"]
