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
    default="breast_cancer",
    show_default=True,
    help="Any data set of 'prunebench datasets'.",
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
    """Fit a pruned tree on one data set and print its CV curve and chosen alpha."""
    from .datasets import is_classification, load_dataset
    from .estimators import PrunedTreeClassifier, PrunedTreeRegressor

    data = load_dataset(dataset)
    X, y = data.X, data.y
    task = "classification" if is_classification(data.task) else "regression"
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


@main.command()
@click.option("--json", "as_json", is_flag=True, help="Print a JSON list instead of a table.")
@click.option(
    "--manifest",
    "manifests",
    multiple=True,
    type=click.Path(dir_okay=False),
    help="Also list the data sets of this manifest (repeatable).",
)
@_reports_errors
def datasets(as_json, manifests) -> None:
    """List every data set a study can name, with task, rows, features, classes and source.

    Simulated sets are shown at their default size (a study can set n_samples and seed).
    """
    import json

    from .datasets import list_datasets, load_dataset, register_manifest

    for manifest in manifests:
        register_manifest(manifest)
    rows = []
    for info in list_datasets():
        data = load_dataset(info.name)
        rows.append(
            {
                "name": info.name,
                "kind": info.kind,
                "task": info.task,
                "rows": int(data.X.shape[0]),
                "features": int(data.X.shape[1]),
                "classes": data.n_classes,
                "source": info.source,
                "licence": info.licence,
                "citation": info.citation,
                "params": data.params,
            }
        )
    if as_json:
        click.echo(json.dumps(rows, indent=2))
        return
    click.echo(f"{'name':<14} {'kind':<9} {'task':<10} {'rows':>6} {'feat.':>5} {'cls':>3}  source")
    for r in rows:
        source = r["source"] if len(r["source"]) <= 46 else r["source"][:45] + "…"
        classes = "" if r["classes"] is None else r["classes"]
        click.echo(
            f"{r['name']:<14} {r['kind']:<9} {r['task']:<10} {r['rows']:>6} {r['features']:>5} "
            f"{classes:>3}  {source}"
        )


def _calibrate(study) -> dict[str, float]:
    """Seconds for one unlimited-depth tree fit on each data set's outer-training size."""
    import time

    import numpy as np
    from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

    out = {}
    for key, data in study.datasets.items():
        task = study.task_of(key)
        model = DecisionTreeClassifier if task == "classification" else DecisionTreeRegressor
        criterion = study.factors[task]["criterion"][0]
        n = int(len(data.y) * (study.folds - 1) / study.folds)
        rows = np.random.default_rng(0).permutation(len(data.y))[:n]
        best = float("inf")
        for _ in range(3):
            t0 = time.perf_counter()
            model(criterion=criterion, random_state=0).fit(data.X[rows], data.y[rows])
            best = min(best, time.perf_counter() - t0)
        out[key] = best
    return out


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--workers", default=1, show_default=True, help="Workers to estimate the time for.")
@_reports_errors
def check(study_file, workers) -> None:
    """Validate a study file and print its plan: trials, tree fits and a time estimate.

    Nothing is written. The estimate times one tree fit per data set and scales it
    by the number of fits; trees with a depth limit or larger leaves fit faster.
    """
    from .execute import default_database
    from .study import load_study

    study = load_study(study_file)
    groups = study.groups()
    per_fit = _calibrate(study)
    click.echo(f"study {study.name!r}: {study.description}".rstrip(": "))
    click.echo(
        f"seed {study.seed}, outer CV {study.repeats} repeats x {study.folds} folds, "
        f"database {default_database(study)}"
    )
    click.echo(
        f"{'dataset':<28} {'task':<11} {'rows':>7} {'features':>8} {'trials':>6} "
        f"{'tree fits':>9} {'est. s':>8}"
    )
    total_fits, total_seconds = 0, 0.0
    for key, data in study.datasets.items():
        mine = [g for g in groups if g.dataset == key]
        fits = sum(study.repeats * study.folds * (1 + g.inner_folds) for g in mine)
        seconds = fits * per_fit[key]
        total_fits += fits
        total_seconds += seconds
        click.echo(
            f"{key:<28} {data.task:<11} {len(data.y):>7} {data.X.shape[1]:>8} "
            f"{sum(len(g.trials) for g in mine):>6} {fits:>9} {seconds:>8.1f}"
        )
    for task, levels in study.factors.items():
        click.echo(f"factors ({task}): " + "; ".join(f"{k} {v}" for k, v in levels.items()))
    click.echo(
        f"{len(study.trials())} trials in {len(groups)} groups (trials that differ only in the "
        f"rule share their fits); {total_fits} tree fits"
    )
    click.echo(
        f"rough time: {total_seconds / 60:.1f} min with 1 worker, "
        f"{total_seconds / 60 / max(workers, 1):.1f} min with {workers}"
    )


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option(
    "--db",
    "database",
    type=click.Path(dir_okay=False),
    default=None,
    help="Results database (default: the study's 'database', or STUDY.sqlite).",
)
@click.option(
    "--workers",
    default=1,
    show_default=True,
    type=int,
    help="Worker processes; the sweep process is the only writer.",
)
@click.option("--retry-failed", is_flag=True, help="Run failed trials again.")
@_reports_errors
def conduct(study_file, database, workers, retry_failed) -> None:
    """Run or resume a study and store every trial in the results database.

    Finished trials are skipped, so running the same command again after a crash or
    a kill resumes the sweep. Adding levels or datasets to the study file adds trials;
    changing its seed or outer scheme is refused.
    """
    from .execute import conduct as run_study
    from .stats import arm_means
    from .store import ResultStore
    from .study import load_study

    study = load_study(study_file)
    summary = run_study(study, database, workers=workers, retry_failed=retry_failed)
    click.echo(
        f"{summary.done} trials done, {summary.failed} failed, {summary.skipped} already "
        f"finished, of {summary.total}; {summary.seconds:.1f} s; results in {summary.database}"
    )
    for error in summary.errors[:5]:
        click.echo(f"  failed: {error}")
    with ResultStore(summary.database, readonly=True) as store:
        table = arm_means(store, study.study_id)
    if table.empty:
        return
    click.echo(
        f"\n{'dataset':<24} {'rule':<6} {'metric':<6} {'unpruned':>9} {'pruned':>9} "
        f"{'leaves unpruned':>15} {'leaves pruned':>13}"
    )
    wide = table.pivot_table(
        index=["dataset", "rule", "metric"], columns="arm", values=["value", "n_leaves"]
    )
    for (dataset, rule, metric), row in wide.iterrows():
        click.echo(
            f"{dataset:<24} {rule:<6} {metric:<6} {row[('value', 'unpruned')]:>9.4f} "
            f"{row[('value', 'pruned')]:>9.4f} {row[('n_leaves', 'unpruned')]:>15.1f} "
            f"{row[('n_leaves', 'pruned')]:>13.1f}"
        )
    click.echo("(test metric and leaves: means over every configuration and outer fold)")


if __name__ == "__main__":  # pragma: no cover
    main()
