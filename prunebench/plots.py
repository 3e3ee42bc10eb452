"""Summary figures of a study put together: which figures each task family gets, the
example curves they show, the inputs they decide from, and saving them as PNG and SVG.

The figures themselves are drawn in :mod:`prunebench.drawing` (curves, differences,
size against error, alpha by rule) and :mod:`prunebench.factor_plots` (the factor-level
figures); :func:`write_figures` saves them all.
"""

from __future__ import annotations

import contextlib
import tomllib
from pathlib import Path

import pandas as pd
from matplotlib.figure import Figure

from .drawing import (
    _family_rows,
    alpha_by_rule,
    difference_by_dataset,
    pruning_curves,
    size_against_error,
)
from .effects import EFFECT_COLUMNS, factor_effects
from .exceptions import PrunebenchError
from .factor_plots import (
    MAX_CD_CONFIGS,
    critical_difference_diagram,
    factor_effects_figure,
    factor_heatmaps,
)
from .ranks import ranking
from .recommend import recommend
from .results import resolve_study, seen_levels, trial_curves
from .snippets import long_label, own_data, with_study
from .stats import comparison
from .store import ResultStore
from .vocabulary import (
    FACTORS,
    FAMILIES,
    Configuration,
    family_of,
)

__all__ = [
    "FIGURES",
    "decision_inputs",
    "families",
    "family_figures",
    "own_data",
    "study_levels",
    "write_figures",
]

#: at most this many configurations get their own colour in per-configuration figures
MAX_CONFIGS = 8


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
    heatmaps = factor_heatmaps(table)
    if heatmaps is not None:  # None: every panel has too many levels (a search's ranges)
        out["factor_heatmaps"] = heatmaps
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
    # every figure is drawn before the folder is made, and a failure while saving removes
    # what this call wrote (and the folder it made): a failed call leaves nothing behind
    decided = decision_inputs(store, folds, study)
    drawn = family_figures(store, folds, decided)
    made = [p for p in (out, *out.parents) if not p.exists()]
    written = []
    try:
        out.mkdir(parents=True, exist_ok=True)
        for family, figs in drawn.items():
            for name, fig in figs.items():
                for ext in ("png", "svg"):
                    path = out / f"{family}_{name}.{ext}"
                    written.append(path)
                    fig.savefig(path, dpi=110 if ext == "png" else None)
    except BaseException:
        for path in written:
            path.unlink(missing_ok=True)
        for folder in made:  # deepest first
            with contextlib.suppress(OSError):
                folder.rmdir()
        raise
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
    overrides the shared one); a factor the file does not name has the levels the folds
    hold (:func:`prunebench.results.seen_levels`: one in a sweep, the smallest first in
    a search).

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
                levels[factor] = seen_levels(rows[factor])
        out[family] = levels
    return out


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
    # the study's costs and smoothing, so the report's estimator is the configuration chosen
    recs = with_study(recs, info["study_text"])
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
