"""Writes an open benchmark of monthly series, in provisio's input contract,
for `provisio evaluate` (does per-product selection beat the best single
model on months no selection step saw?).

Every series comes from a dataset shipped inside a general-purpose Python
package (no download), pinned in requirements.txt:

- AirPassengers (statsforecast 2.1.1 copy via pmdarima 2.1.1 `load_airpassengers`),
  monthly 1949-1960, whole series;
- wineind (pmdarima `load_wineind`), Australian wine sales, monthly 1980-1994, whole;
- PBS immune sera (sktime 1.2.0 `load_PBS_dataset`), Australian pharmaceutical
  scripts, monthly 1991-2008, whole;
- elnino (statsmodels 0.15.0 `datasets.elnino`), monthly sea surface
  temperature 1950-2010, cut into non-overlapping 120-month windows;
- co2 (statsmodels `datasets.co2`), Mauna Loa weekly CO2, averaged to
  calendar months (months with no reading dropped and left missing),
  1958-2001, cut into 120-month windows;
- sunspots (pmdarima `load_sunspots`), monthly 1749-1983, the last six
  120-month windows (older records are coarse).

Windows are labelled with their source and start. Run:

    /tmp/refvenv/bin/python tests/reference/open_benchmark.py > datasets/open/monthly.csv
"""
import csv
import sys

import numpy as np
import pandas as pd
import pmdarima.datasets as pmd
import statsmodels.api as sm
import sktime.datasets as skd

WINDOW = 120


def months(start_year, start_month, n):
    y, m = start_year, start_month
    for _ in range(n):
        yield f"{y:04d}-{m:02d}"
        m += 1
        if m > 12:
            y, m = y + 1, 1


def emit(out, name, start_year, start_month, values):
    for month, v in zip(months(start_year, start_month, len(values)), values):
        out.writerow([name, month, "" if v is None or (isinstance(v, float) and np.isnan(v)) else f"{v:.6g}"])


def windows(out, label, start_year, start_month, values, keep_last=None):
    n = len(values) // WINDOW
    starts = list(range(n))
    if keep_last is not None:
        starts = starts[-keep_last:]
    off = len(values) - n * WINDOW  # align windows to the end of the series
    for k in starts:
        i = off + k * WINDOW
        y = start_year + (start_month - 1 + i) // 12
        m = (start_month - 1 + i) % 12 + 1
        emit(out, f"{label} {y:04d}-{m:02d}", y, m, values[i : i + WINDOW])


def main():
    out = csv.writer(sys.stdout, lineterminator="\n")
    out.writerow(["product", "month", "consumed"])
    emit(out, "AirPassengers", 1949, 1, list(pmd.load_airpassengers()))
    emit(out, "wineind", 1980, 1, list(pmd.load_wineind()))
    pbs = skd.load_PBS_dataset()
    start = pbs.index[0]
    emit(out, "PBS immune sera", start.year, start.month, list(pbs.values.ravel()))
    el = sm.datasets.elnino.load_pandas().data
    el_values = el.drop(columns=["YEAR"]).values.ravel().tolist()
    windows(out, "elnino", int(el["YEAR"].iloc[0]), 1, el_values)
    co2 = sm.datasets.co2.load_pandas().data["co2"]
    monthly = co2.resample("MS").mean()
    monthly = monthly[monthly.index.year >= 1959]
    windows(out, "co2", monthly.index[0].year, monthly.index[0].month, monthly.tolist())
    sun = list(pmd.load_sunspots())
    windows(out, "sunspots", 1749, 1, sun, keep_last=6)


if __name__ == "__main__":
    main()
