"""Benchmark: a Dask LocalCluster against the local process pool, and memory at 100k rows.

Runs the same study (default: the quickstart) into fresh databases with the local
pool of two workers and with a LocalCluster of two single-threaded worker
processes, in one run, and prints trial groups per minute for each and their
ratio (on two cores expect near parity). Then conducts one trial group on a
100,000-row waveform sample in a subprocess and prints its peak resident memory.

Run: python benchmarks/bench_cluster.py [--study studies/quickstart.toml]
"""

from __future__ import annotations

import argparse
import io
import subprocess
import sys
import tempfile
from pathlib import Path

from prunebench.execute import Progress, conduct
from prunebench.study import load_study

ROOT = Path(__file__).resolve().parents[1]
BIG = """
import io, resource, sys
from prunebench.execute import conduct, Progress
from prunebench.study import parse_study
study = parse_study('''name = "big"
seed = 1
datasets = [{ name = "waveform", n_samples = 100000, seed = 1 }]
[outer]
repeats = 1
folds = 5
[factors]
inner_folds = [5]
rule = ["min", "1se"]
''')
summary = conduct(study, sys.argv[1], progress=Progress(0, io.StringIO()))
print(summary.seconds, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--study", default=str(ROOT / "studies" / "quickstart.toml"))
    args = parser.parse_args()
    from distributed import Client, LocalCluster

    study = load_study(args.study)
    groups = len(study.groups())
    print(f"study {study.name!r}: {groups} trial groups")
    with tempfile.TemporaryDirectory() as tmp:
        local = conduct(
            study, Path(tmp) / "local.sqlite", workers=2, progress=Progress(0, io.StringIO())
        )
        with (
            LocalCluster(
                n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
            ) as cluster,
            Client(cluster) as client,
        ):
            dask = conduct(
                study,
                Path(tmp) / "dask.sqlite",
                cluster=client,
                progress=Progress(0, io.StringIO()),
            )
        local_rate = groups / local.seconds * 60
        dask_rate = groups / dask.seconds * 60
        print(
            f"local pool, 2 workers:         {local.seconds:7.1f} s  {local_rate:7.1f} groups/min"
        )
        print(f"Dask LocalCluster, 2 workers:  {dask.seconds:7.1f} s  {dask_rate:7.1f} groups/min")
        print(f"ratio (Dask / local):          {dask_rate / local_rate:7.2f}")
        out = subprocess.run(
            [sys.executable, "-c", BIG, str(Path(tmp) / "big.sqlite")],
            capture_output=True,
            text=True,
            check=True,
        )
        seconds, rss = out.stdout.split()
        print(
            f"100,000-row waveform, one group of 2 trials, 5 outer x 5 inner folds: "
            f"{float(seconds):.1f} s, peak resident memory {int(rss) / 1024:.0f} MiB"
        )


if __name__ == "__main__":
    main()
