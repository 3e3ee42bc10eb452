"""The ``prunebench`` command line: thin commands over the library.

Each command parses its options, calls one library function and prints the
result; a :class:`~prunebench.exceptions.PrunebenchError` becomes a one-line
message on stderr and the error's exit code.
"""

from __future__ import annotations

import functools
import sys

import click

from . import __version__
from .exceptions import PrunebenchError

_DEMO_SETS = {
    "breast_cancer": ("load_breast_cancer", "classification"),
    "iris": ("load_iris", "classification"),
    "wine": ("load_wine", "classification"),
    "digits": ("load_digits", "classification"),
    "diabetes": ("load_diabetes", "regression"),
}


def _reports_errors(command):
    """Turn prunebench's own errors into one line on stderr and an exit code."""

    @functools.wraps(command)
    def run(*args, **kwargs):
        try:
            return command(*args, **kwargs)
        except PrunebenchError as err:
            click.echo(f"error: {err}", err=True)
            sys.exit(err.exit_code)

    return run


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, prog_name="prunebench")
def main() -> None:
    """prunebench: evidence for how decision trees are grown and pruned by default.

    Grow a tree, prune it by weakest link at an alpha chosen by K-fold
    cross-validation (minimum-error or k-standard-error rule), and compare the
    choices.
    """


@main.command()
@click.option(
    "--dataset",
    type=click.Choice(sorted(_DEMO_SETS)),
    default="breast_cancer",
    show_default=True,
    help="A data set bundled with scikit-learn.",
)
@click.option(
    "--criterion", default=None, help="Growing criterion (default: gini / squared_error)."
)
@click.option(
    "--prune-risk",
    default=None,
    help="Pruning risk: error or impurity (classification), squared_error or impurity "
    "(regression). Default: error / squared_error.",
)
@click.option("--cv", default=10, show_default=True, help="Folds for choosing alpha.")
@click.option(
    "--rule", default="1se", show_default=True, help='Alpha rule: "min", "1se", "0.5se", ...'
)
@click.option("--random-state", default=0, show_default=True, help="Seed of the trees.")
@_reports_errors
def demo(dataset, criterion, prune_risk, cv, rule, random_state) -> None:
    """Fit a pruned tree on a bundled data set and print its CV curve and chosen alpha."""
    import sklearn.datasets

    from .estimators import PrunedTreeClassifier, PrunedTreeRegressor

    loader, task = _DEMO_SETS[dataset]
    X, y = getattr(sklearn.datasets, loader)(return_X_y=True)
    model_class = PrunedTreeClassifier if task == "classification" else PrunedTreeRegressor
    params = {"cv": cv, "rule": rule, "random_state": random_state}
    if criterion:
        params["criterion"] = criterion
    if prune_risk:
        params["prune_risk"] = prune_risk
    model = model_class(**params).fit(X, y)
    loss = "error rate" if task == "classification" else "MSE"
    curve = model.cv_curve_
    click.echo(
        f"{dataset}: {len(y)} rows, {X.shape[1]} features; grown with "
        f"criterion={model.criterion}, pruned by {model.prune_risk}, {cv}-fold CV"
    )
    click.echo(f"{'alpha':>12} {'leaves':>7} {'CV ' + loss:>14} {'SE':>10}")
    for row in curve.itertuples():
        mark = "  <- chosen" if row.alpha == model.ccp_alpha_ else ""
        click.echo(f"{row.alpha:12.6g} {row.n_leaves:7d} {row.mean:14.5g} {row.se:10.3g}{mark}")
    click.echo(
        f"rule {model.rule}: alpha = {model.ccp_alpha_:.6g}, "
        f"{model.get_n_leaves()} leaves (full tree {model.full_tree_.get_n_leaves()}), "
        f"depth {model.get_depth()}"
    )


if __name__ == "__main__":  # pragma: no cover
    main()
