"""Reading data files, column roles, task inference, and the meta-features that read the data alone.

Nothing here fits a model: the landmarkers and cost probes live in :mod:`tunelab.probes`.
"""

from tunelab.data._dataset import Dataset, clean_column, dataset_fingerprint, load_dataset, prepare_frame
from tunelab.data._description import DataDescription, describe_data, learning_target, sample_rows
from tunelab.data._design_matrix import design_matrix
from tunelab.data._information import InformationFeatures
from tunelab.data._read import file_sha256, read_table
from tunelab.data._roles import ROLES, ColumnRole, Role, infer_roles
from tunelab.data._shared_scale import SHARED_SCALE_MAX_RATIO, SHARED_SCALE_MIN_COLUMNS, shares_one_scale
from tunelab.data._simple import SimpleFeatures
from tunelab.data._statistical import HIGH_SKEWNESS, StatisticalFeatures, type3_moments
from tunelab.data._task import TASKS, Task, infer_task

__all__ = [
    "HIGH_SKEWNESS",
    "ROLES",
    "SHARED_SCALE_MAX_RATIO",
    "SHARED_SCALE_MIN_COLUMNS",
    "TASKS",
    "ColumnRole",
    "DataDescription",
    "Dataset",
    "InformationFeatures",
    "Role",
    "SimpleFeatures",
    "StatisticalFeatures",
    "Task",
    "clean_column",
    "dataset_fingerprint",
    "describe_data",
    "design_matrix",
    "file_sha256",
    "infer_roles",
    "infer_task",
    "learning_target",
    "load_dataset",
    "prepare_frame",
    "read_table",
    "sample_rows",
    "shares_one_scale",
    "type3_moments",
]
