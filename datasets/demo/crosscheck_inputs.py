"""Writes the demo's invented services file (datasets/demo/services.csv).

Invented data: the tests performed are the demo's own reported consumption
of two test kits, divided by the units per test and allowance, times a
made-up factor and a little deterministic noise. Nothing here is real.
Run from the project folder: python3 datasets/demo/crosscheck_inputs.py
"""
import csv
import random

PRODUCTS = {
    # product: (units per service, allowance, invented factor)
    "Malaria rapid diagnostic test": (1, 0.05, 1.00),
    "HIV rapid test kit (newly scaled up)": (1, 0.10, 0.92),
}

rng = random.Random(9)
rows = []
with open("datasets/demo/consumption.csv", newline="", encoding="utf-8") as f:
    for r in csv.DictReader(f):
        if r["product"] not in PRODUCTS:
            continue
        ups, allowance, factor = PRODUCTS[r["product"]]
        if r["consumed"] == "":
            services = ""
        else:
            q = float(r["consumed"])
            services = str(round(q / (ups * (1 + allowance)) * factor * rng.uniform(0.96, 1.04)))
        rate = r["reporting_rate"].rstrip("%") + "%" if r["reporting_rate"] else ""
        rows.append([r["product"], r["site"], r["month"], services, ups, allowance, rate])

with open("datasets/demo/services.csv", "w", newline="", encoding="utf-8") as f:
    w = csv.writer(f, lineterminator="\n")
    w.writerow(["product", "site", "month", "services", "units_per_service", "allowance", "reporting_rate"])
    w.writerows(rows)
print(len(rows), "rows")
