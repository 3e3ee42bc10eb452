"""Tests of the package's lazy re-exports (prunebench/__init__.py)."""

from __future__ import annotations

import subprocess
import sys

import pytest

import prunebench

HEAVY = ("sklearn", "scipy", "pandas", "matplotlib", "optuna", "seaborn")


def test_the_command_line_imports_none_of_the_heavy_libraries():
    # a fresh interpreter: what `prunebench --help` pays for at start
    code = (
        "import sys, prunebench, prunebench.cli\n"
        f"print(' '.join(m for m in {HEAVY!r} if m in sys.modules))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_every_public_name_resolves_and_comes_from_its_module():
    from prunebench import estimators, pruning, selection, tables

    assert prunebench.PrunedTreeClassifier is estimators.PrunedTreeClassifier
    assert prunebench.PRUNE_RISKS is pruning.PRUNE_RISKS
    assert prunebench.open_results is tables.open_results
    assert prunebench.StandardErrorRule is selection.StandardErrorRule
    for name in prunebench.__all__:
        assert getattr(prunebench, name) is not None
    assert set(prunebench.__all__) <= set(dir(prunebench))
    assert prunebench.__version__ == "0.2.0"


def test_an_unknown_name_is_an_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'PrunedForest'"):
        prunebench.PrunedForest  # noqa: B018
    with pytest.raises(ImportError):
        from prunebench import PrunedForest  # noqa: F401
