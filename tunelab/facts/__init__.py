"""What is known about a dataset before any trial: its meta-features, its facts, and how alike two datasets look.

Puts together what ``data`` reads, what ``probes`` measure and what ``evaluation`` rules (folds,
default metric), so that the space builder reads one value (:class:`DataFacts`) and
``--learn-nearest`` one vector, instead of asking the lower packages piece by piece.
"""

from tunelab.facts._data_facts import DataFacts, data_facts
from tunelab.facts._metafeatures import MetaFeatures, compute_metafeatures
from tunelab.facts._similarity import SimilarityVector, meta_distance, similarity_vector

__all__ = ["DataFacts", "MetaFeatures", "SimilarityVector", "compute_metafeatures", "data_facts", "meta_distance",
           "similarity_vector"]
