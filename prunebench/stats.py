"""Statistics over stored results.

For now: per data set, rule and arm, the mean test metric and tree size over
every finished trial and outer fold, the short table ``conduct`` ends with.
"""

from __future__ import annotations

import pandas as pd

from .store import ResultStore

__all__ = ["arm_means"]


def arm_means(store: ResultStore, study_id: str) -> pd.DataFrame:
    """Mean test metric and leaves per data set, rule and arm.

    Parameters
    ----------
    store : ResultStore
    study_id : str

    Returns
    -------
    DataFrame
        Columns ``dataset``, ``task``, ``rule``, ``arm``, ``metric`` (``error`` for
        classification, ``mse`` for regression), ``value`` (its mean over trials and
        outer folds), ``n_leaves`` (mean leaves) and ``n_trials``.
    """
    rows = store.query(
        """
        SELECT d.name AS dataset, d.task, t.rule, f.arm,
               AVG(CASE WHEN d.task = 'regression' THEN f.mse ELSE f.error END) AS value,
               AVG(f.n_leaves) AS n_leaves, COUNT(DISTINCT t.trial_id) AS n_trials
        FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id)
        WHERE t.study_id = ? AND t.status = 'done'
        GROUP BY d.name, d.task, t.rule, f.arm
        ORDER BY d.name, t.rule, f.arm DESC
        """,
        [study_id],
    )
    frame = pd.DataFrame(
        rows, columns=["dataset", "task", "rule", "arm", "value", "n_leaves", "n_trials"]
    )
    frame.insert(4, "metric", frame["task"].map(lambda t: "mse" if t == "regression" else "error"))
    return frame
