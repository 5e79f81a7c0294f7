"""The data-driven search space: the data's facts in, families, ranges, priors and reasons out.

Every decision the builder takes is a small rule over the data's facts (meta-features, probe
results, folds, metric: :class:`tunelab.facts.DataFacts`) and the budget, and every rule leaves a
one-line reason in the spec, so ``tunelab profile`` can show why the space looks the way it does.
The rules are rules of thumb unless a comment names a source.

The concerns live apart: the rules of thumb (``_rules_of_thumb``), what the rules read
(``_rule_facts``), the cost model (``_cost_model``), the per-family rules (``_family_rules``), which
families are kept and the order of their warm starts (``_ranking``), and the notes (``_notes``).
This module puts them together.
"""

from __future__ import annotations

import statistics
from dataclasses import replace
from typing import Any

from tunelab.evaluation import LadderChoice, choose_ladder
from tunelab.facts import DataFacts
from tunelab.models import ROWS_KEY
from tunelab.space._decision import Decision, clamp, int_spec, prior_centre
from tunelab.space._family_rules import decide_families
from tunelab.space._notes import preprocessing_notes, regime_notes
from tunelab.space._ranking import select_families, warm_starts
from tunelab.space._rule_facts import RuleFacts, rule_facts
from tunelab.space._spec import FamilySpec, ParamSpec, SpaceSpec


def build_space(data: DataFacts, *, budget_seconds: float | None, workers: int = 1,
                rows_fidelity: str = "auto") -> SpaceSpec:
    """Build a search space for one dataset from its facts and the budget.

    Parameters
    ----------
    data
        The dataset's facts (:func:`tunelab.facts.data_facts`): the cost probes decide which
        families fit the budget, the landmarkers how promising each is; class weights are not
        searched under a log-loss metric, which scores the probabilities that reweighting
        biases; the numeric-map probe, when there is one, orders the maps the scaled families
        search (else the skewness rule orders them).
    budget_seconds
        The study's wall-clock budget; ``None`` weighs costs against a reference of
        ``REFERENCE_BUDGET_S`` seconds (:mod:`tunelab.space._rules_of_thumb`).
    workers
        Processes that will search at once (how many full-data trials fit the budget).
    rows_fidelity
        ``auto``: on a big table where few full-data trials fit the budget, trials climb a row
        ladder (``tunelab.evaluation.choose_ladder``; the spec's ``row_shares``), a family too slow
        for every row climbing to its fixed sample; ``off``: every trial on all rows, slow families
        on a fixed sample.

    Returns
    -------
    SpaceSpec
        Families that fit, ranges scaled to the data, warm starts at the prior centres of the
        most promising families first, and a one-line reason for every decision.
    """
    facts = rule_facts(data, budget_seconds)
    decisions, mlp_notes = decide_families(facts)
    ladder = _ladder(decisions, facts, budget_seconds, workers, rows_fidelity)
    if ladder:
        facts = replace(facts, row_ladder=True)
        decisions, mlp_notes = decide_families(facts)
    kept, family_reason = select_families(decisions, facts)
    prep, prep_centre = _prep_params(facts)
    families = {d.family: FamilySpec(dict(d.params), d.reason) for d in kept}
    warm = warm_starts(kept, prep_centre, facts)
    left_out = [f"{d.family} left out: {d.reason}" for d in decisions if not d.include]
    kept_mlp = any(d.family == "mlp" for d in kept)
    notes = [f"{len(facts.columns)} columns, {facts.n_rows} rows, {facts.task}; {facts.n_folds}-fold "
             "cross-validation per trial",
             *left_out, *(mlp_notes if kept_mlp else []), *preprocessing_notes(facts),
             *regime_notes(facts), *([ladder.reason] if ladder or rows_fidelity == "off" else []),
             "warm starts (prior centres, tried first): " + ", ".join(w["family"] for w in warm)]
    costs = sorted(d.trial_s for d in kept if d.trial_s)
    return SpaceSpec(params=prep, families=families, warm_starts=tuple(warm), notes=tuple(notes),
                     family_reason=family_reason, trial_seconds=statistics.median(costs) if costs else None,
                     row_shares=ladder.shares)


def _ladder(decisions: list[Decision], facts: RuleFacts, budget_seconds: float | None, workers: int,
            mode: str) -> LadderChoice:
    """Whether trials climb a row ladder, from the families' full-data costs (see ``choose_ladder``)."""
    included = [d for d in decisions if d.include]
    costs = sorted(d.trial_s for d in included if d.trial_s and ROWS_KEY not in d.params)
    capped = any(ROWS_KEY in d.params for d in included)
    return choose_ladder(mode, n_fit=facts.n_fit, trial_seconds=statistics.median(costs) if costs else None,
                         budget_seconds=budget_seconds, workers=max(1, workers), row_capped=capped)


def _prep_params(facts: RuleFacts) -> tuple[dict[str, ParamSpec], dict[str, Any]]:
    """Space-wide text settings (TF-IDF vocabulary, SVD components) when the data has text, with their centres."""
    params: dict[str, ParamSpec] = {}
    centre: dict[str, Any] = {}
    tokens = facts.text_tokens
    if tokens:
        words = ", ".join(f"{name} {t:.1f}" for name, t in tokens.items())
        hi = int(clamp(2 * facts.n_rows, 1000, 20000))
        params["prep.text_features"] = int_spec(300, hi, f"TF-IDF vocabulary; mean words per value: {words}", log=True)
        centre["prep.text_features"] = prior_centre(params["prep.text_features"], 5000)
        comp_hi = int(clamp(facts.n_rows / 20, 16, 256))
        params["prep.text_components"] = int_spec(8, comp_hi, "SVD components of the TF-IDF text, for tree, kNN and "
                                                           "MLP models", log=True)
        centre["prep.text_components"] = prior_centre(params["prep.text_components"], 32)
    return params, centre


__all__ = ["build_space"]
