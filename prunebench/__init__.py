"""prunebench: evidence for how decision trees are grown and pruned by default.

The pruning engine (:mod:`prunebench.pruning`), the CV choice of alpha
(:mod:`prunebench.selection`) and the estimators built on them
(:mod:`prunebench.estimators`) are re-exported here.
"""

from .estimators import PrunedTreeClassifier, PrunedTreeRegressor
from .exceptions import (
    ConductError,
    DatasetError,
    InvalidParameterError,
    PrunebenchError,
    QueryError,
    StatsError,
    StoreError,
    StudyError,
    TrialTimeout,
)
from .pruning import PRUNE_RISKS, PruningPath, cart_candidates, pruning_path
from .results import Results, open_results
from .selection import (
    AlphaSelection,
    MinimumRule,
    SelectionRule,
    StandardErrorRule,
    parse_rule,
    select_alpha,
)
from .vocabulary import Configuration

__version__ = "0.1.0"

__all__ = [
    "PRUNE_RISKS",
    "AlphaSelection",
    "ConductError",
    "Configuration",
    "DatasetError",
    "InvalidParameterError",
    "MinimumRule",
    "PrunebenchError",
    "PrunedTreeClassifier",
    "PrunedTreeRegressor",
    "PruningPath",
    "QueryError",
    "Results",
    "SelectionRule",
    "StandardErrorRule",
    "StatsError",
    "StoreError",
    "StudyError",
    "TrialTimeout",
    "__version__",
    "cart_candidates",
    "open_results",
    "parse_rule",
    "pruning_path",
    "select_alpha",
]
