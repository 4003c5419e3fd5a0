"""Statistics that discaudit's checks are built on, each usable on its own.

Every function takes array-likes (DataFrame columns keep their names) and returns a frozen
result object or a pandas object. They compute numbers only; judgements live in
:mod:`discaudit.checks`.
"""

from discaudit.stats.box_m import BoxMResult, box_m
from discaudit.stats.condition_indices import ConditionIndicesResult, condition_indices
from discaudit.stats.shrinkage import shrinkage_intensity
from discaudit.stats.vif import vif
from discaudit.stats.wilks_lambda import WilksLambdaResult, wilks_lambda

__all__ = [
    "BoxMResult",
    "ConditionIndicesResult",
    "WilksLambdaResult",
    "box_m",
    "condition_indices",
    "shrinkage_intensity",
    "vif",
    "wilks_lambda",
]
