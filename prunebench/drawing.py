"""The study's figures drawn one at a time: pruning curves, pruned − unpruned by data set,
size against error and alpha by rule, with their axis helpers.

Every function returns a :class:`matplotlib.figure.Figure` with a title,
labelled axes and units, drawn on its own Agg canvas (no pyplot). Colours come from
one qualitative palette of our own choosing (seaborn's "colorblind"), configurations
keep their colour across figures. :mod:`prunebench.plots` puts them together.
"""

from __future__ import annotations

from dataclasses import fields

import matplotlib.ticker
import numpy as np
import pandas as pd
import seaborn as sns
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from .effects import _norm
from .recommend import config_frame
from .selection import MinimumRule, StandardErrorRule
from .vocabulary import (
    CLASSIFICATION,
    Configuration,
    default_metric,
    family_of,
    higher_is_better,
)

__all__ = [
    "alpha_by_rule",
    "difference_by_dataset",
    "pruning_curves",
    "size_against_error",
]

_PALETTE = "colorblind"
_ARM_COLOURS = {"unpruned": "#8c6d31", "pruned": "#1f6f8b"}


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
    fig = _figure(figsize=(12, 5.2), layout="constrained")
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
        # below the panel: inside it the legend covered the curve's start on some data sets
        ax.legend(
            handles[0] + extra[0],
            handles[1] + extra[1],
            fontsize=8,
            loc="upper center",
            bbox_to_anchor=(0.5, -0.16),
            ncols=3,
            frameon=False,
        )
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
        # spelled as the frame's keys are (no class weighting as None, not "none")
        chosen = tuple(_norm(v) for v in Configuration.of(recommended).key())
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
