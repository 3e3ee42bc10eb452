"""Shared fixtures: a small conducted study whose results database several tests read."""

from __future__ import annotations

import io

import pytest

from prunebench.execute import Progress, conduct
from prunebench.study import parse_study

SMALL_STUDY = """\
name = "fixture-study"
description = "small fixture for figures and reports"
seed = 3
datasets = ["iris", "wine", "breast_cancer"]
[outer]
repeats = 2
folds = 3
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3]
inner_folds = [3, 4]
rule = ["min", "1se"]
"""


@pytest.fixture(scope="session")
def small_db(tmp_path_factory):
    """A results database of a 3-dataset, 16-configuration study."""
    path = tmp_path_factory.mktemp("fixture") / "fixture.sqlite"
    conduct(parse_study(SMALL_STUDY), path, progress=Progress(0, io.StringIO()))
    return path
