"""Tests of ``python -m prunebench`` (prunebench.__main__)."""

from __future__ import annotations

import subprocess
import sys

from prunebench.cli import main


def test_python_dash_m_runs_the_same_command_line():
    ran = subprocess.run(
        [sys.executable, "-m", "prunebench", "--help"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert ran.returncode == 0, ran.stderr
    # the console script's help, under the same program name, naming every command
    assert ran.stdout.startswith("Usage: prunebench ")
    for name in main.commands:
        assert f"\n  {name} " in ran.stdout
    bad = subprocess.run(
        [sys.executable, "-m", "prunebench", "no-such-command"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert bad.returncode == 2 and "no-such-command" in bad.stderr
