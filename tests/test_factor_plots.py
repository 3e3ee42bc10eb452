"""Tests of the factor-level figures (prunebench.factor_plots): their content."""

from __future__ import annotations

import numpy as np
import pytest

from prunebench import factor_plots, ranks, results, stats
from prunebench.store import ResultStore


@pytest.fixture(scope="module")
def folds(small_db):
    with ResultStore(small_db, readonly=True) as store:
        return results.load_folds(store)


def test_heatmaps_cells_scale_and_significance(folds):
    table = stats.comparison(folds)
    fig = factor_plots.factor_heatmaps(table)
    heat = [ax for ax in fig.axes if ax.get_title()]
    assert [ax.get_title() for ax in heat] == [
        "criterion × depth cap",
        "leaf size × depth cap",
        "rule × inner folds",
    ]
    # criterion x depth 2 x 2, leaf size (one level here) x depth 1 x 2, rule x folds 2 x 2
    assert [len(ax.texts) for ax in heat] == [4, 2, 4]
    # every cell counts its significant rows (helped / hurt)
    assert all("▼" in t.get_text() and "▲" in t.get_text() for ax in heat for t in ax.texts)
    # the scale is symmetric and fitted to the cells, not to the single rows
    cells = [
        table.assign(depth=table["max_depth"].astype(str))
        .pivot_table(index=r, columns=c, values="diff", aggfunc="mean")
        .to_numpy()
        for r, c in (("criterion", "depth"), ("min_samples_leaf", "depth"), ("rule", "inner_folds"))
    ]
    span = max(np.nanmax(np.abs(c)) for c in cells)
    lo, hi = heat[0].collections[0].get_clim()
    assert lo == pytest.approx(-span) and hi == pytest.approx(span)
    bar = [ax for ax in fig.axes if not ax.get_title()][0]
    assert "pruning hurts" in bar.get_ylabel()


def test_critical_difference_diagram_lists_every_configuration(folds):
    ranked = ranks.ranking(folds)[0]
    fig = factor_plots.critical_difference_diagram(ranked)
    ax = fig.axes[0]
    shown = min(factor_plots.MAX_CD_CONFIGS, len(ranked["table"]))  # up to 40 named
    assert shown == len(ranked["table"])
    assert sum("(" in t.get_text() for t in ax.texts) == shown
    assert fig.bars_drawn >= 1  # at least one group of configurations not told apart
    title = fig._suptitle.get_text()
    assert f"{len(ranked['datasets'])} data sets;" in title and "red bars join" in title


def test_critical_difference_diagram_of_one_data_set_names_no_test(folds):
    one = folds[folds["dataset"] == folds["dataset"].iloc[0]]
    ranked = ranks.ranking(one)[0]
    title = factor_plots.critical_difference_diagram(ranked)._suptitle.get_text()
    assert "1 data set;" in title and "1 data sets" not in title
    assert "red bars" not in title and "no test across data sets" in title


def test_factor_effects_figure_one_row_per_contrast_with_the_margin_band(folds):
    from prunebench.effects import factor_effects

    levels = {
        "criterion": ["gini", "entropy"],
        "max_depth": [None, 3],
        "inner_folds": [3, 4],
        "rule": ["min", "1se"],
    }
    effects = factor_effects(folds, levels)
    fig = factor_plots.factor_effects_figure(effects, "classification")
    left, right = fig.axes[:2]
    main = effects[effects["metric"] == "error"]
    assert len(left.get_yticklabels()) == len(main) == 5  # pruning + 4 factors
    (band,) = [p for p in left.patches]
    x0, x1 = band.get_x(), band.get_x() + band.get_width()
    assert (x0, x1) == pytest.approx((-0.01, 0.01))  # the default margin of error
    assert right.get_xscale() == "log"
    ratios = [t.get_text() for t in right.texts]
    sizes = effects[effects["metric"] == "n_leaves"]
    assert ratios == [f"×{r:.2f}" for r in sizes["ratio"]]


@pytest.fixture(scope="module")
def search_table(search_db):
    with ResultStore(search_db, readonly=True) as store:
        table = stats.comparison(results.load_folds(store))
    return table[table["metric"] == "error"]


def test_heatmaps_of_a_search_leave_pairs_no_configuration_has_blank(search_table):
    # 8 random configurations: most pairs of a leaf size and a depth cap have no row
    fig = factor_plots.factor_heatmaps(search_table)
    heat = [ax for ax in fig.axes if ax.get_title()]
    assert [ax.get_title() for ax in heat][:2] == ["criterion × depth cap", "leaf size × depth cap"]
    leaf = heat[1]
    pairs = search_table[["min_samples_leaf", "max_depth"]].drop_duplicates()
    assert len(leaf.texts) == len(pairs)  # a note in every filled cell, none in a blank one


def test_heatmaps_leave_out_a_panel_with_too_many_levels(search_table, monkeypatch):
    leaves = search_table["min_samples_leaf"].nunique()
    monkeypatch.setattr(factor_plots, "MAX_HEAT_LEVELS", leaves - 1)
    fig = factor_plots.factor_heatmaps(search_table)
    titles = [ax.get_title() for ax in fig.axes if ax.get_title()]
    assert titles == ["criterion × depth cap"]  # leaf sizes and rules: one per configuration
    note = f"leaf size × depth cap left out ({leaves} levels of leaf size)"
    assert note in fig._suptitle.get_text()
    monkeypatch.setattr(factor_plots, "MAX_HEAT_LEVELS", 1)
    assert factor_plots.factor_heatmaps(search_table) is None  # nothing left to draw
