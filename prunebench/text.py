"""The plain-text tables the command line prints, built from library results.

Each function takes what a library function returned (a frame, a list of
results, a summary) and returns the text, lines joined by newlines, fitted to
100 columns; the command line only prints it.
"""

from __future__ import annotations

import textwrap

from .snippets import CAUTION, estimator_block, study_fragment
from .vocabulary import REGRESSION, config_label, family_of, higher_is_better

__all__ = [
    "compare_text",
    "conduct_text",
    "demo_text",
    "plan_text",
    "progress_text",
    "rank_text",
    "recommend_text",
]

WIDTH = 100


def _fmt(value, spec: str) -> str:
    import pandas as pd

    if value is None or pd.isna(value):
        return "-"
    return format(value, spec)


def _number_spec(scale: float) -> str:
    """Fixed decimals for rates and small losses, significant digits for large ones."""
    return ".3f" if abs(scale) < 10 else ".4g"


def _wrap(text: str, indent: str = "") -> str:
    """A note wrapped to the columns the tables fit in."""
    return textwrap.fill(text, width=WIDTH, initial_indent=indent, subsequent_indent=indent)


def _indented(block: str, indent: str = "     ") -> str:
    return "\n".join(indent + line for line in block.splitlines())


# ---- check and conduct -------------------------------------------------------------------


def _search_plan_text(study) -> list[str]:
    spec = study.search
    lines = [
        f"study {study.name!r}: a search ({spec.sampler} sampler, "
        f"{spec.configurations} configurations, early stopping "
        f"{'on' if spec.early_stopping else 'off'}, seed {spec.seed})"
    ]
    for name, value in spec.space.items():
        shown = list(value[1:]) if value[0] != "choices" else value[1]
        lines.append(f"  {name}: {value[0]} {shown}")
    lines.append(
        f"each configuration runs on {len(study.datasets)} datasets: "
        f"{', '.join(study.datasets)}; outer CV {study.repeats} x {study.folds}"
    )
    return lines


def plan_text(study, rows: list[dict], database, workers: int) -> str:
    """What ``prunebench check`` prints: the plan of a study and a rough time.

    Parameters
    ----------
    study : Study
    rows : list of dict
        From :func:`prunebench.execute.plan` (ignored for a search).
    database : Path
        Where the results would go.
    workers : int or sequence of int
        Worker counts to estimate the time for (1 is always given).
    """
    if study.search is not None:
        return "\n".join(_search_plan_text(study))
    lines = [
        f"study {study.name!r}: {study.description}".rstrip(": "),
        f"seed {study.seed}, outer CV {study.repeats} repeats x {study.folds} folds, "
        f"database {database}",
        f"{'dataset':<28} {'task':<11} {'rows':>7} {'features':>8} {'trials':>6} "
        f"{'tree fits':>9} {'est. s':>8}",
    ]
    for r in rows:
        lines.append(
            f"{r['dataset']:<28} {r['task']:<11} {r['rows']:>7} {r['features']:>8} "
            f"{r['trials']:>6} {r['fits']:>9} {r['seconds']:>8.1f}"
        )
    total_fits = sum(r["fits"] for r in rows)
    total_seconds = sum(r["seconds"] for r in rows)
    for task, levels in study.factors.items():
        lines.append(f"factors ({task}): " + "; ".join(f"{k} {v}" for k, v in levels.items()))
    lines += [
        f"{len(study.trials())} trials in {len(study.groups())} groups (trials that share "
        f"the grown trees share their fits); {total_fits} tree fits",
        "rough time: " + ", ".join(_estimates(rows, total_seconds, workers)),
    ]
    return "\n".join(lines)


def _estimates(rows: list[dict], total_seconds: float, workers) -> list[str]:
    """One phrase per worker count: 1 and each one asked, each once."""
    from .execute import estimated_seconds

    asked = [workers] if isinstance(workers, int) else list(workers)
    out = []
    for w in dict.fromkeys([1, *asked]):
        seconds = (
            estimated_seconds(rows, w)
            if all("group_seconds" in r for r in rows)
            else total_seconds / max(w, 1)
        )
        out.append(f"{seconds / 60:.1f} min with {w} worker{'s' if w != 1 else ''}")
    return out


def _search_found_text(found: dict) -> list[str]:
    lines = [
        f"search: {found['configurations']} configurations finished, "
        f"{found['stopped_early']} of them stopped early, {found['failed']} failed; "
        f"Optuna's storage in {found['storage']}"
    ]
    if "best" in found:
        best = found["best"]
        depth = "none" if best["max_depth"] is None else best["max_depth"]
        lines.append(
            f"best: criterion {best['criterion']}, max_depth {depth}, min_samples_leaf "
            f"{best['min_samples_leaf']}, inner_folds {best['inner_folds']}, rule "
            f"{best['rule']}, prune_risk {best['prune_risk']}; mean relative loss "
            f"{found['best_value']:.4f} (95% CI {found['ci_low']:.4f} to "
            f"{found['ci_high']:.4f}; 1 = no better than ignoring the features)"
        )
    return lines


def conduct_text(summary, table) -> str:
    """What ``prunebench conduct`` prints when the sweep ends.

    Parameters
    ----------
    summary : ConductSummary
    table : DataFrame
        From :func:`prunebench.results.conduct_table`.
    """
    lines = [
        f"{summary.done} trials done, {summary.failed} failed, {summary.skipped} already "
        f"finished, of {summary.total}; {summary.seconds:.1f} s; results in {summary.database}"
    ]
    lines += [f"  failed: {error}" for error in summary.errors[:5]]
    if summary.search is not None:
        lines += _search_found_text(summary.search)
    if table.empty:
        return "\n".join(lines)
    lines.append(
        f"\n{'dataset':<24} {'rule':<6} {'metric':<6} {'unpruned':>9} {'pruned':>9} "
        f"{'leaves unpruned':>15} {'leaves pruned':>13}"
    )
    for (dataset, rule, metric), row in table.iterrows():
        lines.append(
            f"{dataset:<24} {rule:<6} {metric:<6} {row['unpruned']:>9.4f} "
            f"{row['pruned']:>9.4f} {row['leaves_unpruned']:>15.1f} "
            f"{row['leaves_pruned']:>13.1f}"
        )
    db = summary.database
    lines += [
        "(test metric and leaves: means over every configuration and outer fold)",
        f"next: prunebench compare --db {db}   |   prunebench recommend --db {db}   |   "
        f"prunebench report --db {db} --out report.html",
    ]
    return "\n".join(lines)


def progress_text(report: dict) -> str:
    """One progress line of :func:`prunebench.results.progress_report`, and recent failures."""
    rate = "-" if report["rate_per_minute"] is None else f"{report['rate_per_minute']:.1f}"
    lines = [
        f"study {report['study']!r}: {report['done']} done, {report['failed']} failed, "
        f"{report['pending']} pending of {report['total']} trials; {rate} trials/min; "
        f"ETA {report['eta']}; last finished {report['last_finished'] or '-'}"
    ]
    lines += [f"  recent failure: {error}" for error in report["errors"]]
    return "\n".join(lines)


def demo_text(dataset: str, data, model, cv: int) -> str:
    """The CV curve of a fitted pruned tree and the alpha its rule chose."""
    loss = "MSE" if family_of(data.task) == REGRESSION else "error rate"
    lines = [
        f"{dataset}: {len(data.y)} rows, {data.X.shape[1]} features; grown with "
        f"criterion={model.criterion}, pruned by {model.prune_risk}, {cv}-fold CV",
        f"{'alpha':>12} {'leaves':>7} {'CV ' + loss:>14} {'SE':>10}",
    ]
    for row in model.cv_curve_.itertuples():
        mark = "  <- chosen" if row.alpha == model.ccp_alpha_ else ""
        lines.append(
            f"{row.alpha:12.6g} {row.n_leaves:7d} {row.mean:14.5g} {row.se:10.3g}{mark}"
        )
    lines.append(
        f"rule {model.rule}: alpha = {model.ccp_alpha_:.6g}, "
        f"{model.get_n_leaves()} leaves (full tree {model.full_tree_.get_n_leaves()}), "
        f"depth {model.get_depth()}"
    )
    return "\n".join(lines)


# ---- compare, rank, recommend ------------------------------------------------------------


def _compare_rows(rows, spec: str) -> list[str]:
    lines = []
    for _, r in rows.iterrows():
        verdict = {"pruned better": "pruned", "unpruned better": "unpr."}.get(r["verdict"], "-")
        ci = f"[{_fmt(r['ci_low'], '+' + spec)},{_fmt(r['ci_high'], '+' + spec)}]"
        lines.append(
            f"{r['dataset'][:13]:<13} {config_label(r)[:27]:<27} "
            f"{_fmt(r['mean_pruned'], spec):>7} {_fmt(r['mean_unpruned'], spec):>7} "
            f"{_fmt(r['diff'], '+' + spec):>7} {ci:>15} {_fmt(r['p_value'], '4.2f'):>4} "
            f"{verdict:<6} {_fmt(r['leaves_saved'], '5.1f'):>5}"
        )
    return lines


def compare_text(table) -> str:
    """Pruned against unpruned, per metric: :func:`prunebench.stats.comparison` as text."""
    lines = []
    for m, rows in table.groupby("metric", sort=False):
        better = "higher" if higher_is_better(m) else "lower"
        spec = _number_spec(rows["mean_unpruned"].abs().median())
        lines.append(
            _wrap(
                f"metric: {m} ({better} is better); diff = pruned - unpruned, mean over "
                f"{int(rows['n_folds'].iloc[0])} outer folds; 95% CI of diff by corrected "
                "resampled t; saved = leaves saved by pruning (mean per fold)"
            )
        )
        lines.append(
            f"{'dataset':<13} {'configuration':<27} {'pruned':>7} {'unprun.':>7} "
            f"{'diff':>7} {'95% CI of diff':>15} {'p':>4} {'better':<6} {'saved':>5}"
        )
        lines += _compare_rows(rows, spec)
        naive = ((rows["naive_ci_high"] < 0) | (rows["naive_ci_low"] > 0)).sum()
        corrected = ((rows["ci_high"] < 0) | (rows["ci_low"] > 0)).sum()
        width = (rows["ci_high"] - rows["ci_low"]) / (rows["naive_ci_high"] - rows["naive_ci_low"])
        lines.append(
            _wrap(
                f"{len(rows)} rows: {corrected} differences significant at 5% with the "
                f"corrected t, {naive} with the naive t (folds treated as independent), whose "
                f"intervals are {width.median():.1f}x narrower (median)."
            )
        )
        lines.append("")
    return "\n".join(lines)


def _rank_heading(res: dict, alpha: float) -> list[str]:
    f, n = res["friedman"], len(res["datasets"])
    lines = [
        _wrap(
            f"{res['family']}: {len(res['table'])} configurations on {n} datasets, "
            f"metric {res['metric']} (rank 1 = best)"
        )
    ]
    if f:
        lines.append(
            _wrap(
                f"Friedman chi2 = {f['chi2']:.2f} (p = {f['p_chi2']:.3g}); Iman-Davenport F = "
                f"{f['ff']:.2f} with ({f['df1']}, {f['df2']}) df (p = {f['p_ff']:.3g}); "
                f"Nemenyi critical difference at {alpha:g} = {res['cd']:.2f} ranks"
            )
        )
    else:
        lines.append(_wrap("tests across datasets need two or more datasets of the task"))
    lines.append(
        f"{'configuration':<29} {'mean rank':>9} {'W/T/L':>8} "
        f"{'mean ' + res['metric']:>10} {'leaves':>7} {'ok':>3} {'Wilcoxon':>8} "
        f"{'P(pr+)':>6} {'P(=)':>5} {'P(un+)':>6}"
    )
    return lines


def _rank_row(r) -> str:
    wtl = f"{r['wins']}/{r['ties']}/{r['losses']}"
    return (
        f"{config_label(r)[:29]:<29} {r['mean_rank']:>9.2f} {wtl:>8} "
        f"{_fmt(r['mean_metric'], '10.4g'):>10} {r['mean_leaves']:>7.1f} "
        f"{'yes' if r['not_worse'] else 'no':>3} {_fmt(r.get('wilcoxon_p'), '8.3f'):>8} "
        f"{_fmt(r.get('p_pruned_better'), '6.2f'):>6} "
        f"{_fmt(r.get('p_equivalent'), '5.2f'):>5} "
        f"{_fmt(r.get('p_unpruned_better'), '6.2f'):>6}"
    )


def rank_text(results: list[dict], alpha: float, rope: float) -> str:
    """:func:`prunebench.ranks.ranking`'s results as text, one block per task family."""
    lines = []
    for res in results:
        lines += _rank_heading(res, alpha)
        lines += [_rank_row(r) for _, r in res["table"].iterrows()]
        relative = " relative" if res["family"] == REGRESSION else ""
        lines.append(
            _wrap(
                "ok = not significantly worse than the best (Nemenyi). W/T/L: datasets where "
                "the configuration's mean beats, equals, trails the best configuration's. "
                "Wilcoxon: signed-rank p of pruned vs its unpruned tree across datasets; "
                "P(pr+), P(=), P(un+): Bayesian signed-rank probabilities that pruning is "
                f"better, practically equal (within {rope:g}{relative}), or worse."
            )
        )
        lines.append("")
    return "\n".join(lines)


def _regret_lines(r: dict) -> list[str]:
    spec = _number_spec(r["ranking"]["means"].abs().median().median())
    lines = [f"   {'dataset':<22} {'regret':>8} {'95% CI':>17}  best configuration there"]
    for _, g in r["regret"].iterrows():
        ci = f"[{_fmt(g['ci_low'], '+' + spec)},{_fmt(g['ci_high'], '+' + spec)}]"
        mark = " (loses)" if g["loses"] else ""
        lines.append(
            f"   {g['dataset'][:22]:<22} {_fmt(g['regret'], spec):>8} {ci:>17}  "
            f"{g['best'][:34]}{mark}"
        )
    losing = r["regret"][r["regret"]["loses"]]
    if len(losing):
        lines.append(f"   loses significantly on: {', '.join(losing['dataset'])}")
    return lines


def recommend_text(recs: list[dict]) -> str:
    """:func:`prunebench.ranks.recommendation` as text, with the code to paste and the caution."""
    lines = []
    for r in recs:
        ranked = r["ranking"]
        lines.append(f"== {r['family']}: recommended default (metric {r['metric']})")
        lines.append(
            _wrap(
                f"{config_label(r['config'])}: mean rank {r['mean_rank']:.2f} of "
                f"{len(ranked['table'])} configurations on {len(ranked['datasets'])} datasets, "
                f"{r['mean_leaves']:.1f} leaves on average",
                "   ",
            )
        )
        lines.append(
            _wrap(
                f"regret ({r['metric']} above the best configuration on each dataset): "
                f"mean {r['mean_regret']:.4g}, worst {r['worst_regret']:.4g}",
                "   ",
            )
        )
        lines += _regret_lines(r)
        lines += ["\n   as an estimator:\n", _indented(estimator_block(r))]
        lines += ["\n   as a study-file fragment:\n", _indented(study_fragment(r)), ""]
    lines.append(_wrap("Caution: " + CAUTION))
    return "\n".join(lines)
