"""The ``prunebench`` command line: thin commands over the library.

Each command opens what it needs, calls one library function and prints the
result (the text comes from :mod:`prunebench.text`); a
:class:`~prunebench.exceptions.PrunebenchError` becomes a one-line message on
stderr and the error's exit code.  Library messages name keyword parameters
(``study=...``); :func:`prunebench.cli_options._as_flags` turns them into this
command line's options.
Heavy libraries (scikit-learn, matplotlib, Optuna) are imported inside the
commands that need them, so ``--help``, ``sql``, ``progress`` and ``datasets``
start without them.
"""

from __future__ import annotations

import sys

import click

from ._version import __version__
from .cli_options import (
    _db_option,
    _decision_alpha,
    _decision_metric,
    _decision_options,
    _emit,
    _fold_rows,
    _json_option,
    _json_ready,
    _output_options,
    _per_family,
    _reads_database,
    _reports_errors,
    _results_options,
    _settings,
    _study_file_argument,
)
from .vocabulary import (
    CLASSIFICATION,
    FACTORS,
    PRUNE_RISKS,
    REGRESSION,
    counted,
)

#: the commands in workflow order, as ``--help`` lists them (extend it when adding a command;
#: a command missing here is listed after these, alphabetically)
WORKFLOW = [
    "check",
    "conduct",
    "progress",
    "compare",
    "effects",
    "rank",
    "recommend",
    "figures",
    "report",
    "sql",
    "export",
    "datasets",
    "demo",
]


class _WorkflowGroup(click.Group):
    """A group that lists its commands in :data:`WORKFLOW` order."""

    def list_commands(self, ctx) -> list[str]:
        known = [name for name in WORKFLOW if name in self.commands]
        return known + sorted(name for name in self.commands if name not in WORKFLOW)


@click.group(
    cls=_WorkflowGroup,
    context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100},
)
@click.version_option(__version__, prog_name="prunebench")
def main() -> None:
    """prunebench: evidence for how decision trees are grown and pruned by default.

    Write a study file that sweeps the criterion, depth limit, leaf size, inner folds,
    alpha rule and pruning risk over datasets; 'check' it, 'conduct' it (nested,
    repeated CV; every trial kept in SQLite; resumable), then read the evidence with
    'effects', 'recommend', 'compare', 'rank', 'figures' and 'report', or query it with 'sql',
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
    "--criterion",
    default=None,
    help=f"Growing criterion (default: {_per_family(FACTORS['criterion'].default)}).",
)
@click.option(
    "--prune-risk",
    default=None,
    help=f"Pruning risk: {' or '.join(PRUNE_RISKS[CLASSIFICATION])} (classification), "
    f"{' or '.join(PRUNE_RISKS[REGRESSION])} (regression). "
    f"Default: {_per_family(FACTORS['prune_risk'].default)}.",
)
@click.option("--cv", default=10, show_default=True, help="Folds for choosing alpha.")
@click.option(
    "--rule", default="1se", show_default=True, help='Alpha rule: "min", "1se", "0.5se", ...'
)
@click.option("--random-state", default=0, show_default=True, help="Seed of the trees.")
@_reports_errors
def demo(dataset, criterion, prune_risk, cv, rule, random_state) -> None:
    """Fit a pruned tree on one data set and print its CV curve and chosen alpha."""
    from .datasets import load_dataset
    from .snippets import estimator_for
    from .text import demo_text

    data = load_dataset(dataset)
    _check_demo(dataset, data, criterion, cv)
    given = {"criterion": criterion, "prune_risk": prune_risk}
    params = {"cv": cv, "rule": rule, "random_state": random_state}
    params.update({k: v for k, v in given.items() if v})
    model = estimator_for(data.task)(**params).fit(data.X, data.y)
    click.echo(demo_text(dataset, data, model, cv))


def _check_demo(dataset: str, data, criterion: str | None, cv: int) -> None:
    """The criterion suits the data set's task, and every CV fold can get rows."""
    from .exceptions import parameter_error
    from .vocabulary import CRITERIA, family_of

    family = family_of(data.task)
    if criterion is not None and criterion not in CRITERIA[family]:
        expected = f"a {family} criterion for {dataset!r}: {', '.join(CRITERIA[family])}"
        raise parameter_error("--criterion", "prunebench demo", expected, criterion)
    # stratified folds for classification need as many rows of each class as folds
    most = data.smallest_class if family == CLASSIFICATION else len(data.y)
    if isinstance(cv, int) and cv > most:
        where = "rows in the smallest class" if family == CLASSIFICATION else "rows"
        expected = f"at most {most}, the number of {where} of {dataset!r}"
        raise parameter_error("--cv", "prunebench demo", expected, cv)


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
@_study_file_argument
@click.option(
    "--workers",
    default=(1,),
    multiple=True,
    type=int,
    show_default=True,
    help="Workers to estimate the time for (repeat the option for several counts).",
)
@_json_option
@_reports_errors
def check(study_file, workers, as_json) -> None:
    """Validate a study file and print its plan: trials, groups, tree fits and a time estimate.

    Nothing is written. Every group (the trials that share the grown trees) is timed
    on its first outer fold, as conduct evaluates it, and the estimate scales that
    by the outer folds; with --json the plan is printed as one JSON object.
    """
    import json

    from .execute import default_database, plan, plan_summary, usable_workers
    from .study import load_study
    from .text import plan_text

    counts = []
    for asked in workers:
        used, note = usable_workers(asked)
        if note and not as_json:
            click.echo(f"note: {note}")
        counts.append(used)
    study = load_study(study_file)
    if as_json:
        summary = plan_summary(study, counts) if study.search is None else {"study": study.name}
        click.echo(json.dumps(summary, indent=2))
        return
    rows = plan(study) if study.search is None else []
    click.echo(plan_text(study, rows, default_database(study), counts))


@main.command()
@_study_file_argument
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
    changing its seed or outer scheme is refused. A trial that fails keeps its error
    and the others go on; the command then exits with status 1.
    """
    from .execute import conduct as run_study
    from .results import conduct_table
    from .study import load_study
    from .text import conduct_text

    study = load_study(study_file)
    summary = run_study(
        study, database, workers=workers, retry_failed=retry_failed, cluster=cluster
    )
    click.echo(conduct_text(summary, conduct_table(summary.database, study.study_id)))
    if summary.failed:  # stored, but a script chaining commands must hear of it
        click.echo(
            f"error: {summary.failed} of {summary.total} trials failed in this run; their "
            "errors are in trials.error ('prunebench progress' shows the last ones), and "
            "--retry-failed runs them again",
            err=True,
        )
        sys.exit(1)


@main.command()
@_results_options
@_decision_metric
@_decision_alpha
@_output_options
@_reports_errors
def compare(database, study, metric, alpha, as_json, as_csv) -> None:
    """Pruned against unpruned per dataset and configuration, with corrected 95% CIs.

    The difference is pruned - unpruned on each outer fold; its interval and p-value come
    from the corrected resampled t (Nadeau & Bengio 2003), which allows for the overlap of
    training sets in repeated CV. Both p-values are shown, the corrected t's and its Holm
    adjustment over every row; the verdict follows the Holm-adjusted p. The naive interval
    is in the JSON and CSV output.
    """
    from .effects import check_decision
    from .stats import comparison
    from .text import compare_text

    settings = _settings(database, study, metric, None, alpha)
    check_decision("compare", None, settings["alpha"])
    folds = _fold_rows(database, study, settings["metric"])
    table = comparison(folds, settings["metric"], settings["alpha"])
    if not _emit(table, as_json, as_csv):
        click.echo(compare_text(table, settings["alpha"]))


@main.command()
@_results_options
@_decision_options
@_output_options
@_reports_errors
def rank(database, study, metric, margin, alpha, as_json, as_csv) -> None:
    """Rank configurations across datasets: an overview by mean ranks and the Friedman test.

    Each configuration's pruned tree is ranked on every dataset (1 = best); each distinct
    unpruned tree takes part as a configuration of its own. Configurations whose mean rank
    is within Nemenyi's critical difference of the best are not significantly worse; the
    output says when the Friedman test cannot separate the configurations. The Bayesian
    signed-rank test uses the study's margin as its region of practical equivalence.
    Mean ranks depend on the pool of configurations: the default comes from 'recommend'.
    """
    from .ranks import ranking, ranking_frame
    from .text import rank_text

    settings = _settings(database, study, metric, margin, alpha)
    results = ranking(
        _fold_rows(database, study, settings["metric"]),
        settings["metric"],
        settings["alpha"],
        settings["margin"],
    )
    if as_json or as_csv:
        _emit(ranking_frame(results), as_json, as_csv)
    else:
        click.echo(rank_text(results, settings["alpha"]))


@main.command()
@_results_options
@_decision_options
@_output_options
@click.option(
    "--interactions",
    is_flag=True,
    help="Show each contrast within each level of another factor instead, flagged where "
    "the effects differ by more than the margin.",
)
@_reports_errors
def effects(database, study, metric, margin, alpha, as_json, as_csv, interactions) -> None:
    """Each factor's effect on the primary metric and on tree size, across datasets.

    Per task family, factor and level against the reference level (the first listed in the
    study file; in a search, the smallest level tried), and for pruning itself (pruned
    against the unpruned tree): the paired per-fold contrast, per dataset its Nadeau-Bengio
    variance, across datasets a random-effects mean (DerSimonian-Laird) with the
    Hartung-Knapp 95% interval and the 95% prediction interval for a new dataset; tree size
    as a ratio of leaf counts. Verdict: equivalent when the 90% interval lies inside the margin,
    else better or worse when the Holm-adjusted p is below alpha, else undecided.
    """
    import json

    from .effects import effect_records
    from .tables import open_results
    from .text_decision import effects_text, interactions_text

    results = open_results(database, study)
    settings = results.decision(metric, margin, alpha)
    table = results.effects(metric, margin, alpha, interactions=interactions)
    if as_json and as_csv:
        raise click.UsageError("give --json or --csv, not both")
    if as_json:
        records = table.to_dict("records") if interactions else effect_records(table)
        click.echo(json.dumps(_json_ready(records), indent=2))
    elif as_csv:
        click.echo(table.to_csv(index=False), nl=False)
    elif interactions:
        click.echo(interactions_text(table))
    else:
        click.echo(effects_text(table, settings["alpha"]))


@main.command()
@_results_options
@_decision_options
@_json_option
@_reports_errors
def recommend(database, study, metric, margin, alpha, as_json) -> None:
    """Propose a default configuration per task family, and say how well the rule does.

    First the trials done, failed and pending per family and every family that could not
    be decided. Then B, the configuration with the lowest mean loss over datasets; the
    acceptable set, whose one-sided upper bound of loss - B's (Hartung-Knapp, across
    datasets) lies below the margin; and the recommendation, the acceptable configuration
    with the fewest leaves. The rule is judged by leaving each dataset out once (held-out
    regret, share over the margin). Stability of the chosen trees, the estimator and a
    study-file fragment follow.
    """
    import json

    from .snippets import recommendation_records
    from .tables import open_results
    from .text_decision import recommend_text

    recs = open_results(database, study).recommendation(metric, margin, alpha)
    if as_json:
        click.echo(json.dumps(recommendation_records(recs), indent=2))
    else:
        click.echo(recommend_text(recs))


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
    from .results import load_folds
    from .store import ResultStore

    with ResultStore(database, readonly=True) as store:
        written = write_figures(store, load_folds(store, study), out, study)
    click.echo(f"{counted(len(written), 'file')} written to {out}")


@main.command()
@_results_options
@_decision_options
@click.option(
    "--out", required=True, type=click.Path(dir_okay=False), help="The HTML file to write."
)
@_reports_errors
def report(database, study, metric, margin, alpha, out) -> None:
    """Write one self-contained HTML report: the decision first, then the evidence.

    A decision box per task family (the recommended default in a sentence, how sure it
    is, the code to copy), the factor table and figure, the figures per family, the
    ranking and comparison, the study file and the caution. Metric, margin and alpha
    default to the study's [decision] section. The file embeds everything it shows,
    opens offline, and is written whole or not at all.
    """
    from .report import write_report

    path = write_report(database, out, study, metric=metric, margin=margin, alpha=alpha)
    click.echo(f"report written to {path} ({path.stat().st_size // 1024} KiB)")


@main.command()
@_db_option
@click.argument("query")
@_reads_database
@_output_options
@_reports_errors
def sql(database, query, as_json, as_csv) -> None:
    """Run one read-only SQL query against a results database.

    The file is opened read-only; statements that would write (INSERT, UPDATE, DELETE,
    DROP, CREATE, ALTER, ATTACH, a PRAGMA that sets a value, ...) are refused.
    """
    # plain rows, no pandas: the command starts in a fraction of a second
    from .query import csv_text, fetch, json_text, table_text

    if as_json and as_csv:
        raise click.UsageError("give --json or --csv, not both")
    columns, rows = fetch(database, query)
    if as_json:
        click.echo(json_text(columns, rows))
    elif as_csv:
        click.echo(csv_text(columns, rows), nl=False)
    else:
        click.echo(table_text(columns, rows))


@main.command()
@_db_option
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
@click.option("--overwrite", is_flag=True, help="Replace files of the same names in --out.")
@_reads_database
@_reports_errors
def export(database, out, fmt, overwrite) -> None:
    """Write every table and view of a results database as CSV or Parquet files.

    Each file is written whole or not at all; files already in --out are refused unless
    --overwrite is given.
    """
    from .tables import export_tables

    written = export_tables(database, out, fmt, overwrite=overwrite)
    names = ", ".join(p.name for p in written)
    click.echo(f"{counted(len(written), 'file')} written to {out}: {names}")


@main.command()
@_results_options
@click.option(
    "--watch",
    default=0.0,
    show_default=True,
    help="Refresh every this many seconds until no trial is pending and no conduct "
    "writes to the database (0: once).",
)
@_reports_errors
def progress(database, study, watch) -> None:
    """Show a study's progress: done / failed / pending, rate, ETA and the last errors.

    Works while a conduct writes to the database in another terminal, and after it ends.
    """
    import time

    from .exceptions import parameter_error
    from .progress import progress_report
    from .text import progress_text

    if not watch >= 0:  # also refuses nan
        raise parameter_error("--watch", "prunebench progress", "0 (once) or seconds > 0", watch)
    while True:
        r = progress_report(database, study)
        click.echo(progress_text(r))
        # a search records trials as it reaches them: none pending between two batches
        # does not mean it has ended, while its conduct still holds the database
        if watch <= 0 or (r["pending"] == 0 and not r["writing"]):
            return
        time.sleep(watch)


if __name__ == "__main__":  # pragma: no cover
    main()
