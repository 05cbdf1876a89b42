#!/usr/bin/env python3
"""Should the model fit use the replaced value of a flagged month? Scored
against the TRUE demand of a generated set.

For each seed: `provisio generate --true-demand` with data-entry errors and
campaign months, then `provisio forecast --until` (the last 12 months
hidden) with and without --replace-outliers. The 12 projected months are
compared with the true demand summed over sites (product-months where a
site wrote no row are left out). Prints WAPE and bias of both runs, and
the share of products whose absolute error went down with replacement.

    python3 benches/outlier_replacement.py target/release/provisio [SEEDS...]

Standard library only.
"""

import csv
import os
import subprocess
import sys
import tempfile
from collections import defaultdict

PRODUCTS, SITES, MONTHS = 150, 2, 60
# Overridable from the environment, e.g. ENTRY_ERRORS=0 to score campaigns alone.
ENTRY_ERRORS = os.environ.get("ENTRY_ERRORS", "0.01")
CAMPAIGNS = os.environ.get("CAMPAIGNS", "0.02")


def shift(month, k):
    y, m = int(month[:4]), int(month[5:7])
    t = y * 12 + (m - 1) + k
    return f"{t // 12:04d}-{t % 12 + 1:02d}"


def run(binary, *args):
    subprocess.run([binary, *args], check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


def forecast(binary, data, out, until, replace):
    args = ["forecast", data, "--out", out, "--until", until, "--horizon", "12", "--no-report", "--no-workbook", "-q"]
    args += ["--replace-outliers", "true" if replace else "false"]
    run(binary, *args)
    with open(os.path.join(out, "forecast.csv"), newline="", encoding="utf-8") as f:
        return {(r["product"], r["month"]): float(r["forecast"]) for r in csv.DictReader(f) if r.get("bridged", "no") == "no"}


def main():
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    binary, seeds = sys.argv[1], sys.argv[2:] or ["31", "32"]
    for seed in seeds:
        with tempfile.TemporaryDirectory() as tmp:
            data = os.path.join(tmp, "g.csv")
            run(binary, "generate", "--products", str(PRODUCTS), "--sites", str(SITES), "--months", str(MONTHS),
                "--seed", seed, "--true-demand", "--entry-errors", ENTRY_ERRORS, "--campaigns", CAMPAIGNS,
                "--out", data, "-q")
            truth = defaultdict(float)
            rows = defaultdict(int)
            with open(data, newline="", encoding="utf-8") as f:
                for r in csv.DictReader(f):
                    truth[(r["product"], r["month"])] += float(r["true_demand"])
                    rows[(r["product"], r["month"])] += 1
            last = max(m for _, m in truth)
            until = shift(last, -12)
            runs = {rep: forecast(binary, data, os.path.join(tmp, f"o{rep}"), until, rep) for rep in (False, True)}
            keys = [k for k in runs[False] if k[1] > until and rows[k] == SITES and k in runs[True]]
            total = sum(truth[k] for k in keys)
            print(f"seed {seed}: {PRODUCTS} products x {SITES} sites, {MONTHS} months, entry errors {ENTRY_ERRORS}, "
                  f"campaigns {CAMPAIGNS}; scored on {len(keys)} product-months after {until}")
            err = {}
            for rep in (False, True):
                f = runs[rep]
                wape = 100 * sum(abs(f[k] - truth[k]) for k in keys) / total
                bias = 100 * sum(f[k] - truth[k] for k in keys) / total
                per = defaultdict(float)
                for k in keys:
                    per[k[0]] += abs(f[k] - truth[k])
                err[rep] = per
                print(f"  replace {'on ' if rep else 'off'}: WAPE {wape:.2f}%  bias {bias:+.2f}%")
            better = sum(1 for p in err[False] if err[True][p] < err[False][p] - 1e-9)
            worse = sum(1 for p in err[False] if err[True][p] > err[False][p] + 1e-9)
            print(f"  replacement lowered the error of {better} products, raised it for {worse}")


if __name__ == "__main__":
    main()
