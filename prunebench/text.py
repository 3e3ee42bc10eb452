"""The plain-text tables the command line prints, built from library results.

Each function takes what a library function returned (a frame, a list of
results, a summary) and returns the text, lines joined by newlines, fitted to
100 columns; the command line only prints it.
"""

from __future__ import annotations

import textwrap

from .snippets import long_label
from .vocabulary import (
    REGRESSION,
    THREE_DECIMAL_METRICS,
    config_label,
    counted,
    family_of,
    higher_is_better,
    is_relative,
)

__all__ = [
    "compare_text",
    "conduct_text",
    "demo_text",
    "plan_text",
    "progress_text",
    "rank_text",
]

WIDTH = 100


def _fmt(value, spec: str) -> str:
    """``value`` formatted by ``spec``; "-" when missing; a zero never signed ("-0.000")."""
    import pandas as pd

    if value is None or pd.isna(value):
        return "-"
    text = format(value, spec)
    bare = text.strip()
    if bare[:1] in ("+", "-") and bare.lstrip("+-").strip("0.,") == "":
        # a rounded zero: keep the width, drop the sign
        text = text.replace(bare[0], " ", 1) if text != bare else bare[1:]
    return text


def _number_spec(scale: float) -> str:
    """Fixed decimals for rates and small losses, significant digits for large ones."""
    return ".3f" if abs(scale) < 10 else ".4g"


def _wrap(text: str, indent: str = "") -> str:
    """A note wrapped to the columns the tables fit in."""
    return textwrap.fill(text, width=WIDTH, initial_indent=indent, subsequent_indent=indent)


# ---- check and conduct -------------------------------------------------------------------


def _search_range_text(value: tuple) -> str:
    """One search dimension in words: ``choices gini, entropy``; ``integers 1 to 40, log scale``."""
    if value[0] == "choices":
        return "choices " + ", ".join(str(v) for v in value[1])
    if value[0] == "float":
        return f"numbers {value[1]:g} to {value[2]:g}"
    return f"integers {value[1]} to {value[2]}" + (", log scale" if value[3] else "")


def _search_plan_text(study) -> list[str]:
    spec = study.search
    lines = [
        f"study {study.name!r}: a search ({spec.sampler} sampler, "
        f"{counted(spec.configurations, 'configuration')}, early stopping "
        f"{'on' if spec.early_stopping else 'off'}, seed {spec.seed})"
    ]
    for name, value in spec.space.items():
        lines.append(f"  {name}: {_search_range_text(value)}")
    lines.append(
        f"each configuration runs on {counted(len(study.datasets), 'dataset')}: "
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
        f"seed {study.seed}, outer CV {counted(study.repeats, 'repeat')} x {study.folds} folds, "
        f"database {database}",
    ]
    # the widest name sets the column: a simulation's name carries its parameters
    name_width = max([28, *(len(r["dataset"]) for r in rows)])
    lines.append(
        f"{'dataset':<{name_width}} {'task':<11} {'rows':>7} {'features':>8} {'trials':>6} "
        f"{'tree fits':>9} {'est. s':>8}"
    )
    for r in rows:
        lines.append(
            f"{r['dataset']:<{name_width}} {r['task']:<11} {r['rows']:>7} {r['features']:>8} "
            f"{r['trials']:>6} {r['fits']:>9} {r['seconds']:>8.1f}"
        )
    total_fits = sum(r["fits"] for r in rows)
    total_seconds = sum(r["seconds"] for r in rows)
    for task, levels in study.factors.items():
        shown = "; ".join(
            f"{k} " + ", ".join("none" if v is None else str(v) for v in values)
            for k, values in levels.items()
        )
        lines.append(_wrap(f"factors ({task}): {shown}"))
    lines += [
        f"{counted(len(study.trials()), 'trial')} in {counted(len(study.groups()), 'group')} "
        f"(trials that share the grown trees share their fits); "
        f"{counted(total_fits, 'tree fit')}",
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
        f"search: {counted(found['configurations'], 'configuration')} finished, "
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


def _metric_number(value, metric: str, signed: bool = False) -> str:
    """A metric's value as the tables print it: three decimals for rates and probabilities,
    four significant figures (thousands separated above 10,000) for MSE-like losses; "-" when
    missing; never "-0.000"."""
    import pandas as pd

    if value is None or pd.isna(value):
        return "-"
    sign = "+" if signed else ""
    if metric in THREE_DECIMAL_METRICS:
        text = f"{value:{sign}.3f}"
    elif abs(value) >= 1e4:
        text = f"{value:{sign},.0f}"
    else:
        text = f"{value:{sign}.4g}"
    return text.lstrip("+-") if text.lstrip("+-").strip("0.,") == "" else text


def _aligned(rows: list[list[str]], left: int = 3) -> list[str]:
    """Rows of cells in columns as wide as their widest cell, two spaces apart; the first
    ``left`` columns left-aligned, the rest right-aligned."""
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    return [
        "  ".join(
            cell.ljust(w) if i < left else cell.rjust(w)
            for i, (cell, w) in enumerate(zip(row, widths, strict=True))
        ).rstrip()
        for row in rows
    ]


def _p_text(p) -> str:
    """A p-value with a star below 0.05; a dash when there is none."""
    if p is None or p != p:
        return "-"
    return f"{p:.3f}{'*' if p < 0.05 else ' '}"


def _conduct_rows(table) -> list[list[str]]:
    rows = [
        [
            "dataset",
            "rule",
            "metric",
            "unpruned",
            "pruned",
            "pruned - unpruned",
            "p",
            "leaves unpruned",
            "leaves pruned",
        ]
    ]
    for (dataset, rule, metric), row in table.iterrows():
        rows.append(
            [
                str(dataset),
                str(rule),
                str(metric),
                _metric_number(row["unpruned"], metric),
                _metric_number(row["pruned"], metric),
                _metric_number(row["pruned"] - row["unpruned"], metric, signed=True),
                _p_text(row.get("p_value")),
                f"{row['leaves_unpruned']:.1f}",
                f"{row['leaves_pruned']:.1f}",
            ]
        )
    return rows


def conduct_text(summary, table) -> str:
    """What ``prunebench conduct`` prints when the sweep ends.

    Parameters
    ----------
    summary : ConductSummary
    table : DataFrame
        From :func:`prunebench.results.conduct_table`.
    """
    before = (
        f", {summary.failed_before} failed before (not run again: --retry-failed)"
        if summary.failed_before
        else ""
    )
    lines = [
        f"{counted(summary.done, 'trial')} done, {summary.failed} failed, "
        f"{summary.skipped} already finished{before}, of {summary.total}; "
        f"{summary.seconds:.1f} s; results in {summary.database}"
    ]
    lines += [f"  failed: {error}" for error in summary.errors[:5]]
    if summary.search is not None:
        lines += _search_found_text(summary.search)
    if table.empty:
        return "\n".join(lines)
    lines += [""] + _aligned(_conduct_rows(table))
    db = summary.database
    lines += [
        _wrap(
            "(test metric and leaves: means over every configuration and outer fold; p: "
            "corrected resampled t of the paired pruned - unpruned difference, * below 0.05, "
            "not adjusted for the number of rows: 'prunebench compare' gives Holm's)"
        ),
        f"next: prunebench compare --db {db}   |   prunebench recommend --db {db}   |   "
        f"prunebench report --db {db} --out report.html",
    ]
    return "\n".join(lines)


def progress_text(report: dict) -> str:
    """One progress line of :func:`prunebench.progress.progress_report`, and recent failures."""
    rate = "-" if report["rate_per_minute"] is None else f"{report['rate_per_minute']:.1f}"
    lines = [
        f"study {report['study']!r}: {report['done']} done, {report['failed']} failed, "
        f"{report['pending']} pending of {counted(report['total'], 'trial')}; {rate} trials/min; "
        f"ETA {report['eta']}; last finished {report['last_finished'] or '-'}"
    ]
    if report.get("search") and report.get("writing"):
        lines.append("  a search: trials are recorded as its configurations reach them")
    if report["pending"] and report.get("writing") is False:
        lines.append("  no conduct is running: run the same 'prunebench conduct' again to finish")
    lines += [f"  recent failure: {error}" for error in report["errors"]]
    return "\n".join(lines)


def demo_text(dataset: str, data, model, cv: int) -> str:
    """The CV curve of a fitted pruned tree and the alpha its rule chose."""
    loss = "MSE" if family_of(data.task) == REGRESSION else "error rate"
    lines = [
        f"{dataset}: {counted(len(data.y), 'row')}, {counted(data.X.shape[1], 'feature')}; "
        f"grown with criterion={model.criterion}, pruned by {model.prune_risk}, {cv}-fold CV",
        f"{'alpha':>12} {'leaves':>7} {'CV ' + loss:>14} {'SE':>10}",
    ]
    for row in model.cv_curve_.itertuples():
        mark = "  <- chosen" if row.alpha == model.ccp_alpha_ else ""
        lines.append(f"{row.alpha:12.6g} {row.n_leaves:7d} {row.mean:14.5g} {row.se:10.3g}{mark}")
    lines.append(
        f"rule {model.rule}: alpha = {model.ccp_alpha_:.6g}, "
        f"{counted(model.get_n_leaves(), 'leaf', 'leaves')} (full tree "
        f"{model.full_tree_.get_n_leaves()}), "
        f"depth {model.get_depth()}"
    )
    return "\n".join(lines)


# ---- compare, rank, recommend ------------------------------------------------------------


def _compare_rows(rows, spec: str) -> list[str]:
    """One row per data set and configuration: the verdict first, then the numbers, then the
    configuration written out on its own (wrapped) line."""
    lines = []
    for _, r in rows.iterrows():
        verdict = {"pruned better": "pruned", "unpruned better": "unpr."}.get(r["verdict"], "-")
        ci = f"[{_fmt(r['ci_low'], '+' + spec)},{_fmt(r['ci_high'], '+' + spec)}]"
        lines.append(
            f"{verdict:<6} {r['dataset'][:13]:<13} "
            f"{_fmt(r['mean_pruned'], spec):>7} {_fmt(r['mean_unpruned'], spec):>7} "
            f"{_fmt(r['diff'], '+' + spec):>7} {ci:>15} {_fmt(r['p_value'], '4.2f'):>4} "
            f"{_fmt(r['p_holm'], '4.2f'):>4} {_fmt(r['leaves_saved'], '5.1f'):>5}"
        )
        lines.append(_wrap(long_label(r), "       "))
    return lines


def compare_text(table, alpha: float = 0.05) -> str:
    """Pruned against unpruned, per metric: :func:`prunebench.stats.comparison` as text.

    Both p-values are shown (the corrected t's and its Holm adjustment over every row);
    the verdict follows the Holm-adjusted one.
    """
    lines = []
    for m, rows in table.groupby("metric", sort=False):
        better = "higher" if higher_is_better(m) else "lower"
        spec = _number_spec(rows["mean_unpruned"].abs().median())
        lines.append(
            _wrap(
                f"metric: {m} ({better} is better); diff = pruned - unpruned, mean over "
                f"{int(rows['n_folds'].iloc[0])} outer folds; 95% CI of diff by corrected "
                "resampled t; p = its p-value, Holm = Holm-adjusted over every row; better = "
                f"the arm favoured when Holm < {alpha:g}; saved = leaves saved by pruning (mean "
                "per fold)"
            )
        )
        lines.append(
            f"{'better':<6} {'dataset':<13} {'pruned':>7} {'unprun.':>7} "
            f"{'diff':>7} {'95% CI of diff':>15} {'p':>4} {'Holm':>4} {'saved':>5}"
        )
        lines += _compare_rows(rows, spec)
        naive = ((rows["naive_ci_high"] < 0) | (rows["naive_ci_low"] > 0)).sum()
        corrected = ((rows["ci_high"] < 0) | (rows["ci_low"] > 0)).sum()
        width = (rows["ci_high"] - rows["ci_low"]) / (rows["naive_ci_high"] - rows["naive_ci_low"])
        held = (table.loc[rows.index, "p_holm"] < alpha).sum()
        lines.append(
            _wrap(
                f"{counted(len(rows), 'row')}: {counted(corrected, 'difference')} significant "
                f"at 5% with the corrected t, {held} after Holm's adjustment over every row, "
                f"{naive} with the naive t (folds treated as independent), whose intervals are "
                f"{width.median():.1f}x narrower (median)."
            )
        )
        lines.append("")
    return "\n".join(lines)


def _rank_heading(res: dict, alpha: float, width: int = 29) -> list[str]:
    f, n = res["friedman"], len(res["datasets"])
    lines = [
        _wrap(
            f"{res['family']}: {counted(len(res['table']), 'configuration')} on "
            f"{counted(n, 'dataset')}, "
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
        f"{'configuration':<{width}} {'mean rank':>9} {'W/T/L':>8} "
        f"{'mean ' + res['metric']:>10} {'leaves':>7} {'ok':>3} {'Wilcoxon':>8} "
        f"{'P(pr+)':>6} {'P(=)':>5} {'P(un+)':>6}"
    )
    return lines


#: the rank table's numbers after the configuration column, in characters
_RANK_NUMBERS = 71


def _rank_row(r, width: int = 29) -> str:
    """One configuration's row; a label wider than the column gets a line of its own."""
    wtl = f"{r['wins']}/{r['ties']}/{r['losses']}"
    label = config_label(r)
    head = f"{label:<{width}}"
    if len(label) > width:
        head = f"{label}\n{'':<{width}}"
    return (
        f"{head} {r['mean_rank']:>9.2f} {wtl:>8} "
        f"{_fmt(r['mean_metric'], '10.4g'):>10} {r['mean_leaves']:>7.1f} "
        f"{'yes' if r['not_worse'] else 'no':>3} {_fmt(r.get('wilcoxon_p'), '8.3f'):>8} "
        f"{_fmt(r.get('p_pruned_better'), '6.2f'):>6} "
        f"{_fmt(r.get('p_equivalent'), '5.2f'):>5} "
        f"{_fmt(r.get('p_unpruned_better'), '6.2f'):>6}"
    )


def rank_text(results: list[dict], alpha: float) -> str:
    """:func:`prunebench.ranks.ranking`'s results as text, one block per task family.

    Says first, under the test line, when Friedman's test cannot separate the
    configurations (p >= alpha, or no test with one data set).  No label is cut, so
    configurations that differ in any level read differently: the configuration
    column widens to the longest label while the lines stay within 100 characters,
    and a longer label is written on a line of its own above its numbers.
    """
    lines = []
    for res in results:
        labels = [config_label(r) for _, r in res["table"].iterrows()]
        width = max([29, *map(len, labels)])
        if width + _RANK_NUMBERS > 100:
            width = 29
        heading = _rank_heading(res, alpha, width)
        if not res.get("separated", True):
            heading.insert(
                2,
                _wrap(
                    f"Friedman's test cannot separate the configurations at {alpha:g}: their "
                    "mean ranks may differ by chance alone, so read the ranks as an overview, "
                    "not as an order (see 'prunebench effects' and 'prunebench recommend')"
                ),
            )
        lines += heading
        lines += [_rank_row(r, width) for _, r in res["table"].iterrows()]
        rope = res.get("rope", 0.01)
        relative = " of the unpruned loss" if is_relative(res["metric"]) else ""
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
