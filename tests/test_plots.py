"""Tests of the summary figures (prunebench.plots): their content, not only their files."""

from __future__ import annotations

import numpy as np
import pandas as pd
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
    fig = plots.pruning_curves(curves)
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
    fig = plots.size_against_error(folds, recommended=rec)
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


def test_heatmaps_cells_scale_and_significance(data):
    folds, _ = data
    table = stats.comparison(folds)
    fig = plots.factor_heatmaps(table)
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


def test_critical_difference_diagram_lists_every_configuration(data):
    folds, _ = data
    ranked = ranks.ranking(folds)[0]
    fig = plots.critical_difference_diagram(ranked)
    ax = fig.axes[0]
    shown = min(plots.MAX_CD_CONFIGS, len(ranked["table"]))  # up to 40 named
    assert shown == len(ranked["table"])
    assert sum("(" in t.get_text() for t in ax.texts) == shown
    assert fig.bars_drawn >= 1  # at least one group of configurations not told apart


def test_alpha_by_rule_has_a_box_per_rule(data):
    folds, _ = data
    fig = plots.alpha_by_rule(folds)
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


def test_factor_effects_figure_one_row_per_contrast_with_the_margin_band(data):
    from prunebench.effects import factor_effects

    folds, _ = data
    levels = {
        "criterion": ["gini", "entropy"],
        "max_depth": [None, 3],
        "inner_folds": [3, 4],
        "rule": ["min", "1se"],
    }
    effects = factor_effects(folds, levels)
    fig = plots.factor_effects_figure(effects, "classification")
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
    # one classification family here, 16 configurations + 4 unpruned: every figure drawn
    expected = [f"classification_{n}.{e}" for n in plots.FIGURES for e in ("png", "svg")]
    assert files == sorted(expected)
    assert all((tmp_path / "figs" / f).stat().st_size > 5000 for f in files)


def test_above_the_limit_the_factor_figure_replaces_the_cd_diagram(data, monkeypatch):
    from prunebench.effects import factor_effects

    folds, curves = data
    levels = {"criterion": ["gini", "entropy"], "max_depth": [None, 3], "inner_folds": [3, 4]}
    levels["rule"] = ["min", "1se"]
    effects = factor_effects(folds, levels)
    ranked = plots._main_ranking(folds)
    both = plots.build_figures(folds, curves, ranked, effects=effects)
    assert "critical_difference" in both and "factor_effects" in both  # 20 configurations
    monkeypatch.setattr(plots, "MAX_CD_CONFIGS", len(ranked["table"]) - 1)
    fewer = plots.build_figures(folds, curves, ranked, effects=effects)
    assert "critical_difference" not in fewer and "factor_effects" in fewer
