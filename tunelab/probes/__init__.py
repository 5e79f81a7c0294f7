"""The measurements that fit models before a search: landmarkers, cost probes and the numeric-map probe.

The one package allowed to fit models on the data before the first trial: ``data`` only reads and
describes the data, and the space builder only reads what these probes measured.
"""

from tunelab.probes._cost_probes import COST_FAMILIES, CostProbe, probe_costs
from tunelab.probes._landmarkers import LANDMARKERS, Landmarkers, measure_landmarkers
from tunelab.probes._numeric_maps import (
    PROBE_CAP_S,
    PROBE_FOLDS,
    PROBE_ROWS,
    TransformProbe,
    numeric_map_choices,
    probe_transforms,
)
from tunelab.probes._scaling import SCALING_RULES, scaled_cost
from tunelab.probes._threads import one_thread

__all__ = ["COST_FAMILIES", "CostProbe", "LANDMARKERS", "Landmarkers", "PROBE_CAP_S", "PROBE_FOLDS", "PROBE_ROWS",
           "SCALING_RULES", "TransformProbe", "measure_landmarkers", "numeric_map_choices", "one_thread", "probe_costs",
           "probe_transforms", "scaled_cost"]
