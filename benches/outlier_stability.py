#!/usr/bin/env python3
"""Do outlier flags echo? Share of flags that change when the last 12 months
are cut off.

Cleans DATA twice with `provisio clean`: the whole file, and the file less
its last 12 months. Over the months both runs judge, a flag "changes" when
it is set in one run and not the other. Prints the flags of each run, the
number that changed, and changed / (flags in either run).

    python3 benches/outlier_stability.py target/release/provisio datasets/demo/consumption.csv [CLEAN OPTIONS...]

Further arguments are passed to `provisio clean` (e.g. --outlier-threshold 5).

Standard library only; the input's month column is `month` (YYYY-MM).
"""

import csv
import os
import subprocess
import sys
import tempfile


def shift(month, k):
    y, m = int(month[:4]), int(month[5:7])
    t = y * 12 + (m - 1) + k
    return f"{t // 12:04d}-{t % 12 + 1:02d}"


def flags(binary, data, out, extra):
    subprocess.run(
        [binary, "clean", data, "--out", out, "-q", *extra],
        check=True,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    with open(os.path.join(out, "cleaned.csv"), newline="", encoding="utf-8") as f:
        return {(r["product"], r["month"]) for r in csv.DictReader(f) if r["outlier"] == "yes"}


def main():
    if len(sys.argv) < 3:
        sys.exit(__doc__)
    binary, data, extra = sys.argv[1], sys.argv[2], sys.argv[3:]
    with open(data, newline="", encoding="utf-8") as f:
        reader = csv.DictReader(f)
        header = reader.fieldnames
        rows = list(reader)
    last = max(r["month"][:7] for r in rows)
    cut = shift(last, -12)
    with tempfile.TemporaryDirectory() as tmp:
        short = os.path.join(tmp, "short.csv")
        with open(short, "w", newline="", encoding="utf-8") as f:
            w = csv.DictWriter(f, fieldnames=header)
            w.writeheader()
            w.writerows(r for r in rows if r["month"][:7] <= cut)
        full = {k for k in flags(binary, data, os.path.join(tmp, "full"), extra) if k[1] <= cut}
        less = flags(binary, short, os.path.join(tmp, "short"), extra)
    either = full | less
    changed = full ^ less
    share = len(changed) / len(either) if either else 0.0
    print(
        f"{data}: up to {cut}: {len(full)} flags with the full history, "
        f"{len(less)} without its last 12 months; {len(changed)} changed "
        f"of {len(either)} = {100 * share:.1f}%"
    )


if __name__ == "__main__":
    main()
