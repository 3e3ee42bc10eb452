"""Tests of a study's trials and trial groups (prunebench.trials)."""

from __future__ import annotations

from prunebench.study import parse_study
from prunebench.trials import TrialGroup

STUDY = """\
name = "trials-unit"
seed = 4
datasets = ["iris", "wine"]
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3]
inner_folds = [3, 5]
rule = ["min", "1se"]
"""


def test_groups_partition_the_trials_by_the_factors_that_change_the_tree():
    study = parse_study(STUDY)
    trials, groups = study.trials(), study.groups()
    # 2 data sets x 2 criteria x 2 depths share trees; inner folds and rules do not
    assert len(trials) == 2 * 2 * 2 * 2 * 2 and len(groups) == 2 * 2 * 2
    assert sorted(t.trial_id for g in groups for t in g.trials) == sorted(
        t.trial_id for t in trials
    )
    for g in groups:
        assert g.rules == ["min", "1se"] and g.inner_folds_levels == [3, 5]
        growth = {(t.dataset, t.criterion, t.max_depth, t.min_samples_leaf) for t in g.trials}
        assert growth == {(g.dataset, g.criterion, g.max_depth, g.min_samples_leaf)}
        # the trials of a group share trees, and every (inner folds, risk) pair one curve
        assert len({t.group_id for t in g.trials}) == 2
    assert len({g.group_id for g in groups}) == len(groups)
    assert len({t.trial_id for t in trials}) == len(trials)


def test_grouping_follows_the_vocabularys_growth_flag(monkeypatch):
    # a factor marked as changing the tree splits the groups without any change here
    import dataclasses

    from prunebench import vocabulary

    inner = vocabulary.FACTORS["inner_folds"]
    monkeypatch.setitem(
        vocabulary.FACTORS, "inner_folds", dataclasses.replace(inner, changes_tree=True)
    )
    study = parse_study(STUDY)
    assert len(study.groups()) == 2 * 2 * 2 * 2
    assert all(len(g.inner_folds_levels) == 1 for g in study.groups())


def test_a_search_configuration_is_a_one_trial_group_with_the_sweeps_ids():
    study = parse_study(STUDY)
    swept = next(t for t in study.trials() if t.rule == "1se" and t.max_depth is None)
    group = study.trial_group(swept.dataset, swept.levels())
    assert group == TrialGroup.of([swept], study.growth_id(swept))
    assert group.trials[0].trial_id == swept.trial_id


def test_default_levels_keep_the_ids_and_other_levels_get_their_own():
    plain = parse_study(STUDY)
    named = parse_study(
        STUDY + 'select_by = ["error", "auc"]\nclass_weight = ["none", "balanced"]\n'
    )
    ids = {t.trial_id for t in plain.trials()}
    default = [t for t in named.trials() if (t.select_by, t.class_weight) == ("error", "none")]
    # naming the default levels changes no trial id (studies from before these factors)
    assert {t.trial_id for t in default} == ids
    assert {t.group_id for t in default} == {t.group_id for t in plain.trials()}
    assert len(named.trials()) == 4 * len(plain.trials())
    assert len({t.trial_id for t in named.trials()}) == len(named.trials())
    # a group shares the grown trees: one class weight (it changes the tree), every CV loss
    for group in named.groups():
        assert {t.class_weight for t in group.trials} == {group.class_weight}
        assert {t.select_by for t in group.trials} == {"error", "auc"}
        assert group.rules == ["min", "1se"]
    # a curve id (group_id, the curves table's key) names one CV loss and class weight
    curves: dict = {}
    for t in named.trials():
        curves.setdefault(t.group_id, set()).add((t.select_by, t.class_weight))
    assert all(len(levels) == 1 for levels in curves.values())
