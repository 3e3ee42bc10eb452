"""Tests of the figures drawn one at a time (prunebench.drawing): their content, not files."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from prunebench import drawing, plots, results, stats
from prunebench.store import ResultStore


@pytest.fixture(scope="module")
def data(small_db):
    with ResultStore(small_db, readonly=True) as store:
        folds = results.load_folds(store)
        curves = plots.example_curves(store, folds)
    return folds, curves


def test_pruning_curves_panels_band_and_markers(data):
    _, curves = data
    fig = drawing.pruning_curves(curves, "ctx")
    assert len(fig.axes) == 4  # two panels, each with a tree-size axis
    first = fig.axes[0]
    # symmetric log: alpha = 0 is drawn at 0, not at a made-up small positive value
    assert first.get_xscale() == "symlog"
    assert first.get_xlim()[0] == 0
    one_fold = curves[(curves["repeat"] == 0) & (curves["fold"] == 0)]
    step = first.lines[0]
    assert len(step.get_xdata()) == len(one_fold)  # one point per candidate alpha
    labels = [line.get_label() for line in first.lines]
    assert any(lb.startswith("min rule") for lb in labels)
    assert any(lb.startswith("1-SE rule") for lb in labels)
    assert step.get_xdata()[0] == 0  # the path starts at alpha = 0, drawn at 0
    assert len(first.collections) == 1  # the ±1 SE band
    assert "tree size" in fig.axes[2].get_ylabel() or "tree size" in fig.axes[3].get_ylabel()
    # the loss axis is the first panel's (the second shares it); its step is the fold's curve
    assert [ax for ax in fig.axes if ax.get_ylabel().startswith("inner-CV")] == [first]
    np.testing.assert_allclose(step.get_ydata(), one_fold.sort_values("alpha")["mean"])


def test_difference_plot_has_one_interval_per_dataset_and_configuration(data):
    folds, _ = data
    table = stats.comparison(folds)
    configs = plots._top_configs(folds, 4)
    fig = drawing.difference_by_dataset(table, configs)
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


def test_pruning_curves_tell_min_and_1se_apart_when_they_coincide():
    # a curve rising from its first point: both rules choose alpha = 0 (hand-made curve)
    alpha = np.array([0.0, 0.001, 0.01, 0.1])
    curves = pd.DataFrame(
        {
            "repeat": 0,
            "fold": 0,
            "alpha": alpha,
            "n_leaves": [40, 20, 5, 1],
            "mean": [0.10, 0.20, 0.30, 0.50],
            "se": [0.01, 0.01, 0.01, 0.01],
        }
    )
    fig = drawing.pruning_curves(curves)
    ax = fig.axes[0]
    marks = {line.get_label(): line for line in ax.lines if len(line.get_xdata()) == 1}
    (min_label,) = [k for k in marks if k.startswith("min rule")]
    (se_label,) = [k for k in marks if k.startswith("1-SE rule")]
    assert "(= 1-SE choice)" in min_label and "(= min choice)" in se_label
    m, s = marks[min_label], marks[se_label]
    assert list(m.get_xdata()) == list(s.get_xdata()) == [0.0]
    # told apart: a hollow ring larger than the filled diamond inside it
    assert m.get_marker() != s.get_marker() and m.get_markersize() > s.get_markersize()
    assert m.get_markerfacecolor() == "none"
    # the size axis is labelled at both ends of its range (40 and 1 leaves)
    size_ticks = fig.axes[2].yaxis.get_majorticklocs()
    assert min(size_ticks) == 1 and max(size_ticks) == 40


def _brute_frontier(points):
    """Points no other point beats on both size and loss (ties in size: the lower loss)."""
    out = set()
    for i, (n, loss) in enumerate(points):
        dominated = any(
            (n2 <= n and l2 < loss) or (n2 < n and l2 <= loss)
            for j, (n2, l2) in enumerate(points)
            if j != i
        )
        if not dominated:
            out.add((n, loss))
    return out


def test_size_against_error_points_frontier_and_recommended(data):
    folds, _ = data
    rec = {
        "criterion": "entropy",
        "max_depth": None,
        "min_samples_leaf": 1,
        "inner_folds": 4,
        "rule": "1se",
        "prune_risk": "error",
    }
    fig = drawing.size_against_error(folds, recommended=rec)
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == 3
    for ax in visible:
        unpruned, pruned = ax.collections[0], ax.collections[1]
        # every pruned configuration and each distinct unpruned tree (criterion x depth)
        assert len(pruned.get_offsets()) == 16 and len(unpruned.get_offsets()) == 4
        points = [tuple(p) for c in (unpruned, pruned) for p in c.get_offsets()]
        (line,) = [ln for ln in ax.lines if ln.get_label() == "size-error frontier"]
        drawn = set(zip(line.get_xdata(), line.get_ydata(), strict=True))
        assert drawn == _brute_frontier(points)
        star = ax.collections[-1]
        assert star.get_label() == "recommended" and len(star.get_offsets()) == 1
        assert tuple(star.get_offsets()[0]) in points


def test_alpha_by_rule_has_a_box_per_rule(data):
    folds, _ = data
    fig = drawing.alpha_by_rule(folds)
    assert len(fig.axes) == 2
    for ax in fig.axes:
        assert [t.get_text() for t in ax.get_xticklabels()] == ["1se", "min"]
    assert fig.axes[0].get_yscale() == "symlog" and fig.axes[0].get_ylim()[0] == 0
    assert fig.axes[1].get_yscale() == "log"
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
    fig = drawing.alpha_by_rule(data[0])
    assert isinstance(fig.canvas, FigureCanvasAgg) and plt.get_fignums() == before
