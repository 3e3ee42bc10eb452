"""Summary figures of a study, drawn with matplotlib and seaborn.

Every function returns a :class:`matplotlib.figure.Figure` with a title,
labelled axes and units; :func:`write_figures` saves them all as PNG and SVG.
Colours come from one qualitative palette of our own choosing (seaborn's
"colorblind"), configurations keep their colour across figures.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib.ticker
import numpy as np
import pandas as pd
import seaborn as sns
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from .ranks import ranking
from .results import trial_curves
from .selection import MinimumRule, StandardErrorRule
from .stats import comparison
from .vocabulary import (
    CLASSIFICATION,
    Configuration,
    default_metric,
    family_of,
    higher_is_better,
)

__all__ = [
    "FIGURES",
    "alpha_by_rule",
    "critical_difference_diagram",
    "difference_by_dataset",
    "factor_heatmaps",
    "pruning_curves",
    "size_against_error",
    "write_figures",
]

_PALETTE = "colorblind"
_ARM_COLOURS = {"unpruned": "#8c6d31", "pruned": "#1f6f8b"}
#: at most this many configurations get their own colour in per-configuration figures
MAX_CONFIGS = 8


def _figure(**kwargs) -> Figure:
    """A figure drawn by its own Agg canvas: no pyplot state, no global backend switch."""
    fig = Figure(**kwargs)
    FigureCanvasAgg(fig)
    return fig


def _main_family(folds: pd.DataFrame) -> tuple[pd.DataFrame, str]:
    """The classification rows if there are any, else the regression rows; and its metric."""
    families = folds["task"].map(family_of)
    family = CLASSIFICATION if (families == CLASSIFICATION).any() else families.iloc[0]
    return folds[families == family], default_metric(family)


def _main_ranking(folds: pd.DataFrame) -> dict:
    """The ranking of the main task family (see :func:`_main_family`)."""
    rows, _ = _main_family(folds)
    family = family_of(rows["task"].iloc[0])
    return next(r for r in ranking(rows) if r["family"] == family)


def _top_configs(
    folds: pd.DataFrame, n: int = MAX_CONFIGS, ranked: dict | None = None
) -> list[Configuration]:
    """The n best pruned configurations of the main task family by mean rank."""
    table = (ranked or _main_ranking(folds))["table"]
    pruned = table[table["rule"] != "unpruned"]
    return list(pruned["config"].head(n))


def _plain_log(axis) -> None:
    """Log-scale ticks written as plain numbers (4, 10, 40) rather than 4×10^0.

    Call after plotting: on an axis spanning less than about a decade and a half the
    ticks also fall on 2 and 5 times the powers of ten, so the axis is never bare.
    """
    lo, hi = sorted(abs(v) for v in axis.get_view_interval())
    narrow = lo > 0 and np.log10(hi / lo) < 1.5
    subs = (1.0, 2.0, 3.0, 5.0) if narrow else (1.0,)
    axis.set_major_locator(matplotlib.ticker.LogLocator(base=10, subs=subs))
    axis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(matplotlib.ticker.NullFormatter())


def _log_alpha(alpha: np.ndarray, floor: float) -> np.ndarray:
    return np.where(alpha > 0, alpha, floor)


def pruning_curves(curves: pd.DataFrame, title_context: str = "") -> Figure:
    """Inner-CV curve against alpha: one outer fold, and the average over outer folds.

    Parameters
    ----------
    curves : DataFrame
        Rows of the ``curves`` table of one trial group (columns ``repeat``, ``fold``,
        ``alpha``, ``n_leaves``, ``mean``, ``se``).
    title_context : str
        Shown in the title (data set and configuration).

    Returns
    -------
    Figure
        Two panels; each has the CV loss with its ±1 SE band, markers at the ``min``
        and ``1se`` choices, and the tree size on a second axis.
    """
    first = curves[(curves["repeat"] == curves["repeat"].min())]
    first = first[first["fold"] == first["fold"].min()].sort_values("alpha")
    positive = curves.loc[curves["alpha"] > 0, "alpha"]
    floor = positive.min() / 3 if len(positive) else 1e-4
    grid = np.r_[floor, np.geomspace(floor * 1.0001, max(curves["alpha"].max(), floor * 10), 200)]
    averaged = []
    for _, fold in curves.groupby(["repeat", "fold"]):
        fold = fold.sort_values("alpha")
        a = _log_alpha(fold["alpha"].to_numpy(), floor)
        idx = np.clip(np.searchsorted(a, grid, side="right") - 1, 0, len(a) - 1)
        averaged.append(
            np.c_[
                fold["mean"].to_numpy()[idx],
                fold["se"].to_numpy()[idx],
                fold["n_leaves"].to_numpy()[idx],
            ]
        )
    averaged = np.mean(averaged, axis=0)
    fig = _figure(figsize=(12, 4.6), layout="constrained")
    axes = fig.subplots(1, 2, sharey=True)
    panels = [
        (
            axes[0],
            _log_alpha(first["alpha"].to_numpy(), floor),
            first["mean"].to_numpy(),
            first["se"].to_numpy(),
            first["n_leaves"].to_numpy(),
            "one outer fold (repeat 0, fold 0)",
        ),
        (
            axes[1],
            grid,
            averaged[:, 0],
            averaged[:, 1],
            averaged[:, 2],
            f"averaged over {curves.groupby(['repeat', 'fold']).ngroups} outer folds",
        ),
    ]
    for ax, alpha, mean, se, leaves, label in panels:
        ax.step(alpha, mean, where="post", color="#1f6f8b", lw=1.8, label="CV loss")
        ax.fill_between(
            alpha, mean - se, mean + se, step="post", color="#1f6f8b", alpha=0.18, label="±1 SE"
        )
        i_min = MinimumRule().choose(mean, se)
        i_1se = StandardErrorRule(1).choose(mean, se)
        ax.plot(alpha[i_min], mean[i_min], "o", color="#c0392b", ms=8, label="min rule")
        ax.plot(alpha[i_1se], mean[i_1se], "D", color="#e67e22", ms=8, label="1-SE rule")
        ax.set_xscale("log")
        ax.set_xlabel("alpha (cost-complexity, log scale; alpha = 0 drawn at the left edge)")
        ax.set_title(label, fontsize=10)
        size = ax.twinx()
        size.step(alpha, leaves, where="post", color="#7f7f7f", lw=1, ls="--", label="leaves")
        size.set_ylabel("tree size (leaves)", color="#555555")
        size.set_yscale("log")
        _plain_log(size.yaxis)
        handles = ax.get_legend_handles_labels()
        extra = size.get_legend_handles_labels()
        ax.legend(handles[0] + extra[0], handles[1] + extra[1], fontsize=8, loc="upper left")
    axes[0].set_ylabel("inner-CV loss (error rate or MSE)")
    fig.suptitle(f"Pruning curves{': ' + title_context if title_context else ''}")
    return fig


def difference_by_dataset(table: pd.DataFrame, configs: list[tuple]) -> Figure:
    """Mean pruned − unpruned per data set with corrected 95% CIs, one colour per configuration.

    Parameters
    ----------
    table : DataFrame
        From :func:`prunebench.stats.comparison` (one metric).
    configs : list of Configuration
        The configurations to show.

    Returns
    -------
    Figure
        One row per data set; filled markers are significant differences, hollow ones
        are not; the verdict is written at the right.
    """
    metric = table["metric"].iloc[0]
    table = table.assign(config=[Configuration.of(r) for _, r in table.iterrows()])
    table = table[table["config"].isin(configs)]
    datasets = sorted(table["dataset"].unique())
    colours = sns.color_palette(_PALETTE, len(configs))
    fig = _figure(
        figsize=(12, 1.6 + 0.75 * len(datasets) + 0.2 * len(configs)), layout="constrained"
    )
    ax = fig.subplots()
    offsets = np.linspace(-0.3, 0.3, len(configs)) if len(configs) > 1 else [0.0]
    for config, colour, off in zip(configs, colours, offsets, strict=True):
        rows = table[table["config"] == config].set_index("dataset")
        for i, dataset in enumerate(datasets):
            if dataset not in rows.index:
                continue
            r = rows.loc[dataset]
            y = i + off
            ax.plot([r["ci_low"], r["ci_high"]], [y, y], color=colour, lw=1.6)
            significant = r["verdict"] != "no evidence either way"
            ax.plot(
                r["diff"],
                y,
                "o",
                ms=6,
                color=colour,
                markerfacecolor=colour if significant else "white",
                label=config.label() if i == 0 else None,
            )
    ax.axvline(0, color="black", lw=1)
    for i, dataset in enumerate(datasets):
        verdicts = table.loc[table["dataset"] == dataset, "verdict"]
        text = (
            f"pruned better {(verdicts == 'pruned better').sum()}, unpruned better "
            f"{(verdicts == 'unpruned better').sum()}, unclear "
            f"{(verdicts == 'no evidence either way').sum()}"
        )
        ax.text(1.01, i, text, transform=ax.get_yaxis_transform(), va="center", fontsize=8)
    ax.set_yticks(range(len(datasets)), datasets)
    ax.invert_yaxis()
    better = "right" if higher_is_better(metric) else "left"
    ax.set_xlabel(
        f"pruned − unpruned {metric} (mean over outer folds; pruning better to the {better} of 0)"
    )
    ax.set_title(f"Pruned − unpruned {metric} per dataset, corrected 95% CI (filled: significant)")
    fig.legend(
        fontsize=8,
        loc="outside lower center",
        ncols=2,
        frameon=False,
        title="configuration (criterion, depth, leaf size, inner folds, rule, risk)",
        title_fontsize=8,
    )
    return fig


def size_against_error(folds: pd.DataFrame, metric: str | None = None) -> Figure:
    """Mean tree size against mean test loss, both arms, one panel per data set.

    Each point is one configuration's arm, averaged over outer folds.
    """
    rows, default = _main_family(folds)
    metric = metric or default
    means = rows.groupby(["dataset", "trial_id", "arm"], as_index=False)[
        [metric, "n_leaves"]
    ].mean()
    datasets = sorted(means["dataset"].unique())
    cols = min(3, len(datasets))
    nrows = int(np.ceil(len(datasets) / cols))
    fig = _figure(figsize=(4.2 * cols, 3.4 * nrows), layout="constrained")
    axes = fig.subplots(nrows, cols, squeeze=False)
    for ax, dataset in zip(axes.flat, datasets, strict=False):
        part = means[means["dataset"] == dataset]
        for arm, colour in _ARM_COLOURS.items():
            sub = part[part["arm"] == arm]
            ax.scatter(
                sub["n_leaves"],
                sub[metric],
                s=22,
                color=colour,
                alpha=0.8,
                label=arm,
                edgecolors="none",
            )
        ax.set_xscale("log")
        _plain_log(ax.xaxis)
        ax.set_title(dataset, fontsize=10)
        ax.set_xlabel("leaves (mean, log scale)")
        ax.set_ylabel(f"test {metric}")
    for ax in axes.flat[len(datasets) :]:
        ax.set_visible(False)
    # one legend for all panels, outside them, so it hides no point
    fig.legend(
        *axes.flat[0].get_legend_handles_labels(),
        loc="outside upper right",
        fontsize=8,
        title="arm",
        title_fontsize=8,
    )
    fig.suptitle(f"Tree size against test {metric}, per configuration and arm")
    return fig


def factor_heatmaps(table: pd.DataFrame) -> Figure:
    """Mean pruned − unpruned difference over criterion × depth limit and rule × inner folds.

    Parameters
    ----------
    table : DataFrame
        From :func:`prunebench.stats.comparison` (one metric, one task family).
    """
    metric = table["metric"].iloc[0]
    table = table.assign(
        depth=table["max_depth"].map(lambda d: "none" if pd.isna(d) else str(int(d)))
    )
    pairs = [
        ("criterion", "depth", "criterion × depth limit"),
        ("rule", "inner_folds", "rule × inner folds"),
    ]
    fig = _figure(figsize=(11, 4.2), layout="constrained")
    axes = fig.subplots(1, 2)
    span = np.nanmax(np.abs(table["diff"].to_numpy())) or 1.0
    for ax, (rows, cols, title) in zip(axes, pairs, strict=True):
        grid = table.pivot_table(index=rows, columns=cols, values="diff", aggfunc="mean")
        sns.heatmap(
            grid,
            ax=ax,
            annot=True,
            fmt=".3g",
            cmap="vlag",
            center=0,
            vmin=-span,
            vmax=span,
            cbar_kws={"label": f"mean pruned − unpruned {metric}"},
        )
        ax.set_title(title, fontsize=10)
        ax.set_xlabel(cols.replace("_", " "))
        ax.set_ylabel(rows.replace("_", " "))
    fig.suptitle(f"Where pruning changes {metric} (averaged over datasets and other factors)")
    return fig


def critical_difference_diagram(ranked: dict, max_configs: int = 15) -> Figure:
    """Average ranks on an axis; bars join configurations within the critical difference.

    Parameters
    ----------
    ranked : dict
        One family's result of :func:`prunebench.ranks.ranking`.
    max_configs : int, default=15
        The best configurations shown (the rest are named in the title count).
    """
    table = ranked["table"].sort_values("mean_rank").head(max_configs).reset_index(drop=True)
    cd = ranked["cd"]
    ranks = table["mean_rank"].to_numpy()
    k_all = len(ranked["table"])
    fig = _figure(figsize=(11, 1.6 + 0.32 * len(table)), layout="constrained")
    ax = fig.subplots()
    lo, hi = 1, max(k_all, 2)
    ax.set_xlim(lo - 0.5, hi + 0.5)
    ax.set_ylim(len(table) + 1, -1.5)
    ax.spines[["left", "right", "bottom"]].set_visible(False)
    ax.xaxis.set_ticks_position("top")
    ax.set_yticks([])
    ax.set_xlabel("average rank across datasets (1 = best)")
    ax.xaxis.set_label_position("top")
    for i, rank in enumerate(ranks):
        y = i + 0.5
        ax.plot([rank, rank], [-0.2, y], color="#555555", lw=0.8)
        ax.plot([rank, hi + 0.3], [y, y], color="#555555", lw=0.8)
        ax.text(
            hi + 0.4,
            y,
            f"{table['config'][i].label()}  ({rank:.2f})",
            va="center",
            fontsize=8,
        )
    # cliques: maximal runs of configurations whose ranks differ by at most the CD
    bars = 0
    if np.isfinite(cd):
        for i in range(len(ranks)):
            j = np.searchsorted(ranks, ranks[i] + cd, side="right") - 1
            if j > i and (
                i == 0 or np.searchsorted(ranks, ranks[i - 1] + cd, side="right") - 1 < j
            ):
                y = -0.4 - 0.25 * (bars % 4)
                ax.plot([ranks[i], ranks[j]], [y, y], color="#c0392b", lw=3)
                bars += 1
        ax.plot([lo, lo + cd], [-1.2, -1.2], color="black", lw=2)
        ax.text(
            lo + cd / 2, -1.1, f"critical difference = {cd:.2f}", ha="center", va="top", fontsize=8
        )
    fig.suptitle(
        f"Critical-difference diagram ({ranked['metric']}, {len(ranked['datasets'])} "
        f"datasets; best {len(table)} of {k_all} configurations)"
    )
    fig.bars_drawn = bars  # for tests and readers of the figure object
    return fig


def alpha_by_rule(folds: pd.DataFrame) -> Figure:
    """Distributions of the chosen alpha and of the pruned tree size, by rule."""
    pruned = folds[folds["arm"] == "pruned"].copy()
    rules = sorted(pruned["rule"].unique())
    positive = pruned.loc[pruned["alpha"] > 0, "alpha"]
    floor = positive.min() / 3 if len(positive) else 1e-4
    pruned["alpha_plot"] = np.where(pruned["alpha"] > 0, pruned["alpha"], floor)
    fig = _figure(figsize=(11, 4.2), layout="constrained")
    axes = fig.subplots(1, 2)
    palette = dict(zip(rules, sns.color_palette(_PALETTE, len(rules)), strict=True))
    panels = [
        ("alpha_plot", "chosen alpha (log scale; 0 drawn at the bottom)", "Chosen alpha"),
        ("n_leaves", "pruned tree size (leaves, log scale)", "Pruned tree size"),
    ]
    for ax, (column, label, title) in zip(axes, panels, strict=True):
        sns.boxplot(
            data=pruned,
            x="rule",
            y=column,
            hue="rule",
            order=rules,
            palette=palette,
            ax=ax,
            legend=False,
            fliersize=2,
        )
        ax.set_yscale("log")
        ax.set_ylabel(label)
        ax.set_title(title, fontsize=10)
    _plain_log(axes[1].yaxis)
    for ax in axes:
        ax.set_xlabel("alpha rule")
    fig.suptitle("Chosen alpha and tree size by rule (all outer folds and configurations)")
    return fig


#: file stem -> what it shows
FIGURES = {
    "pruning_curves": "inner-CV curve against alpha, one fold and averaged",
    "difference_by_dataset": "pruned − unpruned per dataset with corrected CIs",
    "size_against_error": "tree size against test error, both arms, per dataset",
    "factor_heatmaps": "mean difference over criterion × depth and rule × inner folds",
    "critical_difference": "average ranks with critical-difference bars",
    "alpha_by_rule": "chosen alpha and tree size by rule",
}


def build_figures(
    folds: pd.DataFrame, curves: pd.DataFrame, ranked: dict | None = None
) -> dict[str, Figure]:
    """Every summary figure of a study.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    curves : DataFrame
        The ``curves`` rows of one trial group, with a ``context`` attribute for the title.
    ranked : dict, optional
        The main family's ranking, when the caller has it already.

    Returns
    -------
    dict
        Figure name (see :data:`FIGURES`) -> Figure.
    """
    rows, _ = _main_family(folds)
    table = comparison(rows)
    ranked = ranked or _main_ranking(folds)
    configs = _top_configs(folds, ranked=ranked)
    return {
        "pruning_curves": pruning_curves(curves, curves.attrs.get("context", "")),
        "difference_by_dataset": difference_by_dataset(table, configs),
        "size_against_error": size_against_error(folds),
        "factor_heatmaps": factor_heatmaps(table),
        "critical_difference": critical_difference_diagram(ranked),
        "alpha_by_rule": alpha_by_rule(rows),
    }


def example_trial(folds: pd.DataFrame, ranked: dict | None = None) -> tuple[str, str]:
    """The trial whose curves the figures show: the best pruned configuration, first data set.

    Returns
    -------
    (str, str)
        Its ``trial_id``, and the title context (data set and configuration).
    """
    config = _top_configs(folds, 1, ranked)[0]
    rows, _ = _main_family(folds)
    dataset = sorted(rows["dataset"].unique())[0]
    match = rows[(rows["dataset"] == dataset) & (rows["arm"] == "pruned")]
    for name, value in config.levels().items():
        match = match[match[name].isna()] if value is None else match[match[name] == value]
    return match["trial_id"].iloc[0], f"{dataset}, {config.label()}"


def example_curves(store, folds: pd.DataFrame, ranked: dict | None = None) -> pd.DataFrame:
    """The curves of :func:`example_trial`, read through :mod:`prunebench.results`.

    Parameters
    ----------
    store : ResultStore
        The results database, open for reading.
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    ranked : dict, optional
        The main family's ranking, when the caller has it already.

    Returns
    -------
    DataFrame
        The curves, with the title context in ``attrs["context"]``.
    """
    trial_id, context = example_trial(folds, ranked)
    curves = trial_curves(store, trial_id)
    curves.attrs["context"] = context
    return curves


def write_figures(store, folds: pd.DataFrame, out: str | Path) -> list[Path]:
    """Draw every figure and save each as PNG and SVG in ``out``.

    Parameters
    ----------
    store : ResultStore
        The results database, open for reading (for the example curves).
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    out : str or Path
        The folder (created if missing).

    Returns
    -------
    list of Path
        The files written.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    ranked = _main_ranking(folds)
    for name, fig in build_figures(folds, example_curves(store, folds, ranked), ranked).items():
        for ext in ("png", "svg"):
            path = out / f"{name}.{ext}"
            fig.savefig(path, dpi=110 if ext == "png" else None)
            written.append(path)
    return written
