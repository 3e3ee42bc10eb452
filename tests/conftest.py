"""Shared fixtures: small conducted studies whose results databases several tests read."""

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


MIXED_STUDY = """\
name = "stats-unit"
seed = 1
datasets = ["iris", "wine", "breast_cancer", "diabetes"]
[outer]
repeats = 2
folds = 3
[factors]
max_depth = ["none", 3]
inner_folds = [3]
rule = ["min", "1se"]
[factors.classification]
criterion = ["gini", "entropy"]
prune_risk = ["error"]
[factors.regression]
criterion = ["squared_error"]
prune_risk = ["squared_error"]
"""


@pytest.fixture(scope="session")
def mixed_db(tmp_path_factory):
    """A results database of three classification data sets and one regression set."""
    path = tmp_path_factory.mktemp("mixed") / "r.sqlite"
    conduct(parse_study(MIXED_STUDY), path, progress=Progress(0, io.StringIO()))
    return path


@pytest.fixture(scope="session")
def mixed_folds(mixed_db):
    """The fold rows of :func:`mixed_db`."""
    from prunebench.results import load_folds
    from prunebench.store import ResultStore

    with ResultStore(mixed_db, readonly=True) as store:
        return load_folds(store)


SEARCH_STUDY = """\
name = "search-fixture"
seed = 4
datasets = ["iris", "wine", "breast_cancer"]
[outer]
repeats = 1
folds = 3
[search]
sampler = "random"
configurations = 8
[search.space]
criterion = ["gini", "entropy"]
max_depth = ["none", 2, 4]
min_samples_leaf = { low = 1, high = 20 }
se = { low = 0.0, high = 2.0 }
inner_folds = [3]
"""


@pytest.fixture(scope="session")
def search_db(tmp_path_factory):
    """A results database of a search: 8 random configurations on 3 data sets.

    Its leaf sizes and k-SE rules come from ranges (a level per configuration), and its
    configurations do not cross every pair of levels.
    """
    path = tmp_path_factory.mktemp("search") / "search.sqlite"
    conduct(parse_study(SEARCH_STUDY), path, progress=Progress(0, io.StringIO()))
    return path


@pytest.fixture(autouse=True)
def _registry_restored():
    """Data sets a test registers (from its own manifests) do not outlive that test."""
    from prunebench.datasets import _registry

    saved = dict(_registry._REGISTRY)
    yield
    _registry._REGISTRY.clear()
    _registry._REGISTRY.update(saved)
