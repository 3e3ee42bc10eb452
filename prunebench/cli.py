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

    Write a study file that sweeps the criterion, depth limit, leaf size, inner folds,
    alpha rule and pruning risk over datasets; 'check' it, 'conduct' it (nested,
    repeated CV; every trial kept in SQLite; resumable), then read the evidence with
    'compare', 'rank', 'recommend', 'figures' and 'report', or query it with 'sql',
    'export' and 'progress'. 'datasets' lists the data; 'demo' fits one pruned tree.
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
    """List every data set a study can name: task, rows, features, classes, minority share, source.

    The minority share is the smallest class's share of the rows (blank for regression).

    Simulated sets are shown at their default size (a study can set n_samples and seed).
    """
    import json

    from .datasets import describe_datasets

    rows = describe_datasets(manifests)
    if as_json:
        click.echo(json.dumps(rows, indent=2))
        return
    click.echo(
        f"{'name':<19} {'kind':<9} {'task':<10} {'rows':>6} {'feat.':>5} {'cls':>3} "
        f"{'minor.':>6}  source"
    )
    for r in rows:
        source = r["source"] if len(r["source"]) <= 46 else r["source"][:45] + "…"
        classes = "" if r["classes"] is None else r["classes"]
        share = "" if r["minority_share"] is None else f"{r['minority_share']:.3f}"
        click.echo(
            f"{r['name']:<19} {r['kind']:<9} {r['task']:<10} {r['rows']:>6} {r['features']:>5} "
            f"{classes:>3} {share:>6}  {source}"
        )


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--workers", default=1, show_default=True, help="Workers to estimate the time for.")
@_reports_errors
def check(study_file, workers) -> None:
    """Validate a study file and print its plan: trials, tree fits and a time estimate.

    Nothing is written. The estimate times one tree fit per data set and scales it
    by the number of fits; trees with a depth limit or larger leaves fit faster.
    """
    from .execute import default_database, plan, usable_workers
    from .study import load_study

    workers, note = usable_workers(workers)
    if note:
        click.echo(f"note: {note}")
    study = load_study(study_file)
    if study.search is not None:
        spec = study.search
        click.echo(
            f"study {study.name!r}: a search ({spec.sampler} sampler, "
            f"{spec.configurations} configurations, early stopping "
            f"{'on' if spec.early_stopping else 'off'}, seed {spec.seed})"
        )
        for name, value in spec.space.items():
            click.echo(
                f"  {name}: {value[0]} {list(value[1:]) if value[0] != 'choices' else value[1]}"
            )
        click.echo(
            f"each configuration runs on {len(study.datasets)} datasets: "
            f"{', '.join(study.datasets)}; outer CV {study.repeats} x {study.folds}"
        )
        return
    groups = study.groups()
    rows = plan(study)
    click.echo(f"study {study.name!r}: {study.description}".rstrip(": "))
    click.echo(
        f"seed {study.seed}, outer CV {study.repeats} repeats x {study.folds} folds, "
        f"database {default_database(study)}"
    )
    click.echo(
        f"{'dataset':<28} {'task':<11} {'rows':>7} {'features':>8} {'trials':>6} "
        f"{'tree fits':>9} {'est. s':>8}"
    )
    for r in rows:
        click.echo(
            f"{r['dataset']:<28} {r['task']:<11} {r['rows']:>7} {r['features']:>8} "
            f"{r['trials']:>6} {r['fits']:>9} {r['seconds']:>8.1f}"
        )
    total_fits = sum(r["fits"] for r in rows)
    total_seconds = sum(r["seconds"] for r in rows)
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
@click.option(
    "--cluster",
    default=None,
    metavar="ADDRESS",
    help="Run the trial groups on a Dask cluster (scheduler address, e.g. "
    "tcp://scheduler-host:8786); needs prunebench[dask].",
)
@_reports_errors
def conduct(study_file, database, workers, retry_failed, cluster) -> None:
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
    summary = run_study(
        study, database, workers=workers, retry_failed=retry_failed, cluster=cluster
    )
    click.echo(
        f"{summary.done} trials done, {summary.failed} failed, {summary.skipped} already "
        f"finished, of {summary.total}; {summary.seconds:.1f} s; results in {summary.database}"
    )
    for error in summary.errors[:5]:
        click.echo(f"  failed: {error}")
    if summary.search is not None:
        found = summary.search
        click.echo(
            f"search: {found['configurations']} configurations finished, "
            f"{found['stopped_early']} of them stopped early, {found['failed']} failed; "
            f"Optuna's storage in {found['storage']}"
        )
        if "best" in found:
            best = found["best"]
            depth = "none" if best["max_depth"] is None else best["max_depth"]
            click.echo(
                f"best: criterion {best['criterion']}, max_depth {depth}, min_samples_leaf "
                f"{best['min_samples_leaf']}, inner_folds {best['inner_folds']}, rule "
                f"{best['rule']}, prune_risk {best['prune_risk']}; mean relative loss "
                f"{found['best_value']:.4f} (95% CI {found['ci_low']:.4f} to "
                f"{found['ci_high']:.4f}; 1 = no better than ignoring the features)"
            )
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
    db = summary.database
    click.echo(
        f"next: prunebench compare --db {db}   |   prunebench recommend --db {db}   |   "
        f"prunebench report --db {db} --out report.html"
    )


def _caution() -> str:
    from .report import CAUTION

    return "Caution: " + CAUTION


def _results_options(command):
    """The options every command over a results database shares."""
    command = click.option(
        "--study", default=None, help="Study name, when the database holds several."
    )(command)
    command = click.option(
        "--db",
        "database",
        required=True,
        type=click.Path(dir_okay=False, exists=False),
        help="The results database.",
    )(command)
    return command


def _output_options(command):
    command = click.option("--csv", "as_csv", is_flag=True, help="Print CSV.")(command)
    command = click.option("--json", "as_json", is_flag=True, help="Print JSON.")(command)
    return command


def _load_folds(database, study):
    from .stats import load_folds
    from .store import ResultStore

    with ResultStore(database, readonly=True) as store:
        return load_folds(store, study)


def _records(frame) -> list[dict]:
    import json

    return json.loads(frame.to_json(orient="records"))


def _emit(frame, as_json: bool, as_csv: bool) -> bool:
    """Print a frame as JSON or CSV if asked; True if printed."""
    import json

    if as_json and as_csv:
        raise click.UsageError("give --json or --csv, not both")
    if as_json:
        click.echo(json.dumps(_records(frame), indent=2))
        return True
    if as_csv:
        click.echo(frame.to_csv(index=False), nl=False)
        return True
    return False


def _fmt(value, spec: str) -> str:
    import pandas as pd

    if value is None or pd.isna(value):
        return "-"
    return format(value, spec)


def _number_spec(scale: float) -> str:
    """Fixed decimals for rates and small losses, significant digits for large ones."""
    return ".3f" if abs(scale) < 10 else ".4g"


def _say(text: str, indent: str = "") -> None:
    """Print a note wrapped to the 100 columns the tables fit in."""
    import textwrap

    click.echo(textwrap.fill(text, width=100, initial_indent=indent, subsequent_indent=indent))


@main.command()
@_results_options
@click.option(
    "--metric",
    default=None,
    help="error, accuracy, balanced_accuracy, log_loss, brier (classification) or "
    "mse, mae, r2 (regression). Default: error / mse.",
)
@_output_options
@_reports_errors
def compare(database, study, metric, as_json, as_csv) -> None:
    """Pruned against unpruned per dataset and configuration, with corrected 95% CIs.

    The difference is pruned - unpruned on each outer fold; its interval and p-value come
    from the corrected resampled t (Nadeau & Bengio 2003), which allows for the overlap of
    training sets in repeated CV. The naive interval and Holm-adjusted p-values are in the
    JSON and CSV output.
    """
    from .stats import HIGHER_IS_BETTER, comparison, config_label

    table = comparison(_load_folds(database, study), metric)
    if _emit(table, as_json, as_csv):
        return
    for m, rows in table.groupby("metric", sort=False):
        better = "higher" if m in HIGHER_IS_BETTER else "lower"
        spec = _number_spec(rows["mean_unpruned"].abs().median())
        _say(
            f"metric: {m} ({better} is better); diff = pruned - unpruned, mean over "
            f"{int(rows['n_folds'].iloc[0])} outer folds; 95% CI of diff by corrected "
            "resampled t; saved = leaves saved by pruning (mean per fold)"
        )
        click.echo(
            f"{'dataset':<13} {'configuration':<27} {'pruned':>7} {'unprun.':>7} "
            f"{'diff':>7} {'95% CI of diff':>15} {'p':>4} {'better':<6} {'saved':>5}"
        )
        for _, r in rows.iterrows():
            verdict = {"pruned better": "pruned", "unpruned better": "unpr."}.get(r["verdict"], "-")
            ci = f"[{_fmt(r['ci_low'], '+' + spec)},{_fmt(r['ci_high'], '+' + spec)}]"
            click.echo(
                f"{r['dataset'][:13]:<13} {config_label(r)[:27]:<27} "
                f"{_fmt(r['mean_pruned'], spec):>7} {_fmt(r['mean_unpruned'], spec):>7} "
                f"{_fmt(r['diff'], '+' + spec):>7} {ci:>15} {_fmt(r['p_value'], '4.2f'):>4} "
                f"{verdict:<6} {_fmt(r['leaves_saved'], '5.1f'):>5}"
            )
        naive = ((rows["naive_ci_high"] < 0) | (rows["naive_ci_low"] > 0)).sum()
        corrected = ((rows["ci_high"] < 0) | (rows["ci_low"] > 0)).sum()
        width = (rows["ci_high"] - rows["ci_low"]) / (rows["naive_ci_high"] - rows["naive_ci_low"])
        _say(
            f"{len(rows)} rows: {corrected} differences significant at 5% with the corrected t, "
            f"{naive} with the naive t (folds treated as independent), whose intervals are "
            f"{width.median():.1f}x narrower (median)."
        )
        click.echo("")


@main.command()
@_results_options
@click.option("--metric", default=None, help="As for compare. Default: error / mse.")
@click.option("--alpha", default=0.05, show_default=True, help="Significance level.")
@_output_options
@_reports_errors
def rank(database, study, metric, alpha, as_json, as_csv) -> None:
    """Rank configurations across datasets: mean ranks, Friedman test, critical difference.

    Each configuration's pruned tree is ranked on every dataset (1 = best); each distinct
    unpruned tree takes part as a configuration of its own. Configurations whose mean rank
    is within Nemenyi's critical difference of the best are not significantly worse.
    """
    import pandas as pd

    from .stats import ROPE, config_label, ranking

    results = ranking(_load_folds(database, study), metric, alpha)
    if as_json or as_csv:
        frames = []
        for res in results:
            t = (
                res["table"]
                .drop(columns=["config"])
                .assign(
                    family=res["family"],
                    metric=res["metric"],
                    n_datasets=len(res["datasets"]),
                    friedman_chi2=res["friedman"]["chi2"] if res["friedman"] else None,
                    friedman_p=res["friedman"]["p_chi2"] if res["friedman"] else None,
                    iman_davenport_f=res["friedman"]["ff"] if res["friedman"] else None,
                    iman_davenport_p=res["friedman"]["p_ff"] if res["friedman"] else None,
                    critical_difference=res["cd"],
                )
            )
            frames.append(t)
        _emit(pd.concat(frames, ignore_index=True), as_json, as_csv)
        return
    for res in results:
        f, n = res["friedman"], len(res["datasets"])
        _say(
            f"{res['family']}: {len(res['table'])} configurations on {n} datasets, "
            f"metric {res['metric']} (rank 1 = best)"
        )
        if f:
            _say(
                f"Friedman chi2 = {f['chi2']:.2f} (p = {f['p_chi2']:.3g}); Iman-Davenport F = "
                f"{f['ff']:.2f} with ({f['df1']}, {f['df2']}) df (p = {f['p_ff']:.3g}); "
                f"Nemenyi critical difference at {alpha:g} = {res['cd']:.2f} ranks"
            )
        else:
            _say("tests across datasets need two or more datasets of the task")
        click.echo(
            f"{'configuration':<29} {'mean rank':>9} {'W/T/L':>8} "
            f"{'mean ' + res['metric']:>10} {'leaves':>7} {'ok':>3} {'Wilcoxon':>8} "
            f"{'P(pr+)':>6} {'P(=)':>5} {'P(un+)':>6}"
        )
        for _, r in res["table"].iterrows():
            wtl = f"{r['wins']}/{r['ties']}/{r['losses']}"
            click.echo(
                f"{config_label(r)[:29]:<29} {r['mean_rank']:>9.2f} {wtl:>8} "
                f"{_fmt(r['mean_metric'], '10.4g'):>10} {r['mean_leaves']:>7.1f} "
                f"{'yes' if r['not_worse'] else 'no':>3} {_fmt(r.get('wilcoxon_p'), '8.3f'):>8} "
                f"{_fmt(r.get('p_pruned_better'), '6.2f'):>6} "
                f"{_fmt(r.get('p_equivalent'), '5.2f'):>5} "
                f"{_fmt(r.get('p_unpruned_better'), '6.2f'):>6}"
            )
        _say(
            "ok = not significantly worse than the best (Nemenyi). W/T/L: datasets where the "
            "configuration's mean beats, equals, trails the best configuration's. Wilcoxon: "
            "signed-rank p of pruned vs its unpruned tree across datasets; P(pr+), P(=), "
            "P(un+): Bayesian signed-rank probabilities that pruning is better, practically "
            "equal (within "
            f"{ROPE:g}{' relative' if res['family'] == 'regression' else ''}), or worse."
        )
        click.echo("")


@main.command()
@_results_options
@click.option("--alpha", default=0.05, show_default=True, help="Significance level.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@_reports_errors
def recommend(database, study, alpha, as_json) -> None:
    """Propose a default configuration for a team standard, with its evidence.

    Among the configurations not significantly worse than the best (Nemenyi), the best
    mean rank wins and ties go to smaller trees. Shows its regret on each dataset (its
    loss minus the best configuration's, with a corrected CI) and prints the choice as an
    estimator and a study-file fragment.
    """
    import json

    from .stats import config_label, recommendation

    recs = recommendation(_load_folds(database, study), alpha)
    if as_json:
        out = []
        for r in recs:
            out.append(
                {
                    "family": r["family"],
                    "metric": r["metric"],
                    "config": r["config"],
                    "mean_rank": r["mean_rank"],
                    "mean_leaves": r["mean_leaves"],
                    "mean_regret": r["mean_regret"],
                    "worst_regret": r["worst_regret"],
                    "regret": _records(r["regret"]),
                    "estimator": _estimator_block(r),
                    "study_fragment": _study_fragment(r),
                    "caution": _caution(),
                }
            )
        click.echo(json.dumps(out, indent=2, default=str))
        return
    for r in recs:
        ranked = r["ranking"]
        click.echo(f"== {r['family']}: recommended default (metric {r['metric']})")
        _say(
            f"{config_label(r['config'])}: mean rank {r['mean_rank']:.2f} of "
            f"{len(ranked['table'])} configurations on {len(ranked['datasets'])} datasets, "
            f"{r['mean_leaves']:.1f} leaves on average",
            "   ",
        )
        _say(
            f"regret ({r['metric']} above the best configuration on each dataset): "
            f"mean {r['mean_regret']:.4g}, worst {r['worst_regret']:.4g}",
            "   ",
        )
        spec = _number_spec(ranked["means"].abs().median().median())
        click.echo(f"   {'dataset':<22} {'regret':>8} {'95% CI':>17}  best configuration there")
        for _, g in r["regret"].iterrows():
            ci = f"[{_fmt(g['ci_low'], '+' + spec)},{_fmt(g['ci_high'], '+' + spec)}]"
            mark = " (loses)" if g["loses"] else ""
            click.echo(
                f"   {g['dataset'][:22]:<22} {_fmt(g['regret'], spec):>8} {ci:>17}  "
                f"{g['best'][:34]}{mark}"
            )
        losing = r["regret"][r["regret"]["loses"]]
        if len(losing):
            click.echo(f"   loses significantly on: {', '.join(losing['dataset'])}")
        click.echo("\n   as an estimator:\n")
        click.echo("\n".join("     " + line for line in _estimator_block(r).splitlines()))
        click.echo("\n   as a study-file fragment:\n")
        click.echo("\n".join("     " + line for line in _study_fragment(r).splitlines()))
        click.echo("")
    _say(_caution())


@main.command()
@_results_options
@click.option(
    "--out",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for the figures (created if missing).",
)
@_reports_errors
def figures(database, study, out) -> None:
    """Draw the summary figures of a study as PNG and SVG files."""
    from .plots import write_figures
    from .stats import load_folds
    from .store import ResultStore

    with ResultStore(database, readonly=True) as store:
        written = write_figures(store, load_folds(store, study), out)
    click.echo(f"{len(written)} files written to {out}")


@main.command()
@_results_options
@click.option(
    "--out", required=True, type=click.Path(dir_okay=False), help="The HTML file to write."
)
@_reports_errors
def report(database, study, out) -> None:
    """Write one self-contained HTML report: figures, tables, study file, caution.

    The file embeds everything it shows, opens offline, and is written whole or not at all.
    """
    from .report import write_report

    path = write_report(database, out, study)
    click.echo(f"report written to {path} ({path.stat().st_size // 1024} KiB)")


@main.command()
@click.option(
    "--db", "database", required=True, type=click.Path(dir_okay=False), help="The results database."
)
@click.argument("query")
@_output_options
@_reports_errors
def sql(database, query, as_json, as_csv) -> None:
    """Run one read-only SQL query against a results database.

    The file is opened read-only; statements that would write (INSERT, UPDATE, DELETE,
    DROP, CREATE, ALTER, ATTACH, a PRAGMA that sets a value, ...) are refused.
    """
    from .results import run_query

    frame = run_query(database, query)
    if not _emit(frame, as_json, as_csv):
        click.echo(frame.to_string(index=False, max_colwidth=40) if len(frame) else "(no rows)")


@main.command()
@click.option(
    "--db", "database", required=True, type=click.Path(dir_okay=False), help="The results database."
)
@click.option(
    "--out",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for the files (created if missing).",
)
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["csv", "parquet"]),
    default="csv",
    show_default=True,
    help="File format.",
)
@_reports_errors
def export(database, out, fmt) -> None:
    """Write every table and view of a results database as CSV or Parquet files."""
    from .results import export_tables

    written = export_tables(database, out, fmt)
    click.echo(f"{len(written)} files written to {out}: " + ", ".join(p.name for p in written))


@main.command()
@click.option(
    "--db", "database", required=True, type=click.Path(dir_okay=False), help="The results database."
)
@click.option("--study", default=None, help="Study name (default: the latest).")
@click.option(
    "--watch",
    default=0.0,
    show_default=True,
    help="Refresh every this many seconds until no trial is pending (0: once).",
)
@_reports_errors
def progress(database, study, watch) -> None:
    """Show a study's progress: done / failed / pending, rate, ETA and the last errors.

    Works while a conduct writes to the database in another terminal, and after it ends.
    """
    import time

    from .execute import _duration
    from .results import progress_report

    while True:
        r = progress_report(database, study)
        rate = "-" if r["rate_per_minute"] is None else f"{r['rate_per_minute']:.1f}"
        eta = "-" if r["eta_seconds"] is None else _duration(r["eta_seconds"])
        click.echo(
            f"study {r['study']!r}: {r['done']} done, {r['failed']} failed, "
            f"{r['pending']} pending of {r['total']} trials; {rate} trials/min; "
            f"ETA {eta}; last finished {r['last_finished'] or '-'}"
        )
        for error in r["errors"]:
            click.echo(f"  recent failure: {error}")
        if watch <= 0 or r["pending"] == 0:
            return
        time.sleep(watch)


def _estimator_block(rec: dict) -> str:
    c = rec["config"]
    regression = rec["family"] == "regression"
    name = "PrunedTreeRegressor" if regression else "PrunedTreeClassifier"
    depth = "None" if c["max_depth"] is None else int(c["max_depth"])
    if c["rule"] == "unpruned":
        tree = "DecisionTreeRegressor" if regression else "DecisionTreeClassifier"
        return (
            f"from sklearn.tree import {tree}\n\nmodel = {tree}(\n"
            f"    criterion={c['criterion']!r},\n    max_depth={depth},\n"
            f"    min_samples_leaf={int(c['min_samples_leaf'])},\n)  # no pruning won"
        )
    return (
        f"from prunebench import {name}\n\nmodel = {name}(\n"
        f"    criterion={c['criterion']!r},\n    max_depth={depth},\n"
        f"    min_samples_leaf={int(c['min_samples_leaf'])},\n"
        f"    prune_risk={c['prune_risk']!r},\n    cv={int(c['inner_folds'])},\n"
        f"    rule={c['rule']!r},\n)"
    )


def _study_fragment(rec: dict) -> str:
    c = rec["config"]
    depth = '"none"' if c["max_depth"] is None else int(c["max_depth"])
    lines = [
        f"[factors.{rec['family']}]",
        f'criterion = ["{c["criterion"]}"]',
        f"max_depth = [{depth}]",
        f"min_samples_leaf = [{int(c['min_samples_leaf'])}]",
    ]
    if c["rule"] != "unpruned":
        lines += [
            f"inner_folds = [{int(c['inner_folds'])}]",
            f'rule = ["{c["rule"]}"]',
            f'prune_risk = ["{c["prune_risk"]}"]',
        ]
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    main()
