"""Tests of the summary figures (prunebench.plots): their content, not only their files."""

from __future__ import annotations

import numpy as np
import pytest
from click.testing import CliRunner

from prunebench import plots, ranks, results, stats
from prunebench.cli import main
from prunebench.store import ResultStore


@pytest.fixture(scope="module")
def data(small_db):
    with ResultStore(small_db, readonly=True) as store:
        folds = results.load_folds(store)
        curves = plots.example_curves(store, folds)
    return folds, curves


def test_pruning_curves_panels_band_and_markers(data):
    _, curves = data
    fig = plots.pruning_curves(curves, "ctx")
    assert len(fig.axes) == 4  # two panels, each with a tree-size axis
    first = fig.axes[0]
    assert first.get_xscale() == "log"
    one_fold = curves[(curves["repeat"] == 0) & (curves["fold"] == 0)]
    step = first.lines[0]
    assert len(step.get_xdata()) == len(one_fold)  # one point per candidate alpha
    labels = [line.get_label() for line in first.lines]
    assert {"min rule", "1-SE rule"} <= set(labels)
    assert len(first.collections) == 1  # the ±1 SE band
    assert "tree size" in fig.axes[2].get_ylabel() or "tree size" in fig.axes[3].get_ylabel()
    # the loss axis is the first panel's (the second shares it); its step is the fold's curve
    assert [ax for ax in fig.axes if ax.get_ylabel().startswith("inner-CV")] == [first]
    np.testing.assert_allclose(step.get_ydata(), one_fold.sort_values("alpha")["mean"])


def test_difference_plot_has_one_interval_per_dataset_and_configuration(data):
    folds, _ = data
    table = stats.comparison(folds)
    configs = plots._top_configs(folds, 4)
    fig = plots.difference_by_dataset(table, configs)
    ax = fig.axes[0]
    intervals = [
        line
        for line in ax.lines
        if len(line.get_xdata()) == 2 and line.get_ydata()[0] == line.get_ydata()[1]
    ]
    assert len(intervals) == 3 * 4
    zero = [line for line in ax.lines if list(line.get_xdata()) == [0, 0]]
    assert zero  # the zero line
    assert [t.get_text() for t in ax.get_yticklabels()] == ["breast_cancer", "iris", "wine"]
    assert sum("pruned better" in t.get_text() for t in ax.texts) == 3  # verdicts


def test_size_against_error_facets_and_points(data):
    folds, _ = data
    fig = plots.size_against_error(folds)
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == 3
    for ax in visible:
        points = sum(len(c.get_offsets()) for c in ax.collections)
        assert points == 16 * 2  # every configuration, both arms


def test_heatmaps_cells(data):
    folds, _ = data
    fig = plots.factor_heatmaps(stats.comparison(folds))
    heat = [ax for ax in fig.axes if ax.get_title()]
    assert len(heat) == 2
    # criterion x depth: 2 x 2 cells; rule x inner folds: 2 x 2 cells, each annotated
    assert all(len(ax.texts) == 4 for ax in heat)


def test_critical_difference_diagram_lists_every_configuration(data):
    folds, _ = data
    ranked = ranks.ranking(folds)[0]
    fig = plots.critical_difference_diagram(ranked)
    ax = fig.axes[0]
    shown = min(15, len(ranked["table"]))  # the diagram names the best 15
    assert sum("(" in t.get_text() for t in ax.texts) == shown
    assert fig.bars_drawn >= 1  # at least one group of configurations not told apart


def test_alpha_by_rule_has_a_box_per_rule(data):
    folds, _ = data
    fig = plots.alpha_by_rule(folds)
    assert len(fig.axes) == 2
    for ax in fig.axes:
        assert [t.get_text() for t in ax.get_xticklabels()] == ["1se", "min"]
        assert ax.get_yscale() == "log"
    # the 1-SE rule never picks a smaller alpha than min on the same curve
    pruned = folds[folds.arm == "pruned"]
    keys = ["dataset", "criterion", "max_depth", "inner_folds", "repeat", "fold"]
    wide = pruned.pivot_table(index=keys, columns="rule", values="alpha")
    assert np.all(wide["1se"] >= wide["min"] - 1e-15)


def test_figures_leave_no_pyplot_state(data):
    # the figures draw on their own canvas: pyplot (if anything imported it) holds none
    import matplotlib.pyplot as plt
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    before = plt.get_fignums()
    fig = plots.alpha_by_rule(data[0])
    assert isinstance(fig.canvas, FigureCanvasAgg) and plt.get_fignums() == before


def test_figures_command_writes_png_and_svg(small_db, tmp_path):
    result = CliRunner().invoke(
        main, ["figures", "--db", str(small_db), "--out", str(tmp_path / "figs")]
    )
    assert result.exit_code == 0, result.output
    files = sorted(p.name for p in (tmp_path / "figs").iterdir())
    assert files == sorted(f"{n}.{e}" for n in plots.FIGURES for e in ("png", "svg"))
    assert all((tmp_path / "figs" / f).stat().st_size > 5000 for f in files)
