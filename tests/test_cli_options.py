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


def test_json_keeps_small_p_values_the_csv_keeps(capsys):
    import csv
    import io
    import json

    import pandas as pd

    from prunebench.cli_options import _emit

    frame = pd.DataFrame({"p": [8.950422389471835e-14, 0.0625], "k": pd.array([5, None], "Int64")})
    assert _emit(frame, True, False)
    as_json = json.loads(capsys.readouterr().out)
    assert _emit(frame, False, True)
    as_csv = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [r["p"] for r in as_json] == [float(r["p"]) for r in as_csv]
    assert as_json[0]["p"] == pytest.approx(8.950422389471835e-14, rel=1e-12)
    assert [r["k"] for r in as_json] == [5, None]
