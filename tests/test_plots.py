"""Tests of the figures put together (prunebench.plots): every figure of a family, saved."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from prunebench import plots, results
from prunebench.cli import main
from prunebench.store import ResultStore


@pytest.fixture(scope="module")
def data(small_db):
    with ResultStore(small_db, readonly=True) as store:
        folds = results.load_folds(store)
        curves = plots.example_curves(store, folds)
    return folds, curves


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


def test_figures_of_a_search(search_db, tmp_path):
    # a search's configurations do not cross every level, and its leaf sizes and rules
    # come from ranges: the heatmaps leave blank cells and too-many-level panels out
    out = tmp_path / "figs"
    result = CliRunner().invoke(main, ["figures", "--db", str(search_db), "--out", str(out)])
    assert result.exit_code == 0, result.output
    names = {p.name for p in out.iterdir()}
    assert {"classification_factor_heatmaps.png", "classification_pruning_curves.svg"} <= names


@pytest.mark.parametrize("fails", ["drawing", "saving"])
def test_figures_that_fail_leave_nothing_behind(small_db, tmp_path, monkeypatch, fails):
    from matplotlib.figure import Figure

    if fails == "drawing":

        def broken(*args, **kwargs):
            raise ValueError("cannot draw")

        monkeypatch.setattr(plots, "family_figures", broken)
    else:
        real = Figure.savefig

        def full_disk(fig, path, *args, **kwargs):
            calls.append(path)
            if len(calls) == 3:
                raise OSError(28, "No space left on device")
            return real(fig, path, *args, **kwargs)

        monkeypatch.setattr(Figure, "savefig", full_disk)
    kept = tmp_path / "kept"
    kept.mkdir()
    (kept / "mine.txt").write_text("mine")
    for out in (tmp_path / "new" / "figs", kept):
        calls = []
        with ResultStore(small_db, readonly=True) as store:
            with pytest.raises((ValueError, OSError)):
                plots.write_figures(store, results.load_folds(store), out)
    # the folders it made are gone; a folder that was there keeps only what it held
    assert not (tmp_path / "new").exists()
    assert [p.name for p in kept.iterdir()] == ["mine.txt"]
