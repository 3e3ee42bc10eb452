"""prunebench: evidence for how decision trees are grown and pruned by default.

The pruning engine (:mod:`prunebench.pruning`), the one-pass scoring of every
candidate alpha (:mod:`prunebench.scoring`), the CV choice of alpha
(:mod:`prunebench.selection`) and the estimators built on them
(:mod:`prunebench.estimators`) are re-exported here; the per-fold metrics are in
:mod:`prunebench.losses`.
"""

from .estimators import PrunedTreeClassifier, PrunedTreeRegressor
from .exceptions import InvalidParameterError, PrunebenchError
from .pruning import PRUNE_RISKS, PruningPath, cart_candidates, pruning_path
from .results import Results, open_results
from .scoring import SELECT_BY, LeafCounts, candidate_losses, leaf_counts
from .selection import (
    AlphaSelection,
    FixedAlphaRule,
    MinimumRule,
    SelectionRule,
    StandardErrorRule,
    parse_rule,
    select_alpha,
    select_alphas,
    validation_weights,
)

__version__ = "0.1.0"

__all__ = [
    "PRUNE_RISKS",
    "SELECT_BY",
    "AlphaSelection",
    "FixedAlphaRule",
    "InvalidParameterError",
    "LeafCounts",
    "MinimumRule",
    "PrunebenchError",
    "PrunedTreeClassifier",
    "PrunedTreeRegressor",
    "PruningPath",
    "Results",
    "SelectionRule",
    "StandardErrorRule",
    "__version__",
    "candidate_losses",
    "cart_candidates",
    "leaf_counts",
    "open_results",
    "parse_rule",
    "pruning_path",
    "select_alpha",
    "select_alphas",
    "validation_weights",
]
