"""Search spaces: families, ranges, priors, the shipped portfolio, and the serialisable spec stored with a study."""

from tunelab.space._builder import build_space
from tunelab.space._carry import carry_config, carry_configs
from tunelab.space._default import default_families, default_space
from tunelab.space._portfolio import SHIPPED as SHIPPED_PORTFOLIO, Member, Portfolio, load_portfolio, portfolio_document
from tunelab.space._rules_of_thumb import REFERENCE_BUDGET_S
from tunelab.space._spec import FamilySpec, ParamSpec, SpaceSpec, fixed

__all__ = ["FamilySpec", "Member", "ParamSpec", "Portfolio", "REFERENCE_BUDGET_S", "SHIPPED_PORTFOLIO", "SpaceSpec",
           "build_space", "carry_config", "carry_configs", "default_families", "default_space", "fixed",
           "load_portfolio", "portfolio_document"]
