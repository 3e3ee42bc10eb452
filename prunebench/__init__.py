"""prunebench: evidence for how decision trees are grown and pruned by default.

The pruning engine (:mod:`prunebench.pruning`), the one-pass scoring of every
candidate alpha (:mod:`prunebench.scoring`), the CV choice of alpha
(:mod:`prunebench.selection`) and the estimators built on them
(:mod:`prunebench.estimators`) are re-exported here; the per-fold metrics are in
:mod:`prunebench.losses`.  They are imported on first
use (a module-level ``__getattr__``), so ``import prunebench`` and the command
line start without scikit-learn, pandas, matplotlib or Optuna.
"""

from __future__ import annotations

import importlib

from ._version import __version__
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

# public name -> the module that defines it, imported when the name is first asked for
_LAZY = {
    "PRUNE_RISKS": "pruning",
    "PruningPath": "pruning",
    "cart_candidates": "pruning",
    "pruning_path": "pruning",
    "PrunedTreeClassifier": "estimators",
    "PrunedTreeRegressor": "estimators",
    "Results": "tables",
    "open_results": "tables",
    "AlphaSelection": "selection",
    "MinimumRule": "selection",
    "SelectionRule": "selection",
    "StandardErrorRule": "selection",
    "parse_rule": "selection",
    "select_alpha": "selection",
    "select_alphas": "selection",
    "validation_weights": "selection",
    "FixedAlphaRule": "selection",
    "SELECT_BY": "scoring",
    "LeafCounts": "scoring",
    "candidate_losses": "scoring",
    "leaf_counts": "scoring",
    "Configuration": "vocabulary",
    "factor_effects": "effects",
    "interaction_effects": "effects",
}

__all__ = [
    "PRUNE_RISKS",
    "SELECT_BY",
    "AlphaSelection",
    "ConductError",
    "Configuration",
    "DatasetError",
    "FixedAlphaRule",
    "InvalidParameterError",
    "LeafCounts",
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
    "candidate_losses",
    "cart_candidates",
    "factor_effects",
    "interaction_effects",
    "leaf_counts",
    "open_results",
    "parse_rule",
    "pruning_path",
    "select_alpha",
    "select_alphas",
    "validation_weights",
]


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'prunebench' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value  # later lookups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
