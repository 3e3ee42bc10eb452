"""Tests of the message shape and value helpers of study files (prunebench.study_checker)."""

from __future__ import annotations

import pytest

from prunebench.study import StudyError
from prunebench.study_checker import _Checker, _is_int, _levels, _number

TEXT = """\
name = "lines"
seed = 1

[outer]
repeats = 2
folds = 3

[[datasets]]
name = "iris"

[factors.classification]
rule = ["min"]
"""


def test_line_of_names_the_line_of_the_key_in_its_own_table():
    check = _Checker(TEXT, "s.toml")
    assert check.line_of("seed") == 2
    assert check.line_of("outer.folds") == 6
    assert check.line_of("datasets.name") == 9
    assert check.line_of("factors.classification.rule") == 12
    # a key not written as `key =` falls back to its table's header
    assert check.line_of("factors.classification") == 11
    assert check.line_of("outer") == 4
    # a key of another table is not found in this one
    assert check.line_of("factors.rule") is None


def test_fail_gives_one_line_with_the_file_line_and_key():
    check = _Checker(TEXT, "s.toml")
    err = check.fail("outer.folds", "must be an integer >= 2")
    assert isinstance(err, StudyError)
    assert str(err) == "s.toml:6: key 'outer.folds': must be an integer >= 2"
    # the line may be another key's: the one that made the mistake
    assert str(check.fail("max_tree_fits", "too many", line_key="outer.repeats")) == (
        "s.toml:5: key 'max_tree_fits': too many"
    )
    # without a line, the file alone
    assert str(check.fail("decision", "x")) == "s.toml: key 'decision': x"


def test_value_helpers():
    assert _is_int(3) and not _is_int(True) and not _is_int(3.0)
    assert _number(0.5) and _number(2) and not _number(True) and not _number(float("inf"))
    assert not _number("1")
    check = _Checker(TEXT, "s.toml")
    assert _levels(check, "outer.folds", 3) == [3]
    with pytest.raises(StudyError, match="needs at least one level"):
        _levels(check, "outer.folds", [])
    with pytest.raises(StudyError, match=r"^s.toml:6: key 'outer.folds': has a repeated level"):
        _levels(check, "outer.folds", [3, 3])
