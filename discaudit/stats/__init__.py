"""Statistics that discaudit's checks are built on, each usable on its own.

Every function takes array-likes (DataFrame columns keep their names) and returns a frozen
result object or a pandas object. They compute numbers only; judgements live in
:mod:`discaudit.checks`.
"""

from discaudit.stats.box_m import BoxMResult, box_m
from discaudit.stats.condition_indices import ConditionIndicesResult, condition_indices
from discaudit.stats.henze_zirkler import HenzeZirklerResult, henze_zirkler
from discaudit.stats.leave_one_out import LeaveOneOutResult, LeaveOneOutScorer, leave_one_out
from discaudit.stats.logistic import LogisticEstimate, LogisticFit, cross_validated_logistic, fit_logistic
from discaudit.stats.mardia import MardiaResult, mardia
from discaudit.stats.mcd import MCDResult, mcd
from discaudit.stats.separation import SeparationResult, detect_separation
from discaudit.stats.shrinkage import shrinkage_intensity
from discaudit.stats.vif import vif
from discaudit.stats.wilks_lambda import WilksLambdaResult, wilks_lambda

__all__ = [
    "BoxMResult",
    "ConditionIndicesResult",
    "HenzeZirklerResult",
    "LeaveOneOutResult",
    "LeaveOneOutScorer",
    "LogisticEstimate",
    "LogisticFit",
    "MCDResult",
    "MardiaResult",
    "SeparationResult",
    "WilksLambdaResult",
    "box_m",
    "condition_indices",
    "cross_validated_logistic",
    "detect_separation",
    "fit_logistic",
    "henze_zirkler",
    "leave_one_out",
    "mardia",
    "mcd",
    "shrinkage_intensity",
    "vif",
    "wilks_lambda",
]
