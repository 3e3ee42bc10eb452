"""Tests of what the commands share (prunebench.cli_options)."""

from __future__ import annotations

import pytest

from prunebench.cli import main
from prunebench.cli_options import _as_flags


@pytest.mark.parametrize(
    "message, shown",
    [
        (
            "r.sqlite holds several studies (a, b); pick one with study=...",
            "pick one with --study ...",
        ),
        ("The 'fmt' parameter must be csv; use fmt=csv", "use --format csv"),
        ("a seed=3 stays as it is", "a seed=3 stays as it is"),
    ],
)
def test_library_keywords_are_shown_as_flags(message, shown):
    assert shown in _as_flags(message, main.commands)
