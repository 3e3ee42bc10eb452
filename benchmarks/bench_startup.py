"""Benchmark: how fast the command line starts, against a bare Python start.

Times, side by side in one run, the wall time of ``prunebench --help`` and
``prunebench sql --db X "select 1"`` against ``python -c pass`` (median of
several runs each, interleaved so a busy machine slows all three alike), and
prints the ratios and which heavy libraries each command imported.
Target: both commands within 0.3 s of wall time.

Run: python benchmarks/bench_startup.py [--runs 9]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("sklearn", "pandas", "scipy", "matplotlib", "optuna", "seaborn")
# runs the command line in-process, then says which heavy libraries it pulled in
_PROBE = (
    "import sys\n"
    "from prunebench.cli import main\n"
    "try:\n"
    "    main(args=sys.argv[1:], prog_name='prunebench')\n"
    "except SystemExit:\n"
    "    pass\n"
    f"print('loaded:', ' '.join(m for m in {HEAVY!r} if m in sys.modules) or 'none', "
    "file=sys.stderr)\n"
)


def _wall(cmd: list[str], env: dict) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    return time.perf_counter() - t0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=9)
    args = parser.parse_args()
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "empty.sqlite"
        subprocess.run(
            [
                sys.executable,
                "-c",
                f"from prunebench.store import ResultStore; ResultStore({str(db)!r}).close()",
            ],
            env=env,
            check=True,
        )
        cli = [sys.executable, "-m", "prunebench.cli"]
        commands = {
            "python -c pass": [sys.executable, "-c", "pass"],
            "prunebench --help": [*cli, "--help"],
            'prunebench sql --db X "select 1"': [*cli, "sql", "--db", str(db), "select 1"],
        }
        for cmd in commands.values():  # warm the file cache
            _wall(cmd, env)
        times: dict[str, list[float]] = {name: [] for name in commands}
        for _ in range(args.runs):
            for name, cmd in commands.items():
                times[name].append(_wall(cmd, env))
        loaded = {}
        for name, cmd in commands.items():
            if name.startswith("prunebench"):
                probe = [sys.executable, "-c", _PROBE, *cmd[3:]]
                out = subprocess.run(probe, env=env, capture_output=True, text=True, check=True)
                loaded[name] = out.stderr.strip().splitlines()[-1].removeprefix("loaded: ")
    base = statistics.median(times["python -c pass"])
    print(f"median of {args.runs} runs each, interleaved; Python {sys.version.split()[0]}")
    print(f"{'command':<34} {'median s':>8} {'x python':>8} {'+ s':>6}  heavy libraries loaded")
    for name, values in times.items():
        median = statistics.median(values)
        print(
            f"{name:<34} {median:>8.3f} {median / base:>8.2f} {median - base:>6.3f}  "
            f"{loaded.get(name, '-')}"
        )


if __name__ == "__main__":
    main()
