"""Summary figures of a study, drawn with matplotlib and seaborn.

Every function returns a :class:`matplotlib.figure.Figure` with a title,
labelled axes and units; :func:`write_figures` saves them all as PNG and SVG.
Colours come from one qualitative palette of our own choosing (seaborn's
"colorblind"), configurations keep their colour across figures.
"""

from __future__ import annotations

import tomllib
from dataclasses import fields
from pathlib import Path

import matplotlib.ticker
import numpy as np
import pandas as pd
import seaborn as sns
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from .effects import EFFECT_COLUMNS, factor_effects
from .exceptions import PrunebenchError
from .ranks import ranking
from .recommend import config_frame, recommend
from .results import resolve_study, trial_curves
from .selection import MinimumRule, StandardErrorRule
from .snippets import long_label
from .stats import comparison
from .store import ResultStore
from .vocabulary import (
    CLASSIFICATION,
    FACTORS,
    FAMILIES,
    Configuration,
    default_metric,
    family_of,
    higher_is_better,
)

__all__ = [
    "FIGURES",
    "alpha_by_rule",
    "critical_difference_diagram",
    "decision_inputs",
    "difference_by_dataset",
    "contrast_name",
    "factor_effects_figure",
    "factor_heatmaps",
    "families",
    "family_figures",
    "own_data",
    "pruning_curves",
    "size_against_error",
    "study_levels",
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


def _family_rows(folds: pd.DataFrame, family: str | None = None) -> tuple[pd.DataFrame, str]:
    """One task family's rows (classification when there are any and none is named); its metric."""
    families = folds["task"].map(family_of)
    if family is None:
        family = CLASSIFICATION if (families == CLASSIFICATION).any() else families.iloc[0]
    return folds[families == family], default_metric(family)


def _main_family(folds: pd.DataFrame) -> tuple[pd.DataFrame, str]:
    """The classification rows if there are any, else the regression rows; and its metric."""
    return _family_rows(folds)


def families(folds: pd.DataFrame) -> list[str]:
    """The task families present in the folds, in reporting order."""
    present = set(folds["task"].map(family_of))
    return [f for f in FAMILIES if f in present]


def _main_ranking(folds: pd.DataFrame, family: str | None = None) -> dict:
    """The ranking of one task family (the main one, see :func:`_main_family`, by default)."""
    rows, _ = _family_rows(folds, family)
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


def _size_axis(axis, values) -> None:
    """A log tree-size axis labelled over its range: plain ticks plus the smallest and largest."""
    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values) & (values > 0)]
    if not values.size:
        return
    lo, hi = values.min(), values.max()
    if hi <= lo:
        hi = lo * 1.5
    if axis is axis.axes.yaxis:
        axis.axes.set_ylim(lo / 1.15, hi * 1.15)
    ticks = [
        t
        for t in (1, 2, 3, 5, 10, 20, 30, 50, 100, 200, 300, 500, 1000, 2000, 5000)
        if lo * 1.2 < t < hi / 1.2
    ]
    if len(ticks) > 5:
        ticks = ticks[:: int(np.ceil(len(ticks) / 5))]
    axis.set_major_locator(matplotlib.ticker.FixedLocator([lo, *ticks, hi]))
    axis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:.3g}"))
    axis.set_minor_locator(matplotlib.ticker.NullLocator())


def _alpha_axis(axis, positive_min: float, top: float) -> None:
    """A symmetric-log alpha axis: 0 sits at 0 (labelled "0"), positive alphas on a log scale.

    alpha = 0 is a real choice (no pruning), not a small positive value, so it is not
    drawn at an arbitrary floor of a log axis; the linear stretch below the smallest
    positive alpha keeps the "0" label clear of the first power of ten.
    """
    thresh = positive_min if positive_min > 0 else 1e-4
    ax = axis.axes
    if axis is ax.xaxis:
        ax.set_xscale("symlog", linthresh=thresh, linscale=1.0)
        ax.set_xlim(left=0)
    else:
        ax.set_yscale("symlog", linthresh=thresh, linscale=1.0)
        ax.set_ylim(bottom=0)
    top = max(top, thresh * 10)
    exponents = range(int(np.floor(np.log10(thresh))), int(np.ceil(np.log10(top))) + 1)
    ticks = [m * 10.0**e for e in exponents for m in (1, 2, 5)]
    powers = [t for t in ticks if thresh * 1.8 < t <= top * 1.05]
    if len(powers) > 4:  # 1, 2, 5 ticks would crowd: powers of ten only
        powers = [t for t in powers if f"{t:g}".lstrip("0.").startswith("1")]
    axis.set_major_locator(matplotlib.ticker.FixedLocator([0.0, *powers]))
    axis.set_major_formatter(
        matplotlib.ticker.FuncFormatter(lambda v, _: "0" if v == 0 else f"{v:g}")
    )
    axis.set_minor_locator(matplotlib.ticker.NullLocator())


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
        and ``1se`` choices (a hollow ring and a filled diamond, told apart when they
        fall on the same alpha), and the tree size on a second axis labelled over its
        range. The alpha axis is symmetric-log, so alpha = 0 sits at 0.
    """
    first = curves[(curves["repeat"] == curves["repeat"].min())]
    first = first[first["fold"] == first["fold"].min()].sort_values("alpha")
    positive = curves.loc[curves["alpha"] > 0, "alpha"]
    floor = positive.min() if len(positive) else 1e-4
    top = max(curves["alpha"].max(), floor * 10)
    grid = np.r_[0.0, np.geomspace(floor, top, 200)]
    averaged = []
    for _, fold in curves.groupby(["repeat", "fold"]):
        fold = fold.sort_values("alpha")
        a = fold["alpha"].to_numpy()
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
            first["alpha"].to_numpy(),
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
        same = i_min == i_1se
        ax.plot(
            alpha[i_min],
            mean[i_min],
            "o",
            ms=13,
            mfc="none",
            mec="#c0392b",
            mew=2.2,
            label="min rule" + (" (= 1-SE choice)" if same else ""),
        )
        ax.plot(
            alpha[i_1se],
            mean[i_1se],
            "D",
            color="#e67e22",
            ms=6,
            label="1-SE rule" + (" (= min choice)" if same else ""),
        )
        _alpha_axis(ax.xaxis, floor, top)
        ax.set_xlabel("alpha (cost-complexity; symmetric log scale, alpha = 0 at 0)")
        ax.set_title(label, fontsize=10)
        size = ax.twinx()
        size.step(alpha, leaves, where="post", color="#7f7f7f", lw=1, ls="--", label="leaves")
        size.set_ylabel("tree size (leaves, log scale)", color="#555555")
        size.set_yscale("log")
        _size_axis(size.yaxis, leaves)
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


def _frontier(leaves: np.ndarray, loss: np.ndarray) -> np.ndarray:
    """Indices of the size-error frontier: no other point is both smaller and no worse."""
    order = np.lexsort((loss, leaves))
    keep, best = [], np.inf
    for i in order:
        if loss[i] < best - 1e-12:
            keep.append(i)
            best = loss[i]
    return np.array(keep, dtype=int)


def _same_config(levels: tuple, chosen: tuple) -> bool:
    """Whether a frame's configuration key is the chosen one; ``select_by`` and
    ``class_weight`` left unset (None) in the chosen key match any level (a study that
    does not sweep them stores their defaults)."""
    optional = {
        i for i, f in enumerate(fields(Configuration)) if f.name in ("select_by", "class_weight")
    }
    return all(
        a == b or (i in optional and b is None)
        for i, (a, b) in enumerate(zip(levels, chosen, strict=True))
    )


def size_against_error(
    folds: pd.DataFrame,
    metric: str | None = None,
    family: str | None = None,
    recommended: dict | None = None,
) -> Figure:
    """Mean tree size against mean test loss per configuration, one panel per data set.

    Each point is one configuration averaged over outer folds: every pruned
    configuration, and each distinct unpruned tree. The size-error frontier (the
    configurations no other beats on both) is joined by a line, and the recommended
    configuration is marked with a star.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    metric : str, optional
        Default: the family's (error or MSE; MSE divided by the data set's mean
        unpruned MSE, as the decision rule reads it).
    family : str, optional
        Default: classification when present.
    recommended : dict, optional
        The recommended configuration (factor -> level).
    """
    rows, default = _family_rows(folds, family)
    family = family_of(rows["task"].iloc[0])
    metric = metric or default
    frame = config_frame(rows, family, metric)
    means = frame.groupby(["dataset", "config"], as_index=False, sort=False)[
        ["loss", "n_leaves"]
    ].mean()
    means["pruned"] = [c[4] != "unpruned" for c in means["config"]]
    chosen = None
    if recommended is not None:
        chosen = Configuration.of(recommended).key()
    datasets = sorted(means["dataset"].unique())
    cols = min(3, len(datasets))
    nrows = int(np.ceil(len(datasets) / cols))
    fig = _figure(figsize=(max(4.4 * cols, 10), 3.5 * nrows + 0.6), layout="constrained")
    axes = fig.subplots(nrows, cols, squeeze=False)
    relative = metric in ("mse", "mae")
    ylabel = f"test {metric}" + (" ÷ mean unpruned" if relative else "")
    for ax, dataset in zip(axes.flat, datasets, strict=False):
        part = means[means["dataset"] == dataset].reset_index(drop=True)
        for pruned, colour, name in (
            (False, _ARM_COLOURS["unpruned"], "unpruned tree"),
            (True, _ARM_COLOURS["pruned"], "pruned configuration"),
        ):
            sub = part[part["pruned"] == pruned]
            ax.scatter(
                sub["n_leaves"],
                sub["loss"],
                s=20,
                color=colour,
                alpha=0.75,
                label=name,
                edgecolors="none",
            )
        front = _frontier(part["n_leaves"].to_numpy(float), part["loss"].to_numpy(float))
        ax.plot(
            part["n_leaves"].to_numpy()[front],
            part["loss"].to_numpy()[front],
            "-",
            color="#444444",
            lw=1,
            zorder=1,
            label="size-error frontier",
        )
        ax.scatter(
            part["n_leaves"].to_numpy()[front],
            part["loss"].to_numpy()[front],
            s=46,
            facecolors="none",
            edgecolors="#444444",
            lw=0.9,
        )
        if chosen is not None:
            # a CV loss or class weight the recommendation leaves unset is the default level
            hit = part[part["config"].map(lambda c, k=chosen: _same_config(c, k))]
            ax.scatter(
                hit["n_leaves"],
                hit["loss"],
                marker="*",
                s=260,
                color="#d4a017",
                edgecolors="black",
                lw=0.8,
                zorder=5,
                label="recommended",
            )
        ax.set_xscale("log")
        _plain_log(ax.xaxis)
        ax.set_title(dataset, fontsize=10)
        ax.set_xlabel("leaves (mean over outer folds, log scale)")
        ax.set_ylabel(ylabel)
    for ax in axes.flat[len(datasets) :]:
        ax.set_visible(False)
    handles, labels = axes.flat[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", fontsize=8, ncols=4, frameon=False)
    fig.suptitle(f"{family}: tree size against test {metric}, one point per configuration")
    return fig


_HEAT_PAIRS = [
    ("criterion", "depth", "criterion × depth cap"),
    ("min_samples_leaf", "depth", "leaf size × depth cap"),
    ("rule", "inner_folds", "rule × inner folds"),
]


def factor_heatmaps(table: pd.DataFrame) -> Figure:
    """Mean pruned − unpruned difference over pairs of factors, significance marked.

    Panels: criterion × depth cap, leaf size × depth cap, rule × inner folds. Each
    cell is the mean difference over data sets and the other factors; its note counts
    the rows (data set × configuration) where pruning was significantly better (▼) or
    worse (▲) after Holm's adjustment. The colour scale is symmetric around 0 and
    fitted to the cells; its legend says which colour means pruning hurts.

    Parameters
    ----------
    table : DataFrame
        From :func:`prunebench.stats.comparison` (one metric, one task family).
    """
    metric = table["metric"].iloc[0]
    table = table.assign(
        depth=table["max_depth"].map(lambda d: "no cap" if pd.isna(d) else str(int(d))),
        helps=table["verdict"] == "pruned better",
        hurts=table["verdict"] == "unpruned better",
    )
    sign = -1.0 if higher_is_better(metric) else 1.0  # > 0 after sign: pruning hurts
    grids = []
    for rows, cols, title in _HEAT_PAIRS:
        grid = table.pivot_table(index=rows, columns=cols, values="diff", aggfunc="mean")
        helps = table.pivot_table(index=rows, columns=cols, values="helps", aggfunc="sum")
        hurts = table.pivot_table(index=rows, columns=cols, values="hurts", aggfunc="sum")
        grids.append((grid, helps, hurts, rows, cols, title))
    values = np.concatenate([g[0].to_numpy(float).ravel() for g in grids])
    span = float(np.nanmax(np.abs(values))) if np.isfinite(values).any() else 0.0
    span = span or 1.0
    fig = _figure(figsize=(14, 4.4), layout="constrained")
    axes = fig.subplots(1, len(grids))
    for ax, (grid, helps, hurts, rows, cols, title) in zip(axes, grids, strict=True):
        notes = np.empty(grid.shape, dtype=object)
        for i in range(grid.shape[0]):
            for j in range(grid.shape[1]):
                v = grid.iat[i, j]
                text = "—" if pd.isna(v) else _signed(v, metric)
                notes[i, j] = f"{text}\n▼{int(helps.iat[i, j])} ▲{int(hurts.iat[i, j])}"
        sns.heatmap(
            sign * grid,
            ax=ax,
            annot=notes,
            fmt="",
            cmap="vlag",
            center=0,
            vmin=-span,
            vmax=span,
            cbar=False,
            annot_kws={"fontsize": 9},
        )
        ax.set_title(title, fontsize=10)
        ax.set_xlabel(cols.replace("_", " ").replace("depth", "depth cap"))
        ax.set_ylabel(rows.replace("_", " ").replace("min samples leaf", "leaf size (rows)"))
    mappable = axes[0].collections[0]
    bar = fig.colorbar(mappable, ax=list(axes), shrink=0.9, pad=0.01)
    bar.set_label(f"pruned − unpruned {metric}\nred: pruning hurts · blue: pruning helps")
    fig.suptitle(
        f"Where pruning changes {metric} (cell: mean over data sets and other factors; "
        "▼ rows where pruning is significantly better, ▲ worse, Holm-adjusted)",
        fontsize=11,
    )
    return fig


def _signed(value: float, metric: str) -> str:
    """A signed difference with the metric's precision and no "-0.000"."""
    if metric in ("mse", "mae"):
        text = f"{value:+.0f}" if abs(value) >= 100 else f"{value:+.3g}"
    else:
        text = f"{value:+.3f}"
    if text.lstrip("+-").strip("0.") == "":
        text = text.lstrip("+-")  # no "-0.000"
    return text.replace("-", "−")


#: the critical-difference diagram names at most this many configurations; with more,
#: the factor-effects figure answers the question instead
MAX_CD_CONFIGS = 40


def critical_difference_diagram(ranked: dict, max_configs: int = MAX_CD_CONFIGS) -> Figure:
    """Average ranks on an axis; bars join configurations within the critical difference.

    Parameters
    ----------
    ranked : dict
        One family's result of :func:`prunebench.ranks.ranking`.
    max_configs : int, default=40
        The best configurations shown (the rest are named in the title count).
    """
    table = ranked["table"].sort_values("mean_rank").head(max_configs).reset_index(drop=True)
    cd = ranked["cd"]
    ranks = table["mean_rank"].to_numpy()
    k_all = len(ranked["table"])
    fig = _figure(figsize=(12, 1.9 + 0.26 * len(table)), layout="constrained")
    ax = fig.subplots()
    lo, hi = float(np.floor(ranks.min())), float(np.ceil(ranks.max()))
    hi = max(hi, lo + 1)
    ax.set_xlim(lo - 0.3, hi + 0.3)
    ax.set_ylim(len(table) + 0.5, -2.3)
    ax.spines[["left", "right", "bottom"]].set_visible(False)
    ax.xaxis.set_ticks_position("top")
    ax.set_yticks([])
    ax.set_xlabel("average rank across data sets (1 = best)")
    ax.xaxis.set_label_position("top")
    for i, rank in enumerate(ranks):
        y = i + 0.5
        ax.plot([rank, rank], [-0.2, y], color="#999999", lw=0.6)
        ax.plot([rank, hi + 0.3], [y, y], color="#999999", lw=0.6)
        ax.plot(rank, y, "o", color="#1f6f8b", ms=3)
        ax.text(
            hi + 0.4,
            y,
            f"{table['config'][i].label()}  ({rank:.2f})",
            va="center",
            fontsize=7.5 if len(table) > 20 else 8.5,
        )
    # cliques: maximal runs of configurations whose ranks differ by at most the CD
    bars = 0
    if np.isfinite(cd):
        for i in range(len(ranks)):
            j = np.searchsorted(ranks, ranks[i] + cd, side="right") - 1
            if j > i and (
                i == 0 or np.searchsorted(ranks, ranks[i - 1] + cd, side="right") - 1 < j
            ):
                y = -0.35 - 0.2 * (bars % 5)
                ax.plot([ranks[i], ranks[j]], [y, y], color="#c0392b", lw=2.5)
                bars += 1
        ax.plot([lo, min(lo + cd, hi + 0.3)], [-1.45, -1.45], color="black", lw=2)
        ax.text(
            lo, -1.6, f"critical difference = {cd:.2f} ranks", ha="left", va="bottom", fontsize=8
        )
    friedman = ranked.get("friedman") or {}
    p = friedman.get("p_ff")
    verdict = (
        f"\nthe Friedman test cannot separate the configurations (p = {p:.2g}): the order is "
        "not evidence"
        if p is not None and p >= 0.05
        else ""
    )
    if len(ranked["datasets"]) < 2:
        verdict = "\none data set: the ranks are that data set's order, no test across data sets"
    fig.suptitle(
        f"{ranked['family']}: critical-difference diagram ({ranked['metric']}, "
        f"{len(ranked['datasets'])} data sets; best {len(table)} of {k_all} configurations; "
        f"red bars join configurations the test cannot tell apart){verdict}",
        fontsize=10,
    )
    fig.bars_drawn = bars  # for tests and readers of the figure object
    return fig


def alpha_by_rule(folds: pd.DataFrame) -> Figure:
    """Distributions of the chosen alpha and of the pruned tree size, by rule.

    The alpha axis is symmetric-log: alpha = 0 (no pruning chosen) sits at 0.
    """
    pruned = folds[folds["arm"] == "pruned"].copy()
    rules = sorted(pruned["rule"].unique())
    positive = pruned.loc[pruned["alpha"] > 0, "alpha"]
    floor = positive.min() if len(positive) else 1e-4
    fig = _figure(figsize=(11, 4.2), layout="constrained")
    axes = fig.subplots(1, 2)
    palette = dict(zip(rules, sns.color_palette(_PALETTE, len(rules)), strict=True))
    panels = [
        ("alpha", "chosen alpha (symmetric log scale; 0 at 0)", "Chosen alpha"),
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
        ax.set_ylabel(label)
        ax.set_title(title, fontsize=10)
    _alpha_axis(axes[0].yaxis, floor, float(pruned["alpha"].max()))
    axes[1].set_yscale("log")
    _size_axis(axes[1].yaxis, pruned["n_leaves"])
    for ax in axes:
        ax.set_xlabel("alpha rule")
    fig.suptitle("Chosen alpha and tree size by rule (all outer folds and configurations)")
    return fig


_LEVEL_WORDS = {None: "no cap"}


def _level_text(factor: str, value) -> str:
    if factor == "max_depth":
        return "no cap" if value is None or pd.isna(value) else f"depth {int(value)}"
    if factor == "min_samples_leaf":
        return f"leaf ≥ {int(value)}"
    if factor == "inner_folds":
        return f"{int(value)}-fold"
    return str(value)


def contrast_name(row) -> str:
    """A contrast in words: "rule: 1se vs min", "pruning: pruned vs unpruned"."""
    factor = row["factor"]
    name = factor.replace("min_samples_leaf", "leaf size").replace("_", " ")
    return f"{name}: {_level_text(factor, row['level'])} vs {_level_text(factor, row['reference'])}"


def factor_effects_figure(effects: pd.DataFrame, family: str) -> Figure:
    """One row per factor contrast: the effect on the metric and on tree size side by side.

    Left: the random-effects estimate on the primary metric with its 95% interval
    (thick) and the prediction interval for a new data set (thin), the margin of
    practical equivalence drawn as a band around 0. Right: the leaf-count ratio with
    its interval, on a log axis (1 = no change).

    Parameters
    ----------
    effects : DataFrame
        From :func:`prunebench.effects.factor_effects`.
    family : str
    """
    part = effects[effects["family"] == family]
    size = part[part["metric"] == "n_leaves"]
    main = part[part["metric"] != "n_leaves"].reset_index(drop=True)
    metric = main["metric"].iloc[0]
    margin = float(main["margin"].iloc[0])
    names = [contrast_name(r) for _, r in main.iterrows()]
    fig = _figure(figsize=(12, 1.6 + 0.45 * len(main)), layout="constrained")
    left, right = fig.subplots(1, 2, sharey=True, width_ratios=(3, 2))
    colours = {
        "better": "#1d6b3a",
        "worse": "#9b2c2c",
        "equivalent": "#1f6f8b",
        "undecided": "#777777",
    }
    relative = metric in ("mse", "mae")
    left.axvspan(
        -margin,
        margin,
        color="#c8e6c9",
        alpha=0.6,
        lw=0,
        label=f"margin ±{margin:g}" + (" of the unpruned loss" if relative else ""),
    )
    left.axvline(0, color="black", lw=0.8)
    for i, r in main.iterrows():
        c = colours.get(r["verdict"], "#777777")
        if np.isfinite(r["pi_low"]):
            left.plot([r["pi_low"], r["pi_high"]], [i, i], color=c, lw=1, alpha=0.6)
        left.plot([r["ci_low"], r["ci_high"]], [i, i], color=c, lw=4, solid_capstyle="butt")
        left.plot(r["estimate"], i, "o", color="white", mec=c, mew=1.5, ms=7)
        s = size[(size["factor"] == r["factor"]) & (size["level"].astype(str) == str(r["level"]))]
        if len(s):
            s = s.iloc[0]
            right.plot(
                [s["ratio_low"], s["ratio_high"]],
                [i, i],
                color="#555555",
                lw=4,
                solid_capstyle="butt",
            )
            right.plot(s["ratio"], i, "o", color="white", mec="#555555", mew=1.5, ms=7)
            right.text(
                1.02,
                i,
                f"×{s['ratio']:.2f}",
                transform=right.get_yaxis_transform(),
                va="center",
                fontsize=8,
            )
    words = {"equivalent": "no practical difference", "undecided": "cannot tell"}
    left.set_yticks(
        range(len(main)),
        [f"{n}  [{words.get(v, v)}]" for n, v in zip(names, main["verdict"], strict=True)],
    )
    left.invert_yaxis()
    unit = " ÷ unpruned" if relative else ""
    left.set_xlabel(f"level − reference, {metric}{unit} (< 0: level better)")
    left.set_title("metric: 95% interval (thick), prediction interval (thin)", fontsize=10)
    left.legend(fontsize=8, loc="lower right")
    right.axvline(1, color="black", lw=0.8)
    right.set_xscale("log")
    lo = np.nanmin(np.r_[size["ratio_low"].to_numpy(float), 0.8]) if len(size) else 0.8
    hi = np.nanmax(np.r_[size["ratio_high"].to_numpy(float), 1.25]) if len(size) else 1.25
    right.set_xlim(lo / 1.1, hi * 1.1)
    right.xaxis.set_major_locator(matplotlib.ticker.LogLocator(subs=(1.0, 2.0, 5.0)))
    right.xaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"×{v:g}"))
    right.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
    right.set_xlabel("leaves, level ÷ reference (log scale)")
    right.set_title("tree size: 95% interval", fontsize=10)
    fig.suptitle(f"{family}: effect of each factor across data sets", fontsize=11)
    return fig


#: file stem -> what it shows
FIGURES = {
    "factor_effects": "each factor's effect on the metric and on tree size, margin as a band",
    "pruning_curves": "inner-CV curve against alpha for the recommended configuration",
    "size_against_error": "tree size against test loss per configuration, frontier and the "
    "recommended configuration marked",
    "difference_by_dataset": "pruned − unpruned per data set with corrected CIs",
    "factor_heatmaps": "mean difference over criterion × depth, leaf size × depth and "
    "rule × inner folds",
    "critical_difference": "average ranks with critical-difference bars",
    "alpha_by_rule": "chosen alpha and tree size by rule",
}


def build_figures(
    folds: pd.DataFrame,
    curves: pd.DataFrame,
    ranked: dict | None = None,
    *,
    family: str | None = None,
    effects: pd.DataFrame | None = None,
    recommended: dict | None = None,
) -> dict[str, Figure]:
    """Every summary figure of one task family.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    curves : DataFrame
        The ``curves`` rows of one trial group, with a ``context`` attribute for the title.
    ranked : dict, optional
        The family's ranking, when the caller has it already.
    family : str, optional
        Default: classification when present.
    effects : DataFrame, optional
        From :func:`prunebench.effects.factor_effects`; adds the factor-effects figure.
    recommended : dict, optional
        The recommended configuration, marked in the size-error figure.

    Returns
    -------
    dict
        Figure name (see :data:`FIGURES`) -> Figure. The critical-difference diagram is
        left out above :data:`MAX_CD_CONFIGS` configurations (the factor figure answers).
    """
    rows, _ = _family_rows(folds, family)
    family = family_of(rows["task"].iloc[0])
    table = comparison(rows)
    ranked = ranked or _main_ranking(folds, family)
    configs = _top_configs(rows, ranked=ranked)
    out = {}
    if effects is not None and (effects["family"] == family).any():
        out["factor_effects"] = factor_effects_figure(effects, family)
    out["pruning_curves"] = pruning_curves(curves, curves.attrs.get("context", ""))
    out["size_against_error"] = size_against_error(rows, family=family, recommended=recommended)
    out["difference_by_dataset"] = difference_by_dataset(table, configs)
    out["factor_heatmaps"] = factor_heatmaps(table)
    if len(ranked["table"]) <= MAX_CD_CONFIGS:
        out["critical_difference"] = critical_difference_diagram(ranked)
    out["alpha_by_rule"] = alpha_by_rule(rows)
    return out


def example_trial(
    folds: pd.DataFrame,
    ranked: dict | None = None,
    family: str | None = None,
    config: dict | None = None,
) -> tuple[str, str]:
    """The trial whose curves the figures show.

    The recommended configuration (or, when it is an unpruned tree, the best-ranked
    pruned configuration with the same growth levels; with no ``config``, the
    best-ranked pruned configuration), on the data set where its pruning saves the
    most leaves.

    Returns
    -------
    (str, str)
        Its ``trial_id``, and the title context (data set and configuration).
    """
    rows, _ = _family_rows(folds, family)
    pruned_rows = rows[rows["arm"] == "pruned"]
    chosen = None
    if config is not None:
        chosen = Configuration.of(config)
        if not chosen.pruned:
            table = (ranked or _main_ranking(folds, family))["table"]
            same = [c for c in table["config"] if c.pruned and c.unpruned() == chosen]
            chosen = same[0] if same else None
    if chosen is None:
        chosen = _top_configs(rows, 1, ranked or _main_ranking(folds, family))[0]
    match = pruned_rows
    for name, value in chosen.levels().items():
        match = match[match[name].isna()] if value is None else match[match[name] == value]
    if match.empty:
        match = pruned_rows
    trials = rows[rows["trial_id"].isin(match["trial_id"])]
    saved = (
        trials.pivot_table(index=["trial_id", "dataset"], columns="arm", values="n_leaves")
        .pipe(lambda w: w["unpruned"] - w["pruned"])
        .sort_values(ascending=False, kind="stable")
    )
    trial_id, dataset = saved.index[0]
    return trial_id, f"{dataset}, {long_label(chosen)}"


def example_curves(
    store,
    folds: pd.DataFrame,
    ranked: dict | None = None,
    family: str | None = None,
    config: dict | None = None,
) -> pd.DataFrame:
    """The curves of :func:`example_trial`, read through :mod:`prunebench.results`.

    Parameters
    ----------
    store : ResultStore
        The results database, open for reading.
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    ranked : dict, optional
        The family's ranking, when the caller has it already.
    family, config : optional
        As :func:`example_trial`.

    Returns
    -------
    DataFrame
        The curves, with the title context in ``attrs["context"]``.
    """
    trial_id, context = example_trial(folds, ranked, family, config)
    curves = trial_curves(store, trial_id)
    curves.attrs["context"] = context
    return curves


def write_figures(
    store, folds: pd.DataFrame, out: str | Path, study: str | None = None
) -> list[Path]:
    """Draw every figure of every task family and save each as PNG and SVG in ``out``.

    Files are named ``<family>_<figure>.png`` / ``.svg``.

    Parameters
    ----------
    store : ResultStore
        The results database, open for reading (for the example curves and the levels).
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    out : str or Path
        The folder (created if missing).
    study : str, optional
        The study name, when the database holds several.

    Returns
    -------
    list of Path
        The files written.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    decided = decision_inputs(store, folds, study)
    written = []
    for family, figs in family_figures(store, folds, decided).items():
        for name, fig in figs.items():
            for ext in ("png", "svg"):
                path = out / f"{family}_{name}.{ext}"
                fig.savefig(path, dpi=110 if ext == "png" else None)
                written.append(path)
    return written


def family_figures(store, folds: pd.DataFrame, decided: dict) -> dict[str, dict[str, Figure]]:
    """Every figure of every task family present: family -> figure name -> Figure.

    Parameters
    ----------
    store : ResultStore
        Open for reading (the example curves).
    folds : DataFrame
    decided : dict
        ``effects`` (DataFrame) and ``recommendations`` (list from
        :func:`prunebench.recommend.recommend`), as :func:`decision_inputs`.
    """
    recs = {r["family"]: r for r in decided["recommendations"]}
    out = {}
    for family in families(folds):
        ranked = _main_ranking(folds, family)
        config = recs[family]["config"] if family in recs else None
        curves = example_curves(store, folds, ranked, family, config)
        out[family] = build_figures(
            folds,
            curves,
            ranked,
            family=family,
            effects=decided["effects"],
            recommended=config,
        )
    return out


# ---- what the figures and the report decide from -------------------------------------


def study_levels(study_text: str, folds: pd.DataFrame) -> dict:
    """Family -> factor -> levels in the study file's order (the first is the reference).

    Read from the stored study text's ``[factors]`` section (a family's own table
    overrides the shared one); a factor the file does not name has the one level the
    folds hold.

    Parameters
    ----------
    study_text : str
        The study file as stored with the study.
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.

    Returns
    -------
    dict
    """
    doc = tomllib.loads(study_text).get("factors", {})
    shared = {k: v for k, v in doc.items() if not isinstance(v, dict)}
    out = {}
    for family in families(folds):
        own = doc.get(family, {})
        rows = folds[folds["task"].map(family_of) == family]
        levels = {}
        for factor in FACTORS:
            listed = own.get(factor, shared.get(factor))
            if isinstance(listed, list) and listed:
                levels[factor] = listed
            else:
                seen = [None if pd.isna(v) else v for v in rows[factor].astype(object)]
                levels[factor] = list(dict.fromkeys(seen))
        out[family] = levels
    return out


def own_data(study_text: str) -> bool:
    """Whether the study's data sets are the team's own (described by manifests)."""
    datasets = tomllib.loads(study_text).get("datasets", [])
    return bool(datasets) and all(isinstance(d, dict) for d in datasets)


def _family_counts(store: ResultStore, study_id: str) -> dict[str, dict]:
    rows = store.query(
        "SELECT d.task, t.status, COUNT(*) AS n FROM trials t JOIN datasets d USING "
        "(dataset_id) WHERE t.study_id = ? GROUP BY d.task, t.status",
        [study_id],
    )
    out: dict[str, dict] = {}
    for r in rows:
        counts = out.setdefault(family_of(r["task"]), {"done": 0, "failed": 0, "pending": 0})
        counts[r["status"]] = counts.get(r["status"], 0) + r["n"]
    return out


def decision_inputs(
    store: ResultStore,
    folds: pd.DataFrame,
    study: str | None = None,
    metric: str | None = None,
    margin: float | None = None,
    alpha: float = 0.05,
) -> dict:
    """The factor effects and the recommendations of a study's finished folds.

    Parameters
    ----------
    store : ResultStore
        Open for reading (the stored study text and the trial counts).
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    study : str, optional
    metric, margin, alpha
        As :func:`prunebench.effects.factor_effects`; defaults from the vocabulary.

    Returns
    -------
    dict
        ``levels``, ``effects`` (DataFrame), ``recommendations`` (list of dict, each
        with ``unpruned_leaves`` added), ``problems`` (family -> why the rule cannot
        answer it yet), ``family_counts`` (family -> trial counts) and ``own_data``.
    """
    info = resolve_study(store, study)
    levels = study_levels(info["study_text"], folds)
    counts = _family_counts(store, info["study_id"])
    effects, recs, problems = [], [], {}
    # one family at a time, so a family the rule cannot answer yet (a partly finished
    # study) does not hide the other's decision
    for family in families(folds):
        rows = folds[folds["task"].map(family_of) == family]
        try:
            effects.append(factor_effects(rows, levels, metric, margin, alpha))
            recs += recommend(rows, metric, margin, alpha, trials=counts)
        except PrunebenchError as err:
            problems[family] = str(err)
    for r in recs:
        r["unpruned_leaves"] = _unpruned_leaves(folds, r["family"], r["config"])
    return {
        "levels": levels,
        "effects": (
            pd.concat(effects, ignore_index=True)
            if effects
            else pd.DataFrame(columns=EFFECT_COLUMNS)
        ),
        "recommendations": recs,
        "problems": problems,
        "family_counts": counts,
        "own_data": own_data(info["study_text"]),
    }


def _unpruned_leaves(folds: pd.DataFrame, family: str, config: dict) -> float:
    """Mean over data sets of the unpruned tree's leaves with the config's growth levels."""
    rows = folds[(folds["task"].map(family_of) == family) & (folds["arm"] == "unpruned")]
    c = Configuration.of(config)
    for name in ("criterion", "max_depth", "min_samples_leaf"):
        value = getattr(c, name)
        rows = rows[rows[name].isna()] if value is None else rows[rows[name] == value]
    if rows.empty:
        return float("nan")
    return float(rows.groupby("dataset")["n_leaves"].mean().mean())
