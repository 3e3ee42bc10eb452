"""The factor-level figures of a study: heatmaps over pairs of factors, the
critical-difference diagram, each factor's effect, and contrasts in words.

Drawn like :mod:`prunebench.drawing`'s figures, on their own Agg canvas.
"""

from __future__ import annotations

import matplotlib.ticker
import numpy as np
import pandas as pd
import seaborn as sns
from matplotlib.figure import Figure

from .drawing import _figure
from .vocabulary import counted, higher_is_better

__all__ = [
    "MAX_CD_CONFIGS",
    "MAX_HEAT_LEVELS",
    "contrast_name",
    "critical_difference_diagram",
    "factor_effects_figure",
    "factor_heatmaps",
]

_HEAT_PAIRS = [
    ("criterion", "depth", "criterion × depth cap"),
    ("min_samples_leaf", "depth", "leaf size × depth cap"),
    ("rule", "inner_folds", "rule × inner folds"),
]


#: a heatmap panel is left out when one of its factors has more levels than this (a
#: search's leaf sizes and k-SE rules are drawn from ranges: a level per configuration)
MAX_HEAT_LEVELS = 12


def factor_heatmaps(table: pd.DataFrame) -> Figure | None:
    """Mean pruned − unpruned difference over pairs of factors, significance marked.

    Panels: criterion × depth cap, leaf size × depth cap, rule × inner folds. Each
    cell is the mean difference over data sets and the other factors; its note counts
    the rows (data set × configuration) where pruning was significantly better (▼) or
    worse (▲) after Holm's adjustment. A pair of levels no configuration has (a
    search's configurations do not cross every level) is a blank cell. A panel whose
    factor has more than :data:`MAX_HEAT_LEVELS` levels is left out, and the title says
    so. The colour scale is symmetric around 0 and fitted to the cells; its legend says
    which colour means pruning hurts.

    Parameters
    ----------
    table : DataFrame
        From :func:`prunebench.stats.comparison` (one metric, one task family).

    Returns
    -------
    Figure or None
        None when no panel can be drawn.
    """
    metric = table["metric"].iloc[0]
    table = table.assign(
        depth=table["max_depth"].map(lambda d: "no cap" if pd.isna(d) else str(int(d))),
        helps=table["verdict"] == "pruned better",
        hurts=table["verdict"] == "unpruned better",
    )
    sign = -1.0 if higher_is_better(metric) else 1.0  # > 0 after sign: pruning hurts
    grids, left_out = [], []
    for rows, cols, title in _HEAT_PAIRS:
        many = [f for f in (rows, cols) if table[f].nunique(dropna=False) > MAX_HEAT_LEVELS]
        if many:
            counts = " and ".join(
                f"{table[f].nunique(dropna=False)} levels of {_FACTOR_WORDS.get(f, f)}"
                for f in many
            )
            left_out.append(f"{title} left out ({counts})")
            continue
        grid = table.pivot_table(index=rows, columns=cols, values="diff", aggfunc="mean")
        # a pair of levels with no row is NaN: a blank cell, counted as none
        helps = table.pivot_table(index=rows, columns=cols, values="helps", aggfunc="sum")
        hurts = table.pivot_table(index=rows, columns=cols, values="hurts", aggfunc="sum")
        helps, hurts = (c.reindex_like(grid).fillna(0) for c in (helps, hurts))
        grids.append((grid, helps, hurts, rows, cols, title))
    if not grids:
        return None
    values = np.concatenate([g[0].to_numpy(float).ravel() for g in grids])
    span = float(np.nanmax(np.abs(values))) if np.isfinite(values).any() else 0.0
    span = span or 1.0
    fig = _figure(figsize=(14, 4.4), layout="constrained")
    axes = np.atleast_1d(fig.subplots(1, len(grids)))
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
    notes = "".join(f"\n{note}" for note in left_out)
    fig.suptitle(
        f"Where pruning changes {metric} (cell: mean over data sets and other factors; "
        f"▼ rows where pruning is significantly better, ▲ worse, Holm-adjusted){notes}",
        fontsize=11,
    )
    return fig


_FACTOR_WORDS = {
    "min_samples_leaf": "leaf size",
    "depth": "depth cap",
    "inner_folds": "inner folds",
}


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
    bars_note = "; red bars join configurations the test cannot tell apart"
    if len(ranked["datasets"]) < 2:
        verdict = "\none data set: the ranks are that data set's order, no test across data sets"
        bars_note = ""  # no test, so no bars
    fig.suptitle(
        f"{ranked['family']}: critical-difference diagram ({ranked['metric']}, "
        f"{counted(len(ranked['datasets']), 'data set')}; best {len(table)} of {k_all} "
        f"configurations{bars_note}){verdict}",
        fontsize=10,
    )
    fig.bars_drawn = bars  # for tests and readers of the figure object
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
