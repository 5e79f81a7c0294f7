"""What is known about a dataset before any trial: its meta-features, and how alike two datasets look.

Puts together what ``data`` reads and what ``probes`` measure, so that the space builder and
``--learn-nearest`` read one value each instead of asking the lower packages piece by piece.
"""

from tunelab.facts._metafeatures import MetaFeatures, compute_metafeatures
from tunelab.facts._similarity import SimilarityVector, meta_distance, similarity_vector

__all__ = ["MetaFeatures", "SimilarityVector", "compute_metafeatures", "meta_distance", "similarity_vector"]
