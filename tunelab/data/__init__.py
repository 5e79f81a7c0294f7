"""Reading data files, column roles, task inference and dataset meta-features."""

from tunelab.data._dataset import Dataset, clean_column, dataset_fingerprint, load_dataset, prepare_frame
from tunelab.data._read import file_sha256, read_table
from tunelab.data._roles import ROLES, ColumnRole, Role, infer_roles
from tunelab.data._task import TASKS, Task, infer_task
from tunelab.data._similarity import SimilarityVector, meta_distance, similarity_vector

__all__ = [
    "ROLES",
    "TASKS",
    "ColumnRole",
    "Dataset",
    "Role",
    "SimilarityVector",
    "Task",
    "clean_column",
    "dataset_fingerprint",
    "file_sha256",
    "infer_roles",
    "infer_task",
    "load_dataset",
    "meta_distance",
    "prepare_frame",
    "read_table",
    "similarity_vector",
]
