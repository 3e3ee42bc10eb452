"""Tests of the plain-text decision tables (prunebench.text_decision)."""

from __future__ import annotations

import pandas as pd

from prunebench.text_decision import effects_text


def test_effects_text_shows_the_ratio_both_intervals_and_the_verdict():
    common = {"family": "classification", "factor": "rule", "level": "1se", "reference": "min",
              "n_datasets": 5, "note": "", "tau2": 0.0, "i2": 0.0, "margin": 0.01}  # fmt: skip
    table = pd.DataFrame(
        [
            {**common, "metric": "error", "estimate": 0.004, "ci_low": -0.002, "ci_high": 0.01,
             "pi_low": -0.02, "pi_high": 0.03, "verdict": "undecided"},
            {**common, "metric": "n_leaves", "estimate": -0.46, "ci_low": -0.6, "ci_high": -0.33,
             "pi_low": -0.9, "pi_high": 0.0, "verdict": "smaller", "ratio": 0.63,
             "ratio_low": 0.55, "ratio_high": 0.72, "margin": float("nan")},
        ]
    )  # fmt: skip
    text = effects_text(table, 0.05)
    (row,) = [line for line in text.splitlines() if line.startswith("rule 1se vs min")]
    assert "+0.004 [-0.002,+0.010]" in row and "[-0.020,+0.030]" in row
    assert "×0.63 [0.55, 0.72]" in row and row.split()[-2:] == ["undecided", "smaller"]
    assert "across 5 data sets; margin ±0.01" in text
    assert max(len(line) for line in text.splitlines()) <= 100
