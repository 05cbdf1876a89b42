"""Writes the open reference series of datasets.json as one long CSV in
provisio's input contract (standard library only), for `provisio evaluate`.

    python3 tests/reference/datasets_to_csv.py > /tmp/reference.csv
"""
import csv
import json
import pathlib
import sys

here = pathlib.Path(__file__).parent
data = json.loads((here / "datasets.json").read_text())["datasets"]
out = csv.writer(sys.stdout)
out.writerow(["product", "month", "consumed"])
for name in ["AirPassengers", "wineind", "PBS_immune_sera"]:
    d = data[name]
    year, month = map(int, d["start"].split("-"))
    for v in d["values"]:
        out.writerow([name, f"{year:04d}-{month:02d}", v])
        month += 1
        if month > 12:
            year, month = year + 1, 1
