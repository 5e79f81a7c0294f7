"""Search spaces: families, ranges, priors, and the serialisable spec stored with a study."""

from tunelab.space._default import default_families, default_space
from tunelab.space._spec import FamilySpec, ParamSpec, SpaceSpec, fixed

__all__ = ["FamilySpec", "ParamSpec", "SpaceSpec", "default_families", "default_space", "fixed"]
