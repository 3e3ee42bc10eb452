"""Benchmark: the quickstart study with 1 and 2 workers, and the share spent writing.

Runs ``studies/quickstart.toml`` (or another study) into fresh temporary
databases, once with one worker and once with two, in one run, and prints
trials per minute for each, the speed-up, and the share of the sweep's wall
time spent storing results in SQLite. Targets: speed-up >= 1.7 on two cores;
writing <= 3% of the time.

Run: python benchmarks/bench_conduct.py [--study studies/quickstart.toml]
"""

from __future__ import annotations

import argparse
import io
import tempfile
from pathlib import Path

from prunebench.execute import Progress, conduct
from prunebench.study import load_study

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--study", default=str(ROOT / "studies" / "quickstart.toml"))
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    args = parser.parse_args()
    study = load_study(args.study)
    print(f"study {study.name!r}: {len(study.trials())} trials in {len(study.groups())} groups")
    print(f"{'workers':>7} {'seconds':>8} {'trials/min':>10} {'speed-up':>8} {'writing':>8}")
    base = None
    with tempfile.TemporaryDirectory() as tmp:
        for workers in args.workers:
            db = Path(tmp) / f"w{workers}.sqlite"
            s = conduct(study, db, workers=workers, progress=Progress(0, io.StringIO()))
            rate = s.done / s.seconds * 60
            base = base or rate
            print(
                f"{workers:>7} {s.seconds:>8.1f} {rate:>10.1f} {rate / base:>7.2f}x "
                f"{s.write_seconds / s.seconds:>7.2%}",
                flush=True,
            )


if __name__ == "__main__":
    main()
