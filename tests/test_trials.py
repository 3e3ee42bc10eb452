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


def test_groups_partition_the_trials_by_everything_but_the_rule():
    study = parse_study(STUDY)
    trials, groups = study.trials(), study.groups()
    assert len(trials) == 2 * 2 * 2 * 2 * 2 and len(groups) == len(trials) // 2
    assert sorted(t.trial_id for g in groups for t in g.trials) == sorted(
        t.trial_id for t in trials
    )
    for g in groups:
        assert g.rules == ["min", "1se"]
        levels = {(t.dataset, t.criterion, t.max_depth, t.inner_folds) for t in g.trials}
        assert levels == {(g.dataset, g.criterion, g.max_depth, g.inner_folds)}
    assert len({t.trial_id for t in trials}) == len(trials)


def test_a_search_configuration_is_a_one_trial_group_with_the_sweeps_ids():
    study = parse_study(STUDY)
    swept = next(t for t in study.trials() if t.rule == "1se" and t.max_depth is None)
    group = study.trial_group(swept.dataset, swept.levels())
    assert group == TrialGroup.of([swept]) and group.trials[0].trial_id == swept.trial_id


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
    # a group stores one inner-CV curve per outer fold: one select_by and class weight each
    for group in named.groups():
        assert {(t.select_by, t.class_weight) for t in group.trials} == {
            (group.select_by, group.class_weight)
        }
        assert group.rules == ["min", "1se"]
