"""Benchmark figures of the rare-outcome study: what each way of choosing alpha gives.

Reads a conducted ``studies/rare-outcomes.toml`` database and prints, per
``select_by`` level and rule (and per ``class_weight``), over every outer fold of
every data set: the share of folds whose pruned tree is the root alone, the mean
test AUC, the mean expected cost per row under the study's loss matrix and the mean
leaf count; the unpruned trees follow as the reference.

Run:
    prunebench conduct studies/rare-outcomes.toml --workers 2 --db /tmp/rare.sqlite
    python benchmarks/bench_rare.py /tmp/rare.sqlite
"""

from __future__ import annotations

import argparse

import pandas as pd

from prunebench.store import connect_readonly

_SQL = """
SELECT d.name AS dataset, t.select_by, t.rule, t.class_weight, f.arm, f."repeat", f.fold,
       f.n_leaves, f.auc, f.expected_cost
FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id)
WHERE t.status = 'done'
"""
_ORDER = ["error", "cost", "brier", "log_loss", "auc", "average_precision"]


def figures(path: str) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(pruned figures per select_by, rule, class_weight; unpruned per class_weight)."""
    conn = connect_readonly(path)
    try:
        folds = pd.read_sql_query(_SQL, conn)
    finally:
        conn.close()
    folds["root_alone"] = folds["n_leaves"] == 1

    def summary(frame: pd.DataFrame, by: list[str]) -> pd.DataFrame:
        return frame.groupby(by, sort=False).agg(
            folds=("n_leaves", "size"),
            root_alone=("root_alone", "mean"),
            auc=("auc", "mean"),
            expected_cost=("expected_cost", "mean"),
            leaves=("n_leaves", "mean"),
        )

    pruned = folds[folds["arm"] == "pruned"].copy()
    pruned["select_by"] = pd.Categorical(pruned["select_by"], _ORDER, ordered=True)
    pruned = pruned.sort_values(["select_by", "rule", "class_weight"])
    unpruned = folds[folds["arm"] == "unpruned"].drop_duplicates(
        ["dataset", "class_weight", "repeat", "fold"]
    )
    return (
        summary(pruned, ["select_by", "rule", "class_weight"]),
        summary(unpruned, ["class_weight"]),
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("db", help="results database of studies/rare-outcomes.toml")
    args = parser.parse_args()
    pruned, unpruned = figures(args.db)
    pd.set_option("display.width", 120)
    print("pruned trees, over every outer fold of every data set")
    print(pruned.to_string(float_format=lambda v: f"{v:.3f}"))
    print("\nunpruned trees (the reference)")
    print(unpruned.to_string(float_format=lambda v: f"{v:.3f}"))


if __name__ == "__main__":
    main()
