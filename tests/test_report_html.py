"""Tests of the report's HTML building blocks (prunebench.report_html)."""

from __future__ import annotations

import pytest

from prunebench.report_html import format_number


@pytest.mark.parametrize(
    "value, metric, signed, expected",
    [
        (-0.0001, "error", False, "0.000"),  # never "-0.000"
        (-0.0001, "error", True, "0.000"),
        (0.12345, "error", False, "0.123"),
        (0.004, "brier", True, "+0.004"),
        (-0.02, "log_loss", True, "−0.020"),
        (3421.456, "mse", False, "3421"),
        (123456.7, "mse", False, "123,457"),
        (0.001234, "mse", False, "0.001234"),
        (float("nan"), "error", False, "—"),
        (None, "mse", False, "—"),
        (True, None, False, "yes"),
        (7, None, False, "7"),
    ],
)
def test_format_number_per_metric(value, metric, signed, expected):
    assert format_number(value, metric, signed) == expected
