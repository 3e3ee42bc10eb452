"""Searching for a robust default with Optuna instead of running the full grid.

A study with a ``[search]`` section lets an Optuna sampler (TPE by default;
random and grid too) propose configurations over a mixed space — criterion,
max_depth, min_samples_leaf, the k of the k-SE rule as a float, inner folds,
pruning risk.  Each configuration is evaluated on every data set of the study
as ordinary trials in the results database, so every other command works on
them.

**Objective: mean relative loss of the pruned tree.**  On each data set the
pruned arm's mean test loss is divided by the loss of predicting without the
features — the majority class's error rate for classification, the variance of
y for regression (so the ratio is 1 - R^2) — and the objective is the mean of
these ratios over data sets (lower is better).  It is scale-free across data
sets, unlike raw error, and, unlike a mean rank or a regret against the best
configuration so far, it does not change as the search goes on, which the
samplers assume.  Its 95% interval combines the corrected resampled t standard
errors of the data sets (normal approximation).

**Early stopping.**  After each data set (or each batch of ``--workers`` data
sets) the running mean is reported to Optuna; a median pruner stops a
configuration that is clearly worse than the earlier ones.  The interface calls
this *early stopping* so it is not confused with tree pruning; its trials on the
data sets already evaluated stay in the database, and the data sets it did not
reach are never recorded: a configuration's trials are registered batch by
batch, as they are about to run, so a search that has ended leaves no trial
``pending``.

**Resuming.**  Optuna keeps its own SQLite storage in a separate file beside the
results database (``RESULTS.sqlite.optuna``), never in the results file.  After
a kill, the configuration that was running is proposed again first, and its
data sets that finished before the kill are skipped (the results database has
them), so no finished configuration is evaluated twice.  The trials the kill
left ``pending`` are removed when the search resumes (the configuration registers
them again as it reaches them), and Optuna's record of the interrupted
configuration (which it can only end as failed) is marked :data:`INTERRUPTED`
and not counted as a failure.
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np

from .results import pruned_losses
from .stats import corrected_ttest
from .vocabulary import CLASSIFICATION, FACTORS, family_of

__all__ = ["INTERRUPTED", "relative_losses", "run_search", "search_storage_path"]

#: the user attribute that marks an Optuna trial a kill or Ctrl-C interrupted (ended as
#: FAIL on resume, proposed again, and not counted as a failed configuration)
INTERRUPTED = "interrupted"


def search_storage_path(database: str | Path) -> Path:
    """Optuna's storage file for a results database: beside it, never inside it."""
    database = Path(database)
    return database.with_name(database.name + ".optuna")


def _reference_loss(data) -> float:
    if family_of(data.task) == CLASSIFICATION:
        _, counts = np.unique(data.y, return_counts=True)
        return float(1 - counts.max() / counts.sum())
    return float(np.var(data.y))


def relative_losses(store, study, trial_id: str) -> dict:
    """Per-fold relative loss of a finished trial's pruned arm, with its corrected t.

    Returns
    -------
    dict
        ``mean`` and ``se`` of the trial's relative loss (see the module notes).
    """
    dataset, folds = pruned_losses(store, trial_id)
    reference = _reference_loss(study.datasets[dataset]) or 1.0
    losses = folds["loss"].to_numpy(dtype=float) / reference
    t = corrected_ttest(losses, folds["n_train"], folds["n_test"])
    return {"mean": t.mean, "se": t.se}


def _suggest(trial, space: dict) -> dict:
    levels = {}
    for name, spec in space.items():
        kind = spec[0]
        if kind == "choices":
            value = trial.suggest_categorical(name, spec[1])
        elif kind == "int":
            value = trial.suggest_int(name, spec[1], spec[2], log=spec[3])
        else:
            value = trial.suggest_float(name, spec[1], spec[2], step=0.01)
        levels[name] = value
    k = float(levels.pop("se", 1.0))
    levels["rule"] = f"{round(k, 2):g}se"
    depth = levels.get("max_depth", "none")
    levels["max_depth"] = None if depth == "none" else int(depth)
    return levels


def _complete_levels(study, levels: dict) -> dict:
    """The searched levels, with the family's default for every factor not searched."""
    family = study.task_of(next(iter(study.datasets)))
    defaults = {name: factor.default[family] for name, factor in FACTORS.items()}
    defaults["max_depth"] = None if defaults["max_depth"] == "none" else defaults["max_depth"]
    return {**defaults, **levels}


def _grid_space(space: dict) -> dict:
    return {name: list(spec[1]) for name, spec in space.items()}


def run_search(study, store, runner, database: str | Path) -> dict:
    """Run (or resume) a study's search; every evaluation goes through ``runner``.

    Parameters
    ----------
    study : Study
        A study with a ``search``.
    store : ResultStore
        The results database, held for writing.
    runner : GroupRunner
        Evaluates and stores trial groups.
    database : str or Path
        The results database's path, to place Optuna's storage beside it.

    Returns
    -------
    dict
        ``configurations`` (finished), ``stopped_early``, ``failed`` (configurations a
        trial group failed in; not one a kill or Ctrl-C interrupted), ``best`` (levels),
        ``best_value`` with ``ci_low``/``ci_high``, and ``storage``.
    """
    import optuna

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    storage_path = search_storage_path(database)
    storage = optuna.storages.RDBStorage(f"sqlite:///{storage_path}")
    search, budget = _optuna_study(study, storage)
    # a kill leaves the trials of the data sets the running configuration had not finished
    # as pending (and earlier versions registered every data set of a configuration that
    # early stopping then ended): none of them is owed, the re-proposed configuration
    # registers its own again as it runs them
    store.remove_pending(study.study_id)
    states = optuna.trial.TrialState
    ended = (states.COMPLETE, states.PRUNED)
    while len(search.get_trials(deepcopy=False, states=ended)) < budget:
        trial = search.ask()
        state, value, se = _evaluate_configuration(study, store, runner, trial)
        if state == states.COMPLETE:
            trial.set_user_attr("se", se)
            search.tell(trial, value)
            continue
        search.tell(trial, state=state)
        failures = [t for t in search.trials if not t.user_attrs.get(INTERRUPTED)]
        if (
            state == states.FAIL
            and len(failures) >= 3
            and all(t.state == states.FAIL for t in failures[-3:])
        ):
            break  # three failures in a row: something is wrong beyond one configuration
    return _search_summary(study, search, storage_path)


def _optuna_study(study, storage):
    """Optuna's study for a search (created or resumed) and its budget of configurations."""
    import optuna

    spec = study.search
    grid = None
    if spec.sampler == "grid":
        # every grid point is queued once, in a seeded order; Optuna's GridSampler stops
        # the study from inside tell(), which ask-and-tell use does not allow
        grid = _grid_space(spec.space)
        sampler = optuna.samplers.RandomSampler(seed=spec.seed)
        budget = min(spec.configurations, math.prod(len(v) for v in grid.values()))
    else:
        make = (
            optuna.samplers.TPESampler if spec.sampler == "tpe" else optuna.samplers.RandomSampler
        )
        sampler = make(seed=spec.seed)
        budget = spec.configurations
    pruner = (
        optuna.pruners.MedianPruner(n_startup_trials=3, n_warmup_steps=0)
        if spec.early_stopping
        else optuna.pruners.NopPruner()
    )
    search = optuna.create_study(
        study_name=study.name,
        storage=storage,
        sampler=sampler,
        pruner=pruner,
        direction="minimize",
        load_if_exists=True,
    )
    if grid is not None and not search.trials:
        points = list(itertools.product(*grid.values()))
        for i in np.random.default_rng(spec.seed).permutation(len(points)):
            search.enqueue_trial(dict(zip(grid, points[i], strict=True)))
    running = optuna.trial.TrialState.RUNNING
    for stale in search.get_trials(deepcopy=False, states=(running,)):
        # a kill interrupted it: propose the same configuration again, first.  Optuna can
        # only end it as FAIL; the mark keeps it out of the failures the summary counts
        search.enqueue_trial(stale.params, skip_if_exists=False)
        storage.set_trial_user_attr(stale._trial_id, INTERRUPTED, True)
        storage.set_trial_state_values(stale._trial_id, optuna.trial.TrialState.FAIL)
    return search, budget


def _evaluate_configuration(study, store, runner, trial) -> tuple:
    """Run one proposed configuration on the study's data sets, batch by batch.

    Returns
    -------
    (TrialState, float or None, float or None)
        COMPLETE with the mean relative loss and its standard error; PRUNED when early
        stopping ended it; FAIL when a trial group failed.
    """
    import optuna

    states = optuna.trial.TrialState
    levels = _complete_levels(study, _suggest(trial, study.search.space))
    groups = [study.trial_group(key, levels) for key in study.datasets]
    statuses = store.statuses(study.study_id)
    batch = max(runner.workers, 1)
    scores = []
    for start in range(0, len(groups), batch):
        chunk = groups[start : start + batch]
        todo = [g for g in chunk if statuses.get(g.trials[0].trial_id) != "done"]
        # registered only as they are about to run: the data sets early stopping skips
        # are never recorded, so nothing stays pending once the search has ended
        store.add_trials(study, [t for g in todo for t in g.trials])
        outcomes = runner.run(todo)
        if any(o.error is not None for o in outcomes):
            return states.FAIL, None, None
        scores += [relative_losses(store, study, g.trials[0].trial_id) for g in chunk]
        trial.report(float(np.mean([s["mean"] for s in scores])), step=len(scores))
        if len(scores) < len(groups) and trial.should_prune():
            return states.PRUNED, None, None
    value = float(np.mean([s["mean"] for s in scores]))
    se = float(np.sqrt(np.sum([s["se"] ** 2 for s in scores])) / len(scores))
    return states.COMPLETE, value, se


def _search_summary(study, search, storage_path: Path) -> dict:
    """Counts of the search's configurations and its best one (see :func:`run_search`)."""
    import optuna

    states = optuna.trial.TrialState

    def count(*wanted) -> int:
        return len(search.get_trials(deepcopy=False, states=wanted))

    result = {
        "configurations": count(states.COMPLETE, states.PRUNED),
        "stopped_early": count(states.PRUNED),
        "failed": sum(
            not t.user_attrs.get(INTERRUPTED)
            for t in search.get_trials(deepcopy=False, states=(states.FAIL,))
        ),
        "storage": str(storage_path),
    }
    complete = search.get_trials(deepcopy=False, states=(states.COMPLETE,))
    if complete:
        best = min(complete, key=lambda t: t.value)
        se = best.user_attrs.get("se", float("nan"))
        result.update(
            best=_complete_levels(
                study, _suggest(optuna.trial.FixedTrial(best.params), study.search.space)
            ),
            best_value=best.value,
            ci_low=best.value - 1.96 * se,
            ci_high=best.value + 1.96 * se,
        )
    return result
