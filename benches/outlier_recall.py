#!/usr/bin/env python3
"""Are entry errors flagged? Flags of `provisio clean` against a generated
file's true demand.

A row counts as an entry error when its reported quantity is over 4x or
under 1/4 of its true demand times the reporting rate and the share of
days in stock (rows with over 15 stockout days are left out: cleaning
treats them as missing anyway). Prints the number of such rows, how many
`outlier-flagged` entries of the adjustment log hit them, and how many
flags fell on other rows.

    target/release/provisio generate --products 300 --sites 3 --months 60 --seed 5 \\
        --true-demand --entry-errors 0.01 --out g.csv
    python3 benches/outlier_recall.py target/release/provisio g.csv

Standard library only.
"""

import csv
import os
import subprocess
import sys
import tempfile


def main():
    if len(sys.argv) < 3:
        sys.exit(__doc__)
    binary, data = sys.argv[1], sys.argv[2]
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([binary, "clean", data, "--out", tmp, "-q"], check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        with open(os.path.join(tmp, "adjustments.csv"), newline="", encoding="utf-8") as f:
            flags = {(r["product"], r["site"], r["month"]) for r in csv.DictReader(f)
                     if r["rule"] == "outlier-flagged"}
    errors = set()
    with open(data, newline="", encoding="utf-8") as f:
        for r in csv.DictReader(f):
            if not r["consumed"] or not r["true_demand"]:
                continue
            out_days = float(r["stockout_days"] or 0)
            if out_days > 15:
                continue
            rate = float(r["reporting_rate"].rstrip("%")) / 100 if r["reporting_rate"] else 1.0
            expected = float(r["true_demand"]) * rate * (1 - out_days / 30)
            got = float(r["consumed"])
            if expected > 0 and (got > 4 * expected or 0 < got < expected / 4):
                errors.add((r["product"], r["site"], r["month"]))
    print(f"{data}: {len(errors)} rows off their true demand by over 4x; "
          f"{len(errors & flags)} flagged; {len(flags - errors)} flags on other rows")


if __name__ == "__main__":
    main()
